"""Reference curve features of one ensemble, recomputed independently with numpy/scipy.

Regenerate with: /work/pyref/bin/python tests/reference/features_summary.py
Writes tests/reference/fixtures/features_summary.json: a seeded ensemble with undefined (NaN,
stored as null) skills and one library size whose replicates are all undefined, plus the
curve features as docs/features.md defines them, computed with numpy 2.1.3 (nanmean,
nanmedian, nanstd ddof=1, nanpercentile linear, polyfit) and scipy 1.14.1 (kendalltau).
"""
import json
import math
import pathlib

import numpy as np
import scipy
from scipy import stats

rng = np.random.default_rng(314159)
sizes = np.array([10, 15, 22, 33, 50, 75, 112, 168, 250, 375])
reps = 25
skills = np.empty((sizes.size, reps))
for i, l in enumerate(sizes):
    mean = 0.7 * np.tanh(l / 80.0) + 0.05
    skills[i] = np.clip(mean + rng.normal(scale=0.2 / np.sqrt(l / 10.0), size=reps), -1, 1)
skills[rng.random(skills.shape) < 0.06] = np.nan
skills[3, :] = np.nan  # a size with no defined skill is dropped from the curve

nan_share = float(np.isnan(skills).mean())
keep = ~np.all(np.isnan(skills), axis=1)
L = sizes[keep].astype(float)
S = skills[keep]
n = L.size
means = np.nanmean(S, axis=1)
lg = np.log10(L)
span = lg[-1] - lg[0]
k = max(2, math.ceil(n / 3))
imax = int(np.argmax(means))
imid = int(np.argmin(np.abs(lg - 0.5 * (lg[0] + lg[-1]))))
sd = np.nanstd(S, axis=1, ddof=1)
iqr = np.nanpercentile(S, 75, axis=1) - np.nanpercentile(S, 25, axis=1)
floor = 1e-3
gain = means[-1] - means[0]
first, last = S[0], S[-1]
both = ~np.isnan(first) & ~np.isnan(last)

features = {
    "skill_final_mean": means[-1],
    "skill_final_median": np.nanmedian(last),
    "skill_gain": gain,
    "slope_early": np.polyfit(lg[:k], means[:k], 1)[0],
    "slope_late": np.polyfit(lg[-k:], means[-k:], 1)[0],
    "overshoot": means[imax] - means[-1],
    "overshoot_position": (lg[imax] - lg[0]) / span,
    "spread_sd_small": sd[0],
    "spread_sd_mid": sd[imid],
    "spread_sd_large": sd[-1],
    "spread_iqr_small": iqr[0],
    "spread_iqr_mid": iqr[imid],
    "spread_iqr_large": iqr[-1],
    "spread_log_ratio": np.log((sd[-1] + floor) / (sd[0] + floor)),
    "spread_decay_slope": np.polyfit(np.log(L), np.log(sd + floor), 1)[0],
    "gain_over_spread": np.arcsinh(gain / (sd[0] + floor)),
    "kendall_tau": stats.kendalltau(L, means).statistic,
    "rising_share": float(np.mean(last[both] > first[both])),
    "nan_share": nan_share,
    "log10_size_max": lg[-1],
    "log10_size_span": span,
}

out = pathlib.Path(__file__).parent / "fixtures" / "features_summary.json"
out.parent.mkdir(parents=True, exist_ok=True)
doc = {
    "source": f"numpy {np.__version__}, scipy {scipy.__version__}",
    "library_sizes": sizes.tolist(),
    "skills": [[None if np.isnan(v) else float(v) for v in row] for row in skills],
    "features": {key: float(v) for key, v in features.items()},
}
out.write_text(json.dumps(doc, indent=1) + "\n")
print(f"wrote {out}")
