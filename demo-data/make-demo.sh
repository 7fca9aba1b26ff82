#!/usr/bin/env bash
# Regenerates sound.csv and answer-key.csv from sound-spec.toml with the project's simulator:
# the first one-way logistic pair, the first forced population and the first two-bed Moran
# system, side by side with the first variable of a Lorenz system, renamed to the scenario.
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
bin="${CCM_TRIAGE:-$here/../target/release/ccm-triage}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
"$bin" simulate "$here/sound-spec.toml" --out "$work" --quiet >/dev/null
truth="$work/truth.csv"
# The first system whose answer key has row "$2" and whose table has $3 columns of series.
first() {
  for f in "$work"/canon_"$1"-*.csv; do
    s=$(basename "$f" .csv)
    if grep -q "^$s,$2\$" "$truth" && [ "$(head -1 "$f" | awk -F, '{print NF-1}')" = "$3" ]; then
      echo "$f"; return
    fi
  done
  echo "no $1 system with $2 in the spec's draws" >&2; exit 1
}
fish=$(first logistic_pair "x,y,direct" 2)
fish_key=$(basename "$fish" .csv)
grep -q "^$fish_key,y,x,independent\$" "$truth" || { echo "$fish_key is not one-way" >&2; exit 1; }
kelp=$(first forced_population "env,n,direct" 2)
beds=$(first moran_pair "n1,n2,confounded" 2)
wind="$work/lorenz-0000.csv"
paste -d, "$fish" <(cut -d, -f2- "$kelp") <(cut -d, -f2- "$beds") <(cut -d, -f2 "$wind") |
  awk -F, -v OFS=, 'NR==1{$0="t,sandeel_index,puffin_chicks,sea_temperature,kelp_cover,mussels_east,mussels_west,wind_index"}1' > "$here/sound.csv"
names=(sandeel_index puffin_chicks sea_temperature kelp_cover mussels_east mussels_west wind_index)
{
  echo "driver,response,label"
  for d in "${names[@]}"; do
    for r in "${names[@]}"; do
      [ "$d" = "$r" ] && continue
      case "$d,$r" in
        sandeel_index,puffin_chicks|sea_temperature,kelp_cover) l=direct ;;
        mussels_east,mussels_west|mussels_west,mussels_east) l=confounded ;;
        *) l=independent ;;
      esac
      echo "$d,$r,$l"
    done
  done
} > "$here/answer-key.csv"
echo "wrote $here/sound.csv and $here/answer-key.csv (from $(basename "$fish"), $(basename "$kelp"), $(basename "$beds"), lorenz-0000)"
