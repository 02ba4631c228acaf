"""The scikit-learn side of bench/compare.py, run as a child process.

Usage:
  sklearn_side.py fit CASE.json      time MLPClassifier.fit on the case's .npy data
  sklearn_side.py whole CASE.json    a whole process: import, read the CSV, fit
  sklearn_side.py peak               float64 matmul GFLOP/s of numpy

CASE.json is written by compare.py. `fit` and `peak` print one JSON object on
stdout; `whole` prints nothing (its parent times the process). compare.py runs
this script with OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE unset, so OpenBLAS
picks its own kernel for the processor; `fit` reports the kernel it got.
"""

import csv
import json
import resource
import sys
import time
import warnings

import numpy as np


def model(case):
    """An MLPClassifier doing exactly the case's work: plain SGD with classic
    momentum on a constant rate, no penalty, rows in file order, and a stopping
    rule that can never fire before `max_iter` epochs."""
    from sklearn.neural_network import MLPClassifier

    epochs = case["epochs"]
    return MLPClassifier(
        hidden_layer_sizes=tuple(case["hidden"]),
        activation=case["sklearn_activation"],
        solver="sgd",
        alpha=0.0,
        batch_size=case["batch_rows"],
        learning_rate="constant",
        learning_rate_init=case["learning_rate"],
        momentum=0.9,
        nesterovs_momentum=False,
        shuffle=False,
        max_iter=epochs,
        # Stopping needs n_iter_no_change epochs without improving by tol; more
        # than max_iter such epochs cannot happen.
        tol=0.0,
        n_iter_no_change=epochs + 1,
        early_stopping=False,
        random_state=0,
    )


def blas_kernels():
    from threadpoolctl import threadpool_info

    return sorted(
        {f"{i.get('internal_api')} {i.get('version')} {i.get('architecture')} x{i.get('num_threads')}"
         for i in threadpool_info() if i.get("user_api") == "blas"}
    )


def fit(case):
    from sklearn.metrics import log_loss

    x = np.load(case["npy_x"])
    if case["float32"]:
        # MLPClassifier keeps float32 inputs in float32 and trains in that type.
        x = x.astype(np.float32)
    y = np.load(case["npy_y"])
    net = model(case)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        started = time.perf_counter()
        net.fit(x, y)
        seconds = time.perf_counter() - started
    # The same quantity as stet's metrics.train.loss: mean cross-entropy of the
    # final network over the training rows.
    if net.coefs_[0].dtype != x.dtype:
        sys.exit(f"trained in {net.coefs_[0].dtype}, not {x.dtype}")
    # Probabilities in float64 so that the loss is computed alike for every case.
    probabilities = net.predict_proba(x).astype(np.float64)
    loss = float(log_loss(y, probabilities, labels=np.arange(case["classes"])))
    print(json.dumps({
        "seconds": seconds,
        "loss": loss,
        "epochs": int(net.n_iter_),
        "blas": blas_kernels(),
        "max_rss_kib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss,
    }))


def whole(case):
    """What a practitioner's script does: read the CSV, fit. Timed from outside."""
    with open(case["csv"], newline="") as f:
        rows = list(csv.reader(f))[1:]
    x = np.array([[float(v) for v in row[:-1]] for row in rows])
    names = sorted({row[-1] for row in rows})
    y = np.array([names.index(row[-1]) for row in rows])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model(case).fit(x, y)


def peak():
    """Best of several large square float64 products: the BLAS peak on the
    cores this process may use."""
    n = 2048
    rng = np.random.default_rng(0)
    a = rng.random((n, n))
    b = rng.random((n, n))
    a @ b
    times = []
    for _ in range(5):
        started = time.perf_counter()
        a @ b
        times.append(time.perf_counter() - started)
    print(json.dumps({"f64": 2 * n**3 / min(times) / 1e9, "blas": blas_kernels()}))


def main():
    mode = sys.argv[1]
    if mode == "peak":
        peak()
        return
    with open(sys.argv[2]) as f:
        case = json.load(f)
    {"fit": fit, "whole": whole}[mode](case)


if __name__ == "__main__":
    main()
