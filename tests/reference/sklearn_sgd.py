"""Train scikit-learn MLPs from given initial weights, for tests/sklearn_reference.rs.

Usage: python sklearn_sgd.py CASES.json RESULTS.json

CASES.json holds a list of cases, each with the data ("x", "y"), the initial
weights ("coefs": one (inputs, outputs) matrix per layer, "intercepts"), the
model ("kind": "regressor", "binary", "multilabel" or "multiclass";
"hidden_layer_sizes"; "activation": a scikit-learn hidden activation name),
the optimiser ("solver": "sgd" or "adam" with its settings), "batch_size",
"epochs" and "float32" (train in single precision). RESULTS.json receives, per
case, the weights after the epochs.

Single precision: given float32 inputs, MLPClassifier allocates its weights in
the inputs' type and, its targets being booleans, keeps every product and
update in float32 (scikit-learn 1.9.1; `run` checks the weights' type after
training). The initial weights are rounded to float32 as they are copied in.

How the weights are fixed: one `partial_fit` call builds the model (and its
shapes), the initial weights are then copied into `coefs_` and `intercepts_`
in place, and the private optimiser state `_optimizer` is deleted so that the
next `partial_fit` starts a fresh one (zero velocity or moments). Each further
`partial_fit` call is one epoch over the rows in order (`shuffle=False`).
With `learning_rate='constant'`, `alpha=0` and `nesterovs_momentum=False`
this is plain mini-batch SGD with classic momentum (or Adam) on the
batch-averaged gradient.
"""

import json
import sys
import warnings

import numpy as np
from sklearn.neural_network import MLPClassifier, MLPRegressor


def build(case):
    settings = dict(
        hidden_layer_sizes=tuple(case["hidden_layer_sizes"]),
        activation=case["activation"],
        solver=case["solver"],
        alpha=0.0,
        batch_size=case["batch_size"],
        learning_rate="constant",
        learning_rate_init=case["learning_rate"],
        shuffle=False,
        random_state=0,
    )
    if case["solver"] == "sgd":
        settings.update(momentum=case["momentum"], nesterovs_momentum=False)
    else:
        settings.update(beta_1=case["beta1"], beta_2=case["beta2"], epsilon=case["epsilon"])
    if case["kind"] == "regressor":
        return MLPRegressor(**settings)
    return MLPClassifier(**settings)


def targets(case):
    """The target matrix as scikit-learn wants it for this kind of model."""
    y = np.array(case["y"], dtype=np.float64)
    kind = case["kind"]
    if kind == "regressor":
        return y, None
    if kind == "binary":
        # One 0/1 column: a binary problem with one logistic output.
        return y[:, 0].astype(int), np.array([0, 1])
    if kind == "multilabel":
        # 0/1 columns: a multilabel indicator, one logistic output per column.
        return y.astype(int), np.arange(y.shape[1])
    if kind == "multiclass":
        # One-hot rows: a single label vector, softmax over the classes.
        return y.argmax(axis=1), np.arange(y.shape[1])
    raise ValueError(f"unknown kind {kind!r}")


def run(case):
    dtype = np.float32 if case["float32"] else np.float64
    x = np.array(case["x"], dtype=dtype)
    y, classes = targets(case)
    model = build(case)

    def epoch():
        if classes is None:
            model.partial_fit(x, y)
        else:
            model.partial_fit(x, y, classes=classes)

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        epoch()
        for layer, (coef, intercept) in enumerate(zip(case["coefs"], case["intercepts"])):
            coef = np.array(coef, dtype=np.float64)
            intercept = np.array(intercept, dtype=np.float64)
            if model.coefs_[layer].shape != coef.shape:
                raise ValueError(f"layer {layer}: model has {model.coefs_[layer].shape}, case gives {coef.shape}")
            model.coefs_[layer][...] = coef
            model.intercepts_[layer][...] = intercept
        del model._optimizer
        for _ in range(case["epochs"]):
            epoch()
    expected_output = {"regressor": "identity", "binary": "logistic", "multilabel": "logistic", "multiclass": "softmax"}
    if model.out_activation_ != expected_output[case["kind"]]:
        raise ValueError(f"{case['name']}: output activation is {model.out_activation_}")
    types = {p.dtype for p in model.coefs_ + model.intercepts_}
    if types != {np.dtype(dtype)}:
        raise ValueError(f"{case['name']}: trained in {types}, not {np.dtype(dtype)}")
    return {
        "name": case["name"],
        "float32": case["float32"],
        "out_activation": model.out_activation_,
        "coefs": [c.tolist() for c in model.coefs_],
        "intercepts": [b.tolist() for b in model.intercepts_],
    }


def main():
    cases_path, results_path = sys.argv[1], sys.argv[2]
    with open(cases_path) as f:
        cases = json.load(f)
    results = [run(case) for case in cases]
    with open(results_path, "w") as f:
        json.dump(results, f)


if __name__ == "__main__":
    main()
