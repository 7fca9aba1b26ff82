"""Reference values of Kendall's tau-b and its two-sided p-value for the feature crate.

Regenerate with: /work/pyref/bin/python tests/reference/features_kendall.py
Writes tests/reference/fixtures/features_kendall.json using scipy.stats.kendalltau
(scipy 1.14.1, default method='auto', variant='b').
"""
import json
import pathlib

import numpy as np
import scipy
from scipy import stats

rng = np.random.default_rng(20240517)


def case(name, x, y):
    x = [float(v) for v in x]
    y = [float(v) for v in y]
    res = stats.kendalltau(x, y)
    return {"name": name, "x": x, "y": y, "tau": float(res.statistic), "p_value": float(res.pvalue)}


cases = []
# Small untied samples: scipy uses the exact permutation distribution.
cases.append(case("exact_n8", range(8), [3, 1, 4, 7, 5, 9, 2, 6]))
x = rng.normal(size=20)
cases.append(case("exact_n20_correlated", x, x + rng.normal(scale=1.0, size=20)))
cases.append(case("exact_n12_perfect", range(12), range(12)))
# Large untied sample: normal approximation.
x = rng.normal(size=60)
cases.append(case("asymptotic_n60", x, 0.3 * x + rng.normal(size=60)))
# Ties in one or both samples: normal approximation with tie-corrected variance.
cases.append(case("ties_in_y", range(14), [12.9, 14.8, 13.2, 15.7, 13.8, 15.6, 12.9, 11.0, 17.3, 15.9, 19.0, 18.3, 20.1, 21.7]))
cases.append(case("ties_both", [1, 1, 2, 2, 3, 3, 4, 4, 5, 5], [2, 1, 2, 3, 3, 3, 5, 4, 4, 6]))
cases.append(case("ties_rounded_n30", np.round(rng.normal(size=30), 0), np.round(rng.normal(size=30), 1)))
cases.append(case("negative_n9", range(9), [9, 8, 8, 6, 5, 5, 3, 2, 1]))

out = pathlib.Path(__file__).parent / "fixtures" / "features_kendall.json"
out.parent.mkdir(parents=True, exist_ok=True)
out.write_text(json.dumps({"source": f"scipy.stats.kendalltau, scipy {scipy.__version__}, numpy {np.__version__}", "cases": cases}, indent=1) + "\n")
print(f"wrote {out}")
