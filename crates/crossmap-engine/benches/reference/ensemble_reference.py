"""A plain numpy + scipy (cKDTree) implementation of the engine's cross-map ensembles.

It is the yardstick of the side-by-side benchmark (side_by_side.py), written the way a careful
analyst would write it in a script, never run inside the tool. The rules are the engine's:

- delay vector at time t: (x[t], x[t - tau], ..., x[t - (E-1) tau]); vectors touching a missing
  value are dropped;
- for the pair driver -> response, neighbours come from the response's delay vectors and the
  driver's values are estimated (Sugihara et al. 2012), at lag 0;
- E+1 nearest library vectors by Euclidean distance (scipy.spatial.cKDTree, built once per
  library and queried for every point), leaving out every vector whose time lies within the
  Theiler window |t - t_query| <= w (the point itself always), w = tau (E - 1) (Theiler 1986);
- weights exp(-d_i / d_1), normalised; when d_1 = 0, equal weight on the zero-distance
  neighbours (Sugihara & May 1990);
- skill: Pearson r of estimates against observations over every point with E+1 neighbours;
- random libraries of L positions drawn without replacement, the library sizes given (the
  engine's log-spaced sizes, read from its output so both use the same ones), R replicates each;
  the full library (L = every usable point) is one library, computed once.

One tree and one vectorised query per (response, library); the estimates of every driver are
one einsum over the neighbour table, and the skills one vectorised Pearson r.
"""

import numpy as np
from scipy.spatial import cKDTree


def embed(x, e, tau):
    """Delay vectors of x and their times, dropping vectors that touch a missing value."""
    span = (e - 1) * tau
    times = np.arange(span, len(x))
    vectors = np.stack([x[times - j * tau] for j in range(e)], axis=1)
    keep = np.all(np.isfinite(vectors), axis=1)
    return vectors[keep], times[keep]


def table(vectors, times, library, k, theiler):
    """E+1 = k neighbours of every point among the library positions outside the Theiler window.

    Returns (positions, distances, full): positions and distances of shape (n, k) and a flag per
    point that k neighbours exist.
    """
    tree = cKDTree(vectors[library])
    # At most 2 w + 1 library members fall inside a query's window, so k + 2 w + 1 candidates
    # always hold k admissible ones when the library has that many outside the window.
    kq = min(len(library), k + 2 * theiler + 1)
    dist, idx = tree.query(vectors, k=kq, workers=1)
    dist, idx = dist.reshape(len(vectors), kq), idx.reshape(len(vectors), kq)
    pos = library[idx]
    admissible = np.abs(times[pos] - times[:, None]) > theiler
    full = admissible.sum(axis=1) >= k
    order = np.argsort(~admissible, axis=1, kind="stable")[:, :k]
    return (np.take_along_axis(pos, order, axis=1), np.take_along_axis(dist, order, axis=1),
            full)


def weights(dist):
    """exp(-d_i / d_1), normalised; equal weight on zero distances when d_1 = 0."""
    d1 = dist[:, :1]
    with np.errstate(divide="ignore", invalid="ignore"):
        w = np.where(d1 > 0, np.exp(-dist / np.where(d1 > 0, d1, 1.0)), (dist == 0) * 1.0)
    return w / w.sum(axis=1, keepdims=True)


def pearson_columns(a, b):
    """Pearson r of each column of a against the same column of b."""
    da, db = a - a.mean(axis=0), b - b.mean(axis=0)
    sxx, syy, sxy = (da * da).sum(axis=0), (db * db).sum(axis=0), (da * db).sum(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        r = sxy / (np.sqrt(sxx) * np.sqrt(syy))
    return np.where((sxx > 0) & (syy > 0), np.clip(r, -1.0, 1.0), np.nan)


def skills(vectors, times, drivers, library, k, theiler):
    """Skill for every driver column of `drivers` (shape (T, D)) under one library."""
    pos, dist, full = table(vectors, times, library, k, theiler)
    w = weights(dist[full])
    values = drivers[times[pos[full]]]  # (points, k, D)
    estimates = np.einsum("qk,qkd->qd", w, values)
    observed = drivers[times[full]]
    return pearson_columns(estimates, observed)


def ensembles(series, e, tau, library_sizes, replicates, seed):
    """Skills of every ordered pair: {(driver, response): [[skill per replicate] per size]}.

    `series` has shape (T, V); `library_sizes[response]` lists that response's sizes.
    """
    n_vars = series.shape[1]
    theiler = tau * (e - 1)
    out = {}
    for response in range(n_vars):
        vectors, times = embed(series[:, response], e, tau)
        n = len(vectors)
        others = [d for d in range(n_vars) if d != response]
        drivers = series[:, others]
        per_size = []
        for size in library_sizes[response]:
            rows = []
            for r in range(1 if size >= n else replicates):
                rng = np.random.default_rng([seed, response, size, r])
                library = np.sort(rng.choice(n, size, replace=False))
                rows.append(skills(vectors, times, drivers, library, e + 1, theiler))
            per_size.append(np.array(rows))
        for j, d in enumerate(others):
            out[(d, response)] = [rows[:, j].tolist() for rows in per_size]
    return out
