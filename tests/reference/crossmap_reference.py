"""Independent numpy/scipy reference for the cross-map engine's rules.

Writes tests/reference/fixtures/crossmap_reference.json. Run with the pinned versions in
requirements.txt (numpy 2.1.3, scipy 1.14.1):

    python tests/reference/crossmap_reference.py

Rules reproduced (straightforward, unoptimised):
- delay vector at time t: (x[t], x[t - tau], ..., x[t - (E-1) tau]); vectors touching NaN dropped;
- neighbours: E+1 nearest library vectors by Euclidean distance (scipy.spatial.cKDTree), skipping
  the query itself and every vector with |t - t_query| <= theiler, and any neighbour whose target
  value (at t + lag) is missing or off the end;
- weights exp(-d_i / d_1), normalised;
- estimate of target(t + lag) for every valid query state; skill = scipy.stats.pearsonr over
  points whose observed target is finite.
Data are continuous random-looking series, so exact distance ties do not occur.
"""

import json
import math
from pathlib import Path

import numpy as np
from scipy.spatial import cKDTree
from scipy.stats import pearsonr


def embed(x, e, tau):
    times, vecs = [], []
    for t in range((e - 1) * tau, len(x)):
        v = [x[t - j * tau] for j in range(e)]
        if all(np.isfinite(v)):
            times.append(t)
            vecs.append(v)
    return np.array(times), np.array(vecs, dtype=float)


def target_at(y, t, lag):
    s = t + lag
    if s < 0 or s >= len(y) or not np.isfinite(y[s]):
        return None
    return y[s]


def neighbours(times, vecs, lib_times, tq, vq, k, theiler, accept):
    lib_idx = np.array([int(np.where(times == t)[0][0]) for t in lib_times])
    tree = cKDTree(vecs[lib_idx])
    d, i = tree.query(vq, k=len(lib_idx))
    d, i = np.atleast_1d(d), np.atleast_1d(i)
    out = []
    for dist, j in zip(d, i):
        t = int(times[lib_idx[j]])
        if abs(t - tq) <= theiler or not accept(t):
            continue
        out.append((t, float(dist)))
        if len(out) == k:
            break
    return out


def weights(dists):
    d1 = dists[0]
    if d1 > 0:
        w = np.exp(-np.asarray(dists) / d1)
    else:
        w = np.array([1.0 if d == 0 else 0.0 for d in dists])
    return w / w.sum()


def cross_map(response, driver, e, tau, theiler, lib_times, lag):
    times, vecs = embed(response, e, tau)
    est = [None] * len(response)
    ests, obs = [], []
    for tq, vq in zip(times, vecs):
        o = target_at(driver, int(tq), lag)
        if o is None:
            continue
        nb = neighbours(times, vecs, lib_times, int(tq), vq, e + 1, theiler,
                        lambda t: target_at(driver, t, lag) is not None)
        if len(nb) < e + 1:
            continue
        w = weights([d for _, d in nb])
        value = float(sum(wi * driver[t + lag] for wi, (t, _) in zip(w, nb)))
        est[int(tq)] = value
        ests.append(value)
        obs.append(o)
    skill = float(pearsonr(ests, obs).statistic)
    return est, skill, len(ests)


def coupled_logistic(n, x0=0.4, y0=0.2, bxy=0.0, byx=0.1):
    x, y = [x0], [y0]
    for t in range(n - 1):
        x.append(x[t] * (3.8 - 3.8 * x[t] - bxy * y[t]))
        y.append(y[t] * (3.5 - 3.5 * y[t] - byx * x[t]))
    return np.array(x), np.array(y)


def clean(v):
    return [None if (u is None or not math.isfinite(u)) else u for u in v]


def main():
    rng = np.random.default_rng(20240611)
    n = 160
    x, y = coupled_logistic(n)
    # Small observation noise breaks any exact recurrences (and so distance ties).
    x = x + 1e-3 * rng.standard_normal(n)
    y = y + 1e-3 * rng.standard_normal(n)
    y[40] = np.nan  # response gap: delay vectors touching t = 40 drop out
    x[77] = np.nan  # driver gap: neighbours with target at 77 are skipped, target 77 excluded
    cases = []
    for e, tau, theiler, lib_size, lags in [(2, 1, 1, 60, [0, -2, 1]), (3, 2, 4, 90, [0, -1]), (1, 1, 0, 25, [0])]:
        times, vecs = embed(y, e, tau)
        lib_times = sorted(int(t) for t in rng.choice(times, size=lib_size, replace=False))
        queries = []
        for tq in [int(times[0]), int(times[5]), int(times[len(times) // 2]), int(times[-1])]:
            vq = vecs[np.where(times == tq)[0][0]]
            nb = neighbours(times, vecs, lib_times, tq, vq, e + 1, theiler, lambda t: True)
            queries.append({"time": tq, "neighbour_times": [t for t, _ in nb], "distances": [d for _, d in nb]})
        maps = []
        for lag in lags:
            est, skill, count = cross_map(y, x, e, tau, theiler, lib_times, lag)
            maps.append({"lag": lag, "estimates": clean(est), "skill": skill, "predicted": count})
        cases.append({"e": e, "tau": tau, "theiler": theiler, "library_times": lib_times,
                      "queries": queries, "cross_maps": maps})
    simplex = []
    all_times = None
    for e, tau, theiler, horizon in [(1, 1, 0, 1), (2, 1, 1, 1), (3, 1, 2, 3), (2, 2, 2, 2)]:
        all_times, _ = embed(x, e, tau)
        est, skill, count = cross_map(x, x, e, tau, theiler, [int(t) for t in all_times], horizon)
        simplex.append({"e": e, "tau": tau, "theiler": theiler, "horizon": horizon,
                        "predictions": clean(est), "skill": skill, "predicted": count})
    out = {
        "source": "tests/reference/crossmap_reference.py (numpy %s, scipy cKDTree/pearsonr %s)"
                  % (np.__version__, __import__("scipy").__version__),
        "response": clean(list(y)),
        "driver": clean(list(x)),
        "cases": cases,
        "simplex_series": clean(list(x)),
        "simplex": simplex,
    }
    path = Path(__file__).parent / "fixtures" / "crossmap_reference.json"
    path.write_text(json.dumps(out, indent=1) + "\n")
    print("wrote", path)


if __name__ == "__main__":
    main()
