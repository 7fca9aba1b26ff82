"""Reference least-squares fits of rho(x) = rho_inf - a exp(-g x) for the feature crate.

Regenerate with: /work/pyref/bin/python tests/reference/features_expfit.py
Writes tests/reference/fixtures/features_expfit.json using scipy.optimize.curve_fit
(scipy 1.14.1, Levenberg-Marquardt, started from the generating parameters so it finds the
global least-squares minimum the Rust grid-plus-refinement search must also reach).
"""
import json
import pathlib

import numpy as np
import scipy
from scipy.optimize import curve_fit

rng = np.random.default_rng(42)


def model(x, rho_inf, a, g):
    return rho_inf - a * np.exp(-g * x)


cases = []
sizes = np.unique(np.round(np.logspace(1, np.log10(800), 12)).astype(int))
x = sizes / sizes[-1]
for name, (rho_inf, a, g), noise in [
    ("fast_noisy", (0.8, 0.6, 15.0), 0.01),
    ("slow_noisy", (0.5, 0.45, 2.5), 0.008),
    ("falling", (0.2, -0.3, 6.0), 0.01),
]:
    y = model(x, rho_inf, a, g) + rng.normal(scale=noise, size=x.size)
    popt, _ = curve_fit(model, x, y, p0=(rho_inf, a, g), maxfev=20000)
    resid = y - model(x, *popt)
    sse = float(resid @ resid)
    sst = float(((y - y.mean()) ** 2).sum())
    cases.append({
        "name": name,
        "x": x.tolist(),
        "y": y.tolist(),
        "asymptote": float(popt[0]),
        "amplitude": float(popt[1]),
        "rate": float(popt[2]),
        "r_squared": 1.0 - sse / sst,
        "rmse": (sse / x.size) ** 0.5,
    })

out = pathlib.Path(__file__).parent / "fixtures" / "features_expfit.json"
out.parent.mkdir(parents=True, exist_ok=True)
out.write_text(json.dumps({"source": f"scipy.optimize.curve_fit, scipy {scipy.__version__}, numpy {np.__version__}", "cases": cases}, indent=1) + "\n")
print(f"wrote {out}")
