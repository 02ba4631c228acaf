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
# Runs per side per repetition: the small cases take milliseconds, so more of
# them cost little and steady their medians.
REPEATS = {"A": 5, "B": 5, "C": 1, "C32": 1}

TARGETS = {"A": 10.0, "B": 3.0, "C": 1.3, "C32": 1.3}
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
    """Runs a process to completion: (wall seconds, peak RSS in KiB, stdout).
    The child is reaped with wait4 so that its own peak RSS can be read."""
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
        return wall, usage.ru_maxrss, out.read().decode()


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


def sklearn_run(case_path, mode="fit"):
    wall, rss, stdout = run_child(UNPIN + [sys.executable, str(BENCH / "sklearn_side.py"), mode, str(case_path)])
    result = json.loads(stdout) if mode == "fit" else {}
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
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=3,
                        help="repetitions; medians are reported (default 3)")
    parser.add_argument("--cases", default=",".join(CASES),
                        help="comma-separated cases to run, e.g. 'A,B' (default: all)")
    args = parser.parse_args()
    if args.runs < 1:
        sys.exit("--runs must be at least 1")
    names = [n for n in CASES if n in args.cases.split(",")]
    make_data()

    documents = {n: stet_document(n) for n in names}
    cases = {n: case_file(n) for n in names}
    results = {n: {"stet": [], "sklearn": []} for n in names}
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

    report(names, results, whole, peaks)


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
