"""Side-by-side benchmark: the engine against the numpy + scipy reference on the same inputs.

For each workload (E, variables, points) it writes one table of coupled logistic maps, then
alternates, round after round, one run of the engine's `side_by_side` example (one thread) and
one run of ensemble_reference.py (one thread), both on that table, and prints the ratio of
their CPU times: median and range over the rounds. Before timing anything it checks that both
give the same skill for every ordered pair at the full library, to 1e-9.

    cargo build --release --locked -p crossmap-engine --example side_by_side
    python3 -m venv .venv && .venv/bin/pip install -r crates/crossmap-engine/benches/reference/requirements.txt
    .venv/bin/python crates/crossmap-engine/benches/reference/side_by_side.py --preset quick

(`scripts/side-by-side-bench.sh quick|full` does all three.) It is a benchmark, never a test,
and never runs inside the tool.
"""

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(var, "1")

import numpy as np  # noqa: E402
import scipy  # noqa: E402

sys.path.insert(0, str(Path(__file__).parent))
import ensemble_reference as ref  # noqa: E402

# (E, variables, points, replicates); 10 log-spaced library sizes each.
PRESETS = {
    "quick": [(2, 3, 1000, 20), (3, 4, 1000, 20), (5, 4, 500, 20), (8, 3, 1000, 20)],
    "full": [
        (2, 3, 1000, 100), (2, 3, 4000, 20),
        (3, 4, 1000, 100), (3, 20, 2000, 10),
        (5, 4, 1000, 100), (5, 10, 4000, 10),
        (8, 4, 1000, 100), (8, 20, 500, 30),
    ],
}
TARGET = {2: 30, 3: 30, 5: 100, 8: 100}
SIZES = 10
TOLERANCE = 1e-9


def logistic_ring(n_vars, n_points, burn=100):
    """A ring of logistic maps, each forced by its neighbour (the coupled logistic maps of
    Sugihara et al. 2012 extended to a ring; r from 3.6 to 3.875, coupling 0.05)."""
    j = np.arange(n_vars)
    x = 0.2 + 0.05 * (j % 12)
    r = 3.6 + 0.025 * (j % 12)
    out = np.empty((n_points, n_vars))
    for t in range(n_points + burn):
        x = x * (r - r * x - 0.05 * np.roll(x, 1))
        if t >= burn:
            out[t - burn] = x
    return out


def run_engine(binary, table_path, e, replicates, seed):
    cmd = [str(binary), "--input", str(table_path), "--e", str(e), "--sizes", str(SIZES),
           "--replicates", str(replicates), "--seed", str(seed), "--threads", "1"]
    done = subprocess.run(cmd, check=True, capture_output=True, text=True)
    return json.loads(done.stdout)


def run_reference(series, e, sizes, replicates, seed):
    start = time.process_time()
    out = ref.ensembles(series, e, 1, sizes, replicates, seed)
    return time.process_time() - start, out


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--preset", choices=sorted(PRESETS), default="quick")
    parser.add_argument("--rounds", type=int, default=3, help="alternated rounds per workload")
    parser.add_argument("--engine", type=Path,
                        default=Path(__file__).resolve().parents[4]
                        / "target/release/examples/side_by_side",
                        help="the built side_by_side example")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--json", type=Path, help="also write the figures here")
    args = parser.parse_args()
    if not args.engine.exists():
        sys.exit(f"{args.engine} not found: build it with "
                 "`cargo build --release --locked -p crossmap-engine --example side_by_side`")
    print(f"numpy {np.__version__}, scipy {scipy.__version__}; {os.cpu_count()} cores; "
          f"load average at start {os.getloadavg()[0]:.2f}")
    print("CPU time on one thread (engine: --threads 1; reference: cKDTree workers=1); "
          f"ratio = reference / engine, median [min-max] over {args.rounds} alternated rounds")
    header = (f"{'E':>2} {'vars':>4} {'points':>6} {'reps':>4} {'engine ms':>10} "
              f"{'reference s':>11} {'ratio':>8} {'range':>15} {'target':>6} {'max |diff|':>10}")
    print(header)
    rows, failed = [], False
    with tempfile.TemporaryDirectory() as work:
        for e, n_vars, n_points, reps in PRESETS[args.preset]:
            series = logistic_ring(n_vars, n_points)
            path = Path(work) / f"table_{e}_{n_vars}_{n_points}.csv"
            with open(path, "w") as f:
                f.write(",".join(f"v{j}" for j in range(n_vars)) + "\n")
                for row in series:
                    f.write(",".join(repr(float(v)) for v in row) + "\n")
            # One untimed run of each: the engine's library sizes for the reference, and the
            # full-library check.
            first = run_engine(args.engine, path, e, reps, args.seed)
            sizes = first["library_sizes"]
            _, out = run_reference(series, e, sizes, reps, args.seed)
            diff = compare(first, out)
            engine_t, ref_t = [], []
            for rnd in range(args.rounds):
                order = ("engine", "reference") if rnd % 2 == 0 else ("reference", "engine")
                for who in order:
                    if who == "engine":
                        engine_t.append(run_engine(args.engine, path, e, reps,
                                                   args.seed)["cpu_seconds_per_run"])
                    else:
                        ref_t.append(run_reference(series, e, sizes, reps, args.seed)[0])
            ratios = sorted(r / g for r, g in zip(ref_t, engine_t))
            med = statistics.median(ratios)
            ok = diff <= TOLERANCE
            failed |= not ok
            print(f"{e:>2} {n_vars:>4} {n_points:>6} {reps:>4} "
                  f"{1e3 * statistics.median(engine_t):>10.1f} {statistics.median(ref_t):>11.2f} "
                  f"{med:>7.1f}x {f'{ratios[0]:.1f}-{ratios[-1]:.1f}':>15} {TARGET[e]:>5}x "
                  f"{diff:>10.1e}{'' if ok else '  SKILLS DIFFER'}", flush=True)
            rows.append({"e": e, "variables": n_vars, "points": n_points, "replicates": reps,
                         "sizes": SIZES, "engine_cpu_s": engine_t, "reference_cpu_s": ref_t,
                         "ratio_median": med, "target": TARGET[e], "max_abs_diff": diff})
    print(f"load average at end {os.getloadavg()[0]:.2f}")
    if args.json:
        args.json.write_text(json.dumps(rows, indent=1) + "\n")
    if failed:
        sys.exit("the engine and the reference disagree at the full library")


def compare(engine, reference):
    """Largest |difference| of the full-library skill over every ordered pair."""
    worst = 0.0
    for driver, response, skill in engine["full_library_skills"]:
        theirs = reference[(driver, response)][-1]
        assert len(theirs) == 1, "the full library is one library"
        a, b = skill, theirs[0]
        if a is None or b is None or np.isnan(b):
            if not (a is None and (b is None or np.isnan(b))):
                return float("inf")
            continue
        worst = max(worst, abs(a - b))
    return worst


if __name__ == "__main__":
    main()
