"""stet against scikit-learn's MLPClassifier on the same work: see bench/README.md.

Run through bench/run.sh, which builds stet and the virtual environment first.
Every case trains the same network on the same rows with the same settings on
both sides; one repetition runs every case once per side (alternating which
side goes first) plus the matmul peak, and the table reports medians over the
repetitions, so a burst of load from other work on the machine hits both
sides alike.
"""

import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

BENCH = Path(__file__).resolve().parent
ROOT = BENCH.parent
STET = ROOT / "target" / "release" / "stet"
DATA = BENCH / "data"
# Bump when the generated data or documents change, to regenerate them.
DATA_VERSION = "1"
# The environment pins OpenBLAS to an older kernel on this processor; the
# scikit-learn side and the peak run without those two variables, and only they.
UNPIN = ["env", "-u", "OPENBLAS_CORETYPE", "-u", "OPENBLAS_L2_SIZE"]

CASES = {
    "A": dict(title="Iris shape", rows=150, sizes=[4, 8, 3], activation="sigmoid",
              sklearn_activation="logistic", batch="full", epochs=2000, learning_rate=0.1),
    "B": dict(title="digits shape", rows=1797, sizes=[64, 32, 10], activation="relu",
              sklearn_activation="relu", batch=32, epochs=50, learning_rate=0.1),
    "C": dict(title="60k x 784 synthetic", rows=60000, sizes=[784, 256, 10], activation="relu",
              sklearn_activation="relu", batch=128, epochs=2, learning_rate=0.01),
}
# C32: C in single precision on both sides (stet `precision: f32`, scikit-learn
# given float32 arrays, with which MLPClassifier trains in float32).
CASES["C32"] = dict(CASES["C"], title="60k x 784 synthetic, float32", data="C", precision="f32")
# S: a sweep of many small runs, issue 19's Iris grid on A's data and network
# (sigmoid, Glorot init, SGD with classic momentum, rows in order): four widths,
# ten learning rates, five momenta, five seeds, 200 epochs of batches of 32. One
# stet document with a sweep against the same 1,000 fits with joblib, on one
# thread and on two (`--jobs 2` against two joblib workers).
SWEEP = dict(title="Iris sweep", data="A", rows=150, batch=32, epochs=200, activation="sigmoid",
             sklearn_activation="logistic", classes=3,
             grid=dict(hidden=[2, 4, 8, 16],
                       learning_rate=[0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1.0],
                       momentum=[0.0, 0.5, 0.8, 0.9, 0.95], repeat=5))
SWEEP_RUNS = 4 * 10 * 5 * 5
SWEEP_THREADS = (1, 2)
# Runs per side per repetition: the small cases take milliseconds, so more of
# them cost little and steady their medians.
REPEATS = {"A": 5, "B": 5, "C": 1, "C32": 1, "S": 1}

TARGETS = {"A": 10.0, "B": 3.0, "C": 1.3, "C32": 1.3, "S": 40.0}
# stet's two-thread time of S as a share of its one-thread time, at most.
SWEEP_SCALING_TARGET = 0.6
WHOLE_TARGET = 20.0
PEAK_SHARE_TARGET = 0.60


def write_csv(path, x, labels):
    """Features written with repr(), which reads back as the same double in
    both stet and Python, so both sides train on identical numbers."""
    width = x.shape[1]
    with open(path, "w") as f:
        f.write(",".join(f"x{i}" for i in range(width)) + ",label\n")
        for row, label in zip(x, labels):
            f.write(",".join(repr(float(v)) for v in row) + f",{label}\n")


