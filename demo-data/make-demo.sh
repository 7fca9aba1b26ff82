#!/usr/bin/env bash
# Regenerates lagoon.csv and answer-key.csv from lagoon-spec.toml with the project's simulator,
# renaming the simulator's columns to the scenario's names.
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
bin="${CCM_TRIAGE:-$here/../target/release/ccm-triage}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
"$bin" simulate "$here/lagoon-spec.toml" --out "$work" --quiet >/dev/null
cr="$work/consumer_resource-0001.csv"
lz="$work/lorenz-0000.csv"
# Simulator column -> scenario name (consumer_resource-0001: R_1 C_1 R_2 R_3 C_3; lorenz x_1).
declare -A name=([R_1]=algae_north [C_1]=grazers_north [R_2]=algae_channel [R_3]=algae_south [C_3]=grazers_south)
paste -d, "$cr" <(cut -d, -f2 "$lz") | awk -F, -v OFS=, 'NR==1{$0="t,algae_north,grazers_north,algae_channel,algae_south,grazers_south,wind_index"}1' > "$here/lagoon.csv"
{
  echo "driver,response,label"
  grep '^consumer_resource-0001,' "$work/truth.csv" | while IFS=, read -r _ d r l; do
    echo "${name[$d]},${name[$r]},$l"
  done
  for v in algae_north grazers_north algae_channel algae_south grazers_south; do
    echo "wind_index,$v,independent"
    echo "$v,wind_index,independent"
  done
} > "$here/answer-key.csv"
echo "wrote $here/lagoon.csv and $here/answer-key.csv"
