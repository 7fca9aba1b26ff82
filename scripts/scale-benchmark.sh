#!/usr/bin/env bash
# End-to-end scale benchmark: `ccm-triage scan` with default settings on VARS x POINTS.
#
#   cargo build --release --locked
#   scripts/scale-benchmark.sh [VARS [POINTS [extra scan flags...]]]    # default 100 x 2000
#
# The table is a ring of logistic maps, each forced by its neighbour (the coupled logistic
# maps of Sugihara et al. 2012 extended to a ring; r from 3.6 to 3.875, beta 0.05), written
# by awk so the benchmark needs nothing but the binary. Prints wall time, ordered pairs per
# second and peak resident memory (GNU time's "Maximum resident set size").
#
# Measured 2026-12-02, release build, 100 x 2000 (9,900 ordered pairs), default settings
# (12 library sizes x 100 replicates, 39 surrogates, lag profile, E chosen up to 10), on the
# shared 2-core build machine (load average about 4.5 from other builds): 591.8 s wall,
# 16.7 ordered pairs per second, 562 MiB peak resident memory. 30 x 2000 (870 pairs):
# 63.6 s, 13.7 pairs per second, 68 MiB. After the whole-table engine and with seasonal
# surrogates added (39 of each kind), 100 x 2000 on the nearly idle machine: 142.9 s wall,
# 69.3 ordered pairs per second, 619 MiB peak resident memory.
set -euo pipefail
vars=${1:-100}
points=${2:-2000}
shift $(( $# > 2 ? 2 : $# ))
bin=${CCM_TRIAGE:-$(dirname "$0")/../target/release/ccm-triage}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
awk -v V="$vars" -v N="$points" 'BEGIN {
    for (j = 0; j < V; j++) { x[j] = 0.2 + 0.05 * (j % 12); r[j] = 3.6 + 0.025 * (j % 12) }
    printf "t"; for (j = 0; j < V; j++) printf ",v%03d", j + 1; printf "\n"
    for (t = 0; t < N + 100; t++) {
        for (j = 0; j < V; j++) p[j] = x[j]
        for (j = 0; j < V; j++) x[j] = p[j] * (r[j] - r[j] * p[j] - 0.05 * p[(j + V - 1) % V])
        if (t >= 100) { printf "%d", t - 100; for (j = 0; j < V; j++) printf ",%.17g", x[j]; printf "\n" }
    }
}' >"$work/data.csv"
pairs=$((vars * (vars - 1)))
echo "workload: $vars variables x $points points = $pairs ordered pairs, default scan settings $*"
echo "machine: $(nproc) cores, $(awk '/MemTotal/ {printf "%.1f GiB", $2 / 1048576}' /proc/meminfo)"
/usr/bin/time -v "$bin" scan "$work/data.csv" --out "$work/out" --quiet "$@" \
    >"$work/stdout" 2>"$work/time"
seconds=$(awk -F': ' '/Elapsed \(wall clock\)/ {n = split($2, a, ":"); s = 0; for (i = 1; i <= n; i++) s = s * 60 + a[i]; print s}' "$work/time")
rss_kb=$(awk -F': ' '/Maximum resident set size/ {print $2}' "$work/time")
echo "wall time: ${seconds} s"
awk -v p="$pairs" -v s="$seconds" 'BEGIN { printf "throughput: %.1f ordered pairs per second\n", p / s }'
awk -v k="$rss_kb" 'BEGIN { printf "peak memory: %.0f MiB (maximum resident set size)\n", k / 1024 }'
head -1 "$work/stdout"