def make_data():
    stamp = DATA / "VERSION"
    if stamp.exists() and stamp.read_text() == DATA_VERSION:
        return
    DATA.mkdir(exist_ok=True)
    print("generating benchmark data in bench/data/ ...", file=sys.stderr)

    # A: Fisher's Iris from the tests, standardised here once for both sides.
    lines = (ROOT / "tests" / "data" / "iris.csv").read_text().splitlines()[1:]
    cells = [line.split(",") for line in lines if line.strip()]
    x = np.array([[float(v) for v in c[:4]] for c in cells])
    x = (x - x.mean(axis=0)) / x.std(axis=0)
    species = [c[4] for c in cells]
    names = sorted(set(species))
    save("A", x, np.array([names.index(s) for s in species]), species)

    # B: scikit-learn's copy of the UCI handwritten digits, pixels 0..16 divided
    # by 16 (exact in binary). Labels d0..d9 sort like the digits.
    from sklearn.datasets import load_digits

    digits = load_digits()
    save("B", digits.data / 16.0, digits.target, [f"d{t}" for t in digits.target])

    # C: MNIST-shaped binary images. Each of 10 classes has a prototype with
    # 20 % of its pixels on; a row is its class's prototype with 10 % of the
    # pixels flipped. Pixels are 0 or 1/28: scaled so that a learning rate of
    # 0.01 trains rather than diverges. Classes are assigned round-robin, then
    # shuffled, with a fixed seed.
    rng = np.random.default_rng(20240601)
    n, d, k = 60000, 784, 10
    prototypes = rng.random((k, d)) < 0.2
    y = np.arange(n) % k
    rng.shuffle(y)
    pixels = prototypes[y] ^ (rng.random((n, d)) < 0.1)
    x = pixels / 28.0
    np.save(DATA / "C_x.npy", x)
    np.save(DATA / "C_y.npy", y)
    # Only two values occur, so the CSV is written from their two strings.
    words = np.array(["0", repr(1.0 / 28.0)])
    assert float(words[1]) == x[pixels][0]
    with open(DATA / "C.csv", "w") as f:
        f.write(",".join(f"x{i}" for i in range(d)) + ",label\n")
        for row, label in zip(words[pixels.astype(np.intp)], y):
            f.write(",".join(row) + f",c{label}\n")
    stamp.write_text(DATA_VERSION)


def save(name, x, y, labels):
    np.save(DATA / f"{name}_x.npy", x)
    np.save(DATA / f"{name}_y.npy", y)
    write_csv(DATA / f"{name}.csv", x, labels)


def stet_document(name):
    c = CASES[name]
    hidden = c["sizes"][1:-1]
    data = c.get("data", name)
    precision = c.get("precision", "f64")
    text = f"""---
title: bench {name}
seed: 1
---

# {c['title']}

```yaml data rows
file: {data}.csv
target: label
scale: none
holdout: 0
```

```yaml net shape
hidden: {hidden}
activation: {c['activation']}
init: xavier
```

```yaml train fit
data: rows
net: shape
optimizer: sgd
learning_rate: {c['learning_rate']}
momentum: 0.9
batch: {c['batch']}
epochs: {c['epochs']}
shuffle: false
l2: 0
seed: 1
precision: {precision}
```
"""
    path = DATA / f"{name}.md"
    path.write_text(text)
    return path


def sweep_document():
    """The S document: A's data and network, one train step, and the grid as a
    sweep of it. The train step (the sweep's `from`) is one of the grid's
    runs (width 8, rate 0.1, momentum 0.9, the first seed), trained once under
    its one key, so the build trains exactly the grid's runs."""
    c, grid = SWEEP, SWEEP["grid"]
    hidden = "[" + ", ".join(f"[{w}]" for w in grid["hidden"]) + "]"
    text = f"""---
title: bench S
seed: 1
---

# {c['title']}

```yaml data rows
file: {c['data']}.csv
target: label
scale: none
holdout: 0
```

```yaml net shape
hidden: [8]
activation: {c['activation']}
init: xavier
```

```yaml train fit
data: rows
net: shape
optimizer: sgd
learning_rate: 0.1
momentum: 0.9
batch: {c['batch']}
epochs: {c['epochs']}
shuffle: false
l2: 0
seed: 1
```

```yaml sweep grid
from: fit
vary:
  hidden: {hidden}
  learning_rate: {grid['learning_rate']}
  momentum: {grid['momentum']}
repeat: {grid['repeat']}
rank_by: loss
```
"""
    path = DATA / "S.md"
    path.write_text(text)
    return path


