"""The scikit-learn side of bench/compare.py, run as a child process.

Usage:
  sklearn_side.py fit CASE.json      time MLPClassifier.fit on the case's .npy data
  sklearn_side.py whole CASE.json    a whole process: import, read the CSV, fit
  sklearn_side.py peak               float64 matmul GFLOP/s of numpy
  sklearn_side.py sweep CASE.json    time the case's grid of fits with joblib

CASE.json is written by compare.py. `fit`, `sweep` and `peak` print one JSON
object on stdout; `whole` prints nothing (its parent times the process). compare.py runs
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


def model(case, momentum=0.9, seed=0):
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
        momentum=momentum,
        nesterovs_momentum=False,
        shuffle=False,
        max_iter=epochs,
        # Stopping needs n_iter_no_change epochs without improving by tol; more
        # than max_iter such epochs cannot happen.
        tol=0.0,
        n_iter_no_change=epochs + 1,
        early_stopping=False,
        random_state=seed,
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


def sweep(case):
    """Every combination of the case's grid and every seed, fitted with
    joblib on `case["workers"]` processes, each with one BLAS thread (as stet's
    runs are one thread each); timed from the first fit's dispatch to the last
    result, so the import of scikit-learn and the data load are outside."""
    from itertools import product

    from joblib import Parallel, delayed

    x = np.load(case["npy_x"])
    y = np.load(case["npy_y"])
    grid = case["grid"]
    settings = [
        dict(hidden=[width], learning_rate=rate, momentum=momentum, seed=seed)
        for width, rate, momentum, seed in product(
            grid["hidden"], grid["learning_rate"], grid["momentum"], range(grid["repeat"]))
    ]
    workers = case["workers"]
    with Parallel(n_jobs=workers, backend="loky" if workers > 1 else "sequential") as parallel:
        # A first small batch of fits starts the worker processes outside the timing.
        parallel(delayed(sweep_fit)(case, x, y, settings[0]) for _ in range(workers))
        started = time.perf_counter()
        losses = parallel(delayed(sweep_fit)(case, x, y, s) for s in settings)
        seconds = time.perf_counter() - started
    print(json.dumps({"seconds": seconds, "fits": len(losses), "blas": blas_kernels()}))


def sweep_fit(case, x, y, setting):
    """One fit of the sweep, on one BLAS thread; its final training loss."""
    from threadpoolctl import threadpool_limits

    one = dict(case, hidden=setting["hidden"], learning_rate=setting["learning_rate"])
    net = model(one, momentum=setting["momentum"], seed=setting["seed"])
    with threadpool_limits(limits=1), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            net.fit(x, y)
        except ValueError:
            # A rate too high for its momentum diverges; the fit's time still counts.
            return float("nan")
    return float(net.loss_)


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
    {"fit": fit, "whole": whole, "sweep": sweep}[mode](case)


if __name__ == "__main__":
    main()
