"""Reference for the verdict-model crate's boosted trees, from scikit-learn.

A seeded classification problem with an interaction (the sign of x0 * x1 shifts the log-odds)
and scikit-learn's HistGradientBoostingClassifier at matching settings (300 trees, depth 3,
rate 0.05, L2 1, 32 bins); the test ROC AUC it reaches is the bar the crate's own learner must
meet within a small margin. Writes tests/reference/fixtures/boost_sklearn.json. Run with the
pinned versions in requirements.txt: python tests/reference/boost_sklearn.py
"""

import json
import pathlib

import numpy as np
import sklearn
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import roc_auc_score

rng = np.random.default_rng(20261202)
n_train, n_test, width = 800, 600, 5
x = rng.normal(size=(n_train + n_test, width))
logit = 1.2 * x[:, 0] - 0.8 * x[:, 2] + 1.5 * np.sign(x[:, 0] * x[:, 1]) + 0.5 * x[:, 3] ** 2 - 0.5
y = (rng.random(n_train + n_test) < 1 / (1 + np.exp(-logit))).astype(int)
xtr, ytr, xte, yte = x[:n_train], y[:n_train], x[n_train:], y[n_train:]

hgb = HistGradientBoostingClassifier(
    max_iter=300, max_depth=3, learning_rate=0.05, l2_regularization=1.0, max_bins=32,
    min_samples_leaf=20, early_stopping=False, random_state=0,
).fit(xtr, ytr)
lin = LogisticRegression(C=1.0, max_iter=5000).fit(xtr, ytr)
out = {
    "generator": f"scikit-learn {sklearn.__version__}, numpy {np.__version__}",
    "train_x": xtr.round(6).tolist(),
    "train_y": ytr.tolist(),
    "test_x": xte.round(6).tolist(),
    "test_y": yte.tolist(),
    "hgb_test_auc": float(roc_auc_score(yte, hgb.predict_proba(xte)[:, 1])),
    "logistic_test_auc": float(roc_auc_score(yte, lin.predict_proba(xte)[:, 1])),
}
path = pathlib.Path(__file__).parent / "fixtures" / "boost_sklearn.json"
path.write_text(json.dumps(out) + "\n")
print(path, out["hgb_test_auc"], out["logistic_test_auc"])