def sweep_case_file(workers):
    case = dict(SWEEP, workers=workers, batch_rows=SWEEP["batch"],
                npy_x=str(DATA / "A_x.npy"), npy_y=str(DATA / "A_y.npy"))
    path = DATA / f"S{workers}.json"
    path.write_text(json.dumps(case))
    return path


def case_file(name):
    c = CASES[name]
    case = dict(c)
    data = c.get("data", name)
    case.update(
        hidden=c["sizes"][1:-1],
        classes=c["sizes"][-1],
        batch_rows=c["rows"] if c["batch"] == "full" else c["batch"],
        npy_x=str(DATA / f"{data}_x.npy"),
        npy_y=str(DATA / f"{data}_y.npy"),
        csv=str(DATA / f"{data}.csv"),
        float32=c.get("precision") == "f32",
    )
    path = DATA / f"{name}.json"
    path.write_text(json.dumps(case))
    return path


def run_child(command):
    """Runs a process to completion: (wall seconds, peak RSS in KiB, stdout)."""
    return run_child_cpu(command)[:3]


def run_child_cpu(command):
    """Runs a process to completion: (wall seconds, peak RSS in KiB, stdout,
    CPU seconds). The child is reaped with wait4 so that its own peak RSS and
    CPU time can be read."""
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        started = time.perf_counter()
        child = subprocess.Popen(command, stdout=out, stderr=err)
        _, status, usage = os.wait4(child.pid, 0)
        wall = time.perf_counter() - started
        child.returncode = os.waitstatus_to_exitcode(status)
        out.seek(0)
        err.seek(0)
        if child.returncode != 0:
            sys.exit(f"{' '.join(map(str, command))} failed:\n{err.read().decode()}")
        return wall, usage.ru_maxrss, out.read().decode(), usage.ru_utime + usage.ru_stime


def stet_run(document, out):
    wall, rss, _ = run_child([
        str(STET), "build", str(document), "--no-cache", "--json", str(out),
        "-o", str(out.with_suffix(".html")),
    ])
    summary = json.loads(out.read_text())
    train = next(s for s in summary["steps"] if s["kind"] == "train")
    if train["status"] != "ran":
        sys.exit(f"stet's train step did not run: {train}")
    return dict(seconds=train["seconds"], loss=train["metrics"]["train"]["loss"], wall=wall, rss=rss)


def stet_sweep_run(document, out, threads):
    """A whole `stet build` of the S document on `threads` threads, with a cache
    emptied first so every run trains and is stored. Besides the process's
    wall and CPU seconds: the sweep step's own seconds and the sum of its
    runs' training seconds (each run's `seconds` in --json)."""
    cache = out.with_suffix(".cache")
    if cache.exists():
        shutil.rmtree(cache)
    wall, rss, _, cpu = run_child_cpu([
        str(STET), "build", str(document), "--jobs", str(threads), "--cache", str(cache),
        "--json", str(out), "-o", str(out.with_suffix(".html")),
    ])
    summary = json.loads(out.read_text())
    sweep = next(s for s in summary["steps"] if s["kind"] == "sweep")
    trained = sum(s.get("runs_trained", 0) for s in summary["steps"])
    if trained != SWEEP_RUNS:
        sys.exit(f"stet trained {trained} runs, not {SWEEP_RUNS}")
    training = sum(f["seconds"] for r in sweep["runs"] for f in r["folds"])
    report = out.with_suffix(".html").stat().st_size
    # A no-op rebuild: everything is in the cache, only the report is written.
    rebuild, _, _, _ = run_child_cpu([
        str(STET), "build", str(document), "--jobs", str(threads), "--cache", str(cache),
        "-o", str(out.with_suffix(".html")),
    ])
    # The same build without a cache: the difference is the cache's reading and writing.
    uncached, _, _, uncached_cpu = run_child_cpu([
        str(STET), "build", str(document), "--jobs", str(threads), "--no-cache",
        "-o", str(out.with_suffix(".html")),
    ])
    return dict(seconds=wall, cpu=cpu, step=sweep["seconds"], training=training, rss=rss,
                rebuild=rebuild, uncached=uncached, uncached_cpu=uncached_cpu, report=report)


