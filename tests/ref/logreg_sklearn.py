# The metrics baseline (src/model/logreg.c, Newton/IRLS with L2 on the
# weights) against scikit-learn's LogisticRegression with the same
# regularisation: C = 1/l2, the intercept unpenalised, lbfgs, fit on the
# same standardized features (StandardScaler). Coefficients within 1e-4
# (absolute, on the standardized scale), AUC within 1e-4 (lbfgs stops
# short of the exact optimum, so near-tied probabilities may swap ranks).
import os
import subprocess
import sys

import numpy as np
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import roc_auc_score
from sklearn.preprocessing import StandardScaler

driver = os.path.join(os.environ["BUILD"], "ref", "logreg_driver")
worst_coef = 0.0
worst_auc = 0.0
for case, (n, p, l2) in enumerate([(400, 14, 1.0), (1500, 14, 0.1), (300, 5, 10.0)]):
    rng = np.random.default_rng(100 + case)
    # skewed count-like columns after log1p, as the change metrics are
    X = np.log1p(rng.gamma(1.5, 20.0, size=(n, p)))
    X[:, 0] = rng.normal(size=n)
    beta = rng.normal(scale=0.7, size=p)
    z = ((X - X.mean(0)) / X.std(0).clip(1e-9)) @ beta * 0.5 - 1.0
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-z))).astype(int)
    text = "%d %d %.17g\n" % (n, p, l2) + "\n".join(
        " ".join("%.17g" % v for v in X[i]) + " %d" % y[i] for i in range(n)) + "\n"
    out = subprocess.run([driver], input=text, capture_output=True, text=True, check=True).stdout
    lines = out.split("\n")
    coef = np.array([float(v) for v in lines[0].split()[1:]])
    intercept = float(lines[1].split()[1])
    prob = np.array([float(v) for v in lines[2:2 + n]])

    Z = StandardScaler().fit_transform(X)
    sk = LogisticRegression(C=1.0 / l2, solver="lbfgs", tol=1e-12, max_iter=100000).fit(Z, y)
    d_coef = max(np.abs(coef - sk.coef_[0]).max(), abs(intercept - sk.intercept_[0]))
    auc_omen = roc_auc_score(y, prob)
    auc_sk = roc_auc_score(y, sk.predict_proba(Z)[:, 1])
    d_prob = np.abs(prob - sk.predict_proba(Z)[:, 1]).max()
    print("case %d: n=%d p=%d l2=%g max|coef diff|=%.2e auc omen=%.6f sklearn=%.6f max|prob diff|=%.2e"
          % (case, n, p, l2, d_coef, auc_omen, auc_sk, d_prob))
    worst_coef = max(worst_coef, d_coef)
    worst_auc = max(worst_auc, abs(auc_omen - auc_sk))
    if d_coef > 1e-4 or abs(auc_omen - auc_sk) > 1e-4:
        print("FAIL: logistic regression differs from scikit-learn")
        sys.exit(1)
print("REF logreg vs sklearn LogisticRegression: max coef diff %.2e, max AUC diff %.2e"
      % (worst_coef, worst_auc))
