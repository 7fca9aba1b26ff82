"""Reference values for the verdict-model crate from scikit-learn.

Writes tests/reference/fixtures/classifier_sklearn.json. Run with the pinned versions in
requirements.txt: python tests/reference/classifier_sklearn.py
"""

import json
import pathlib

import numpy as np
import sklearn
from sklearn.calibration import _sigmoid_calibration, calibration_curve
from sklearn.isotonic import IsotonicRegression
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import accuracy_score, brier_score_loss, log_loss, roc_auc_score

rng = np.random.default_rng(20240611)
out = {"generator": f"scikit-learn {sklearn.__version__}, numpy {np.__version__}"}

# Challenger pre-launch flights (Dalal, Fowlkes & Hoadley 1989), any O-ring distress.
temps = np.array([66, 70, 69, 68, 67, 72, 73, 70, 57, 63, 70, 78, 67, 53, 67, 75, 70, 81,
                  76, 79, 75, 76, 58], dtype=float)
distress = np.array([0, 1, 0, 0, 0, 0, 0, 0, 1, 1, 1, 0, 0, 1, 0, 0, 0, 0, 0, 0, 1, 0, 1])
lr = LogisticRegression(penalty=None, tol=1e-12, max_iter=10000).fit(temps[:, None], distress)
out["challenger"] = {"intercept": float(lr.intercept_[0]), "slope": float(lr.coef_[0, 0])}

# L2-penalised logistic regression: C = 1 / alpha.
n = 60
x = rng.normal(size=(n, 2))
y = (x[:, 0] - 0.5 * x[:, 1] + rng.normal(scale=1.0, size=n) > 0).astype(int)
alpha = 2.0
lr2 = LogisticRegression(C=1.0 / alpha, tol=1e-12, max_iter=10000).fit(x, y)
out["logistic_l2"] = {
    "x": x.round(6).tolist(),
    "y": y.tolist(),
    "alpha": alpha,
    "intercept": float(lr2.intercept_[0]),
    "coef": lr2.coef_[0].tolist(),
}
# Refit on the rounded inputs actually stored, so Rust sees exactly the same data.
xr = np.array(out["logistic_l2"]["x"])
lr2 = LogisticRegression(C=1.0 / alpha, tol=1e-12, max_iter=10000).fit(xr, y)
out["logistic_l2"]["intercept"] = float(lr2.intercept_[0])
out["logistic_l2"]["coef"] = lr2.coef_[0].tolist()

# Isotonic regression with ties in x, queried inside and outside the data range.
xi = np.round(rng.uniform(0, 1, size=50), 2)
yi = (rng.uniform(size=50) < xi).astype(float)
iso = IsotonicRegression(out_of_bounds="clip").fit(xi, yi)
query = np.concatenate([[-0.5, 0.0, 1.0, 1.5], rng.uniform(0, 1, size=30)])
out["isotonic"] = {
    "x": xi.tolist(),
    "y": yi.tolist(),
    "query": query.tolist(),
    "predicted": iso.predict(query).tolist(),
}

# Platt scaling as implemented by scikit-learn (same smoothed targets as Platt 1999).
s = rng.normal(size=80)
ys = (rng.uniform(size=80) < 1 / (1 + np.exp(-2 * s))).astype(float)
a, b = _sigmoid_calibration(s, ys)
out["platt"] = {"scores": s.tolist(), "y": ys.tolist(), "a": float(a), "b": float(b)}

# Metrics on probabilities with ties, kept off bin edges.
pm = np.round(rng.uniform(0.01, 0.99, size=200), 3)
pm[pm * 10 == np.round(pm * 10)] += 0.0005
pm[:20] = 0.5125
ym = (rng.uniform(size=200) < pm ** 1.3).astype(int)
prob_true, prob_pred = calibration_curve(ym, pm, n_bins=10, strategy="uniform")
edges = np.linspace(0.0, 1.0, 11)
counts = np.bincount(np.searchsorted(edges[1:-1], pm), minlength=10)
counts = counts[counts > 0]
ece = float(np.sum(counts / len(pm) * np.abs(prob_true - prob_pred)))
out["metrics"] = {
    "p": pm.tolist(),
    "y": ym.tolist(),
    "roc_auc": float(roc_auc_score(ym, pm)),
    "brier": float(brier_score_loss(ym, pm)),
    "log_loss": float(log_loss(ym, pm)),
    "accuracy": float(accuracy_score(ym, (pm >= 0.5).astype(int))),
    "prob_true": prob_true.tolist(),
    "prob_pred": prob_pred.tolist(),
    "ece": ece,
}

path = pathlib.Path(__file__).parent / "fixtures" / "classifier_sklearn.json"
path.write_text(json.dumps(out, indent=1) + "\n")
print(f"wrote {path}")