def sklearn_run(case_path, mode="fit"):
    wall, rss, stdout = run_child(UNPIN + [sys.executable, str(BENCH / "sklearn_side.py"), mode, str(case_path)])
    result = json.loads(stdout) if mode in ("fit", "sweep") else {}
    result.update(wall=wall, rss=rss)
    return result


def peak_run():
    _, _, stdout = run_child(UNPIN + [sys.executable, str(BENCH / "sklearn_side.py"), "peak"])
    return json.loads(stdout)


def median(values):
    return statistics.median(values)


def nominal_flops(name):
    """6 · Σ in·out per sample per epoch: forward, and two backward products
    per layer, counting the input-gradient product neither side computes."""
    c = CASES[name]
    sizes = c["sizes"]
    per_sample = 6 * sum(a * b for a, b in zip(sizes, sizes[1:]))
    return per_sample * c["rows"] * c["epochs"]


def comparable(a, b):
    """Final losses from different initial weights: within 0.02, or within a
    factor of 1.5 of each other."""
    return abs(a - b) <= 0.02 or max(a, b) <= 1.5 * min(a, b)


def main():
    global STET
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=3,
                        help="repetitions; medians are reported (default 3)")
    parser.add_argument("--cases", default=",".join([*CASES, "S"]),
                        help="comma-separated cases to run, e.g. 'A,B,S' (default: all)")
    parser.add_argument("--stet", type=Path, default=STET,
                        help="the stet binary to measure, e.g. an older build for a before-and-after "
                             "(default: target/release/stet)")
    args = parser.parse_args()
    STET = args.stet.resolve()
    if args.runs < 1:
        sys.exit("--runs must be at least 1")
    chosen = args.cases.split(",")
    names = [n for n in CASES if n in chosen]
    sweeping = "S" in chosen
    make_data()

    documents = {n: stet_document(n) for n in names}
    cases = {n: case_file(n) for n in names}
    results = {n: {"stet": [], "sklearn": []} for n in names}
    sweeps = {(side, t): [] for side in ("stet", "sklearn") for t in SWEEP_THREADS}
    sweep_doc = sweep_document() if sweeping else None
    sweep_cases = {t: sweep_case_file(t) for t in SWEEP_THREADS} if sweeping else {}
    whole = {"stet": [], "sklearn": []}
    peaks = []
    flip = 0
    for rep in range(args.runs):
        print(f"repetition {rep + 1} of {args.runs}", file=sys.stderr)
        peaks.append(peak_run())
        for name in names:
            document, case = documents[name], cases[name]
            sides = [("stet", lambda: stet_run(document, DATA / f"{name}.out.json")),
                     ("sklearn", lambda: sklearn_run(case))]
            if name == "A":
                # Whole processes: `stet build` of the A document against a
                # Python process that imports scikit-learn and fits the same.
                sides += [("whole stet", lambda: stet_run(document, DATA / "A.whole.json")),
                          ("whole sklearn", lambda: sklearn_run(case, "whole"))]
            for _ in range(REPEATS[name]):
                flip += 1
                for side, run in sides[::-1] if flip % 2 else sides:
                    result = run()
                    if side.startswith("whole"):
                        whole[side.split()[1]].append(result["wall"])
                    else:
                        results[name][side].append(result)
        if sweeping:
            for threads in SWEEP_THREADS:
                flip += 1
                sides = [("stet", lambda: stet_sweep_run(sweep_doc, DATA / f"S{threads}.out.json", threads)),
                         ("sklearn", lambda: sklearn_run(sweep_cases[threads], "sweep"))]
                for side, run in sides[::-1] if flip % 2 else sides:
                    sweeps[(side, threads)].append(run())

    report(names, results, whole, peaks)
    if sweeping:
        report_sweep(sweeps)


