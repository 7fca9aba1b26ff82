#!/usr/bin/env bash
# Side-by-side benchmark: the engine against a plain numpy + scipy (cKDTree) implementation of the
# same ensembles, on the same generated inputs, alternated in one run, one thread each.
#
#   scripts/side-by-side-bench.sh [quick|full] [--rounds N]
#
# Builds the engine's `side_by_side` example (release), makes a virtual environment with the
# pinned reference requirements in target/side-by-side-venv (once), then runs
# crates/crossmap-engine/benches/reference/side_by_side.py, which checks that both give the same
# skill for every ordered pair at the full library (to 1e-9) and prints the CPU-time ratio per
# workload (E = 2, 3, 5, 8; 3-20 variables; 500-4,000 points). quick: about a minute on the
# 2-core machine; full: about 15 minutes. It is a benchmark, never a test, and never part of the
# tool.
set -euo pipefail
root=$(cd "$(dirname "$0")/.." && pwd)
preset=${1:-quick}
shift $(( $# > 0 ? 1 : 0 ))
cd "$root"
cargo build --release --locked -p crossmap-engine --example side_by_side
venv=target/side-by-side-venv
if [ ! -x "$venv/bin/python" ]; then
    python3 -m venv "$venv"
    "$venv/bin/pip" install --quiet -r crates/crossmap-engine/benches/reference/requirements.txt
fi
exec "$venv/bin/python" crates/crossmap-engine/benches/reference/side_by_side.py --preset "$preset" "$@"
