"""Reference values for tests/judge_reference.rs: Wilson intervals and McNemar's exact
test from statsmodels, ridge and logistic regression from scikit-learn.

Reads one JSON object on stdin, writes one on stdout:
  wilson:   [[k, n], ...]              -> [[low, high], ...]
  mcnemar:  [[a, b, c, d], ...]        -> [p_value, ...]   (table [[a, b], [c, d]])
  ridge:    {x, y}                     -> {coef: outputs x inputs, intercept}
  logistic: [{x, y (class per row)}]   -> [{coef: classes' x inputs, intercept}]
"""

import json
import sys

import numpy as np
from sklearn.linear_model import LogisticRegression, Ridge
from statsmodels.stats.contingency_tables import mcnemar
from statsmodels.stats.proportion import proportion_confint

# stet's penalty: 1 on the weights of a summed loss (src/judge/linear.rs, PENALTY).
PENALTY = 1.0

request = json.load(sys.stdin)
answer = {}
answer["wilson"] = [
    list(proportion_confint(k, n, alpha=0.05, method="wilson")) for k, n in request["wilson"]
]
answer["mcnemar"] = [
    float(mcnemar(np.array([[a, b], [c, d]]), exact=True).pvalue)
    for a, b, c, d in request["mcnemar"]
]
ridge = Ridge(alpha=PENALTY).fit(np.array(request["ridge"]["x"]), np.array(request["ridge"]["y"]))
answer["ridge"] = {"coef": ridge.coef_.tolist(), "intercept": ridge.intercept_.tolist()}
answer["logistic"] = []
for case in request["logistic"]:
    # Newton's method, as stet: lbfgs stops about 2e-5 short on the unscaled Iris
    # intercepts even at tol=1e-12, while newton-cg and newton-cholesky agree to 1e-8.
    model = LogisticRegression(
        C=1.0 / PENALTY, solver="newton-cholesky", tol=1e-12, max_iter=100000
    )
    model.fit(np.array(case["x"]), np.array(case["y"]))
    answer["logistic"].append(
        {"coef": model.coef_.tolist(), "intercept": model.intercept_.tolist()}
    )
json.dump(answer, sys.stdout)