def report(names, results, whole, peaks):
    peak = median([x["f64"] for x in peaks])
    blas = sorted({k for x in peaks for k in x["blas"]} |
                  {k for r in results.values() for s in r["sklearn"] for k in s.get("blas", [])})
    counts = ", ".join(f"{n}: {len(results[n]['stet'])}" for n in names)
    print()
    print(f"stet vs scikit-learn on {os.cpu_count()} cores; medians of interleaved runs per side ({counts})")
    print("scikit-learn's BLAS (threadpoolctl): " + "; ".join(blas))
    print(f"numpy float64 matmul peak (2048^3, same cores): {peak:.1f} GFLOP/s")
    print()
    header = ("case", "stet s", "sklearn s", "ratio", "target", "stet rows/s", "sklearn rows/s",
              "stet GFLOP/s", "of peak", "stet loss", "sklearn loss")
    table = []
    checks = []
    for name in names:
        stet = results[name]["stet"]
        sk = results[name]["sklearn"]
        s_sec = median([r["seconds"] for r in stet])
        k_sec = median([r["seconds"] for r in sk])
        ratio = k_sec / s_sec
        c = CASES[name]
        samples = c["rows"] * c["epochs"]
        gflops = nominal_flops(name) / s_sec / 1e9
        share = gflops / peak
        s_loss, k_loss = stet[-1]["loss"], sk[-1]["loss"]
        target = TARGETS[name]
        table.append((
            name, f"{s_sec:.4f}", f"{k_sec:.4f}", f"{ratio:.1f}x", f">= {target}x",
            f"{samples / s_sec:,.0f}", f"{samples / k_sec:,.0f}",
            f"{gflops:.1f}", f"{share:.0%}", f"{s_loss:.5f}", f"{k_loss:.5f}",
        ))
        checks.append((f"{name}: stet {target}x faster than scikit-learn", ratio >= target, f"{ratio:.2f}x"))
        if name == "C":
            checks.append((f"C: stet at {PEAK_SHARE_TARGET:.0%} of the float64 matmul peak",
                           share >= PEAK_SHARE_TARGET, f"{share:.0%}"))
        checks.append((f"{name}: final training losses comparable", comparable(s_loss, k_loss),
                       f"{s_loss:.5f} vs {k_loss:.5f}"))
    print_table(header, table)
    print("seconds: the training time each side measures around its own fit (stet: the train step's")
    print("`seconds` in --json, run with --no-cache; scikit-learn: MLPClassifier.fit).")
    print("GFLOP/s: nominal, 6 x sum(in x out) flops per row per epoch over stet's seconds.")
    print("losses: mean training cross-entropy of each side's final network (different initial weights).")

    print()
    whole_rows = []
    if whole["stet"]:
        s, k = median(whole["stet"]), median(whole["sklearn"])
        whole_rows.append(("A", f"{s:.3f}", f"{k:.3f}", f"{k / s:.1f}x",
                           "stet build of the document vs python: import, read CSV, fit"))
        checks.append((f"A whole process: stet {WHOLE_TARGET:.0f}x faster", k / s >= WHOLE_TARGET, f"{k / s:.1f}x"))
    if "C" in names:
        s = median([r["wall"] for r in results["C"]["stet"]])
        k = median([r["wall"] for r in results["C"]["sklearn"]])
        whole_rows.append(("C", f"{s:.2f}", f"{k:.2f}", f"{k / s:.1f}x",
                           "stet build (parses the CSV) vs python (loads .npy), both with start-up"))
    if whole_rows:
        print_table(("whole process", "stet s", "python s", "ratio", "what"), whole_rows)

    if "C" in names:
        s = median([r["rss"] for r in results["C"]["stet"]]) / 1024
        k = median([r["rss"] for r in results["C"]["sklearn"]]) / 1024
        print()
        print_table(("peak RSS", "stet MiB", "python MiB", "stet/python"),
                    [("C", f"{s:,.0f}", f"{k:,.0f}", f"{s / k:.2f}")])
        checks.append(("C: stet peak memory <= scikit-learn's", s <= k, f"{s:,.0f} vs {k:,.0f} MiB"))

    print()
    for what, ok, value in checks:
        print(f"[{'met' if ok else 'NOT MET'}] {what}: {value}")


def report_sweep(sweeps):
    """S: runs per second on each side, stet's scaling from one thread to two,
    where stet's time goes, and the no-op rebuild and report size."""
    print()
    print(f"S: {SWEEP_RUNS} fits of the Iris grid (4 widths x 10 rates x 5 momenta x 5 seeds, "
          f"{SWEEP['epochs']} epochs, batch {SWEEP['batch']}); medians over {len(sweeps[('stet', 1)])} "
          "repetitions")
    rows, checks = [], []
    for threads in SWEEP_THREADS:
        stet = sweeps[("stet", threads)]
        s_sec = median([r["seconds"] for r in stet])
        k_sec = median([r["seconds"] for r in sweeps[("sklearn", threads)]])
        rows.append((f"{threads}", f"{s_sec:.3f}", f"{k_sec:.2f}", f"{k_sec / s_sec:.1f}x",
                     f"{SWEEP_RUNS / s_sec:,.0f}", f"{SWEEP_RUNS / k_sec:,.1f}",
                     f"{median([r['cpu'] for r in stet]):.3f}"))
        if threads == 1:
            checks.append((f"S: stet {TARGETS['S']:.0f}x faster than scikit-learn on one thread",
                           k_sec / s_sec >= TARGETS["S"], f"{k_sec / s_sec:.1f}x"))
    print_table(("threads", "stet s", "sklearn s", "ratio", "stet runs/s", "sklearn runs/s", "stet CPU s"),
                rows)
    print("stet s: the whole `stet build` (start-up, data, the 1,000 runs, cache writes, report);")
    print("sklearn s: the 1,000 fits, from the first dispatch to the last result (joblib, one BLAS thread each).")
    one = median([r["seconds"] for r in sweeps[("stet", 1)]])
    two = median([r["seconds"] for r in sweeps[("stet", 2)]])
    checks.append((f"S: stet's two-thread time at most {SWEEP_SCALING_TARGET} of its one-thread time",
                   two <= SWEEP_SCALING_TARGET * one, f"{two / one:.2f}"))

    print()
    shares = []
    for threads in SWEEP_THREADS:
        stet = sweeps[("stet", threads)]
        whole_s = median([r["seconds"] for r in stet])
        # Training: the runs' own seconds, summed over runs and divided by the
        # threads that ran them. Cache: a build with the cache against one
        # without. Report and planning: the no-op rebuild. The rest is start-up,
        # the data step, metrics, ranking and the rest of the build.
        training = median([r["training"] for r in stet]) / threads
        cache = max(0.0, whole_s - median([r["uncached"] for r in stet]))
        rebuild = median([r["rebuild"] for r in stet])
        rest = max(0.0, whole_s - training - cache - rebuild)
        shares.append((f"{threads}", f"{whole_s:.3f}", *(f"{x / whole_s:.0%}" for x in (training, cache, rebuild, rest))))
    print_table(("threads", "stet s", "training", "cache", "report (no-op rebuild)", "metrics and rest"), shares)
    print("shares of stet's whole build, estimated from outside: training is the runs' own `seconds` summed")
    print("over threads; cache a cached build against --no-cache; report the no-op rebuild; rest what is left.")
    rebuild = median([r["rebuild"] for r in sweeps[("stet", 1)]])
    size = median([r["report"] for r in sweeps[("stet", 1)]])
    print(f"no-op rebuild of the S document: {rebuild * 1000:.0f} ms; its report: {size / 1e6:.2f} MB")
    checks.append(("S: no-op rebuild under 50 ms", rebuild < 0.05, f"{rebuild * 1000:.0f} ms"))
    checks.append(("S: report under 1 MB", size < 1e6, f"{size / 1e6:.2f} MB"))
    print()
    for what, ok, value in checks:
        print(f"[{'met' if ok else 'NOT MET'}] {what}: {value}")


def print_table(header, rows):
    widths = [max(len(str(x)) for x in column) for column in zip(header, *rows)]
    line = lambda cells: "  ".join(str(c).rjust(w) if i else str(c).ljust(w)
                                   for i, (c, w) in enumerate(zip(cells, widths)))
    print(line(header))
    print("  ".join("-" * w for w in widths))
    for row in rows:
        print(line(row))


if __name__ == "__main__":
    main()
