#!/usr/bin/env python3
"""Cache benchmark: cold build, no-op rebuild and one-step rebuild of a demo document.

Prints a table of median wall times of the whole `stet build` process (release build),
measured interleaved in one run so that machine load affects all rows alike.
Usage: bench/cache.py [DOCUMENT] [--repeats N]   (default experiments/hives.md, 7)
"""

import argparse
import pathlib
import shutil
import statistics
import subprocess
import sys
import tempfile
import time

ROOT = pathlib.Path(__file__).resolve().parent.parent


def timed(command):
    started = time.perf_counter()
    subprocess.run(command, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - started


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("document", nargs="?", default="experiments/hives.md")
    parser.add_argument("--repeats", type=int, default=7)
    args = parser.parse_args()

    subprocess.run(["cargo", "build", "--release", "--quiet"], cwd=ROOT, check=True)
    stet = ROOT / "target" / "release" / "stet"
    source = (ROOT / args.document).read_text()
    # The first learning_rate setting is the one edited for the one-step rebuild.
    marker = "learning_rate: "
    at = source.index(marker) + len(marker)
    end = source.index("\n", at)

    with tempfile.TemporaryDirectory() as scratch:
        work = pathlib.Path(scratch)
        shutil.copytree(ROOT / "demo-data", work / "demo-data")
        (work / "experiments").mkdir()
        # One project, as in the repository, so the document may read ../demo-data.
        (work / ".stet-project").write_text("")
        document = work / "experiments" / pathlib.Path(args.document).name
        cache = work / "cache"
        build = [str(stet), "build", str(document), "--cache", str(cache)]

        cold, noop, one_step = [], [], []
        for repeat in range(args.repeats):
            document.write_text(source)
            shutil.rmtree(cache, ignore_errors=True)
            cold.append(timed(build))
            noop.append(timed(build))
            # A value not used before, so the edited step really trains.
            edited = source[:at] + f"{float(source[at:end]) * (1.01 + repeat / 1000):.6g}" + source[end:]
            document.write_text(edited)
            one_step.append(timed(build))

    rows = [("cold build", cold), ("no-op rebuild", noop), ("one train step changed", one_step)]
    print(f"{args.document}, {args.repeats} repeats, median wall time of the whole process")
    print(f"{'build':<24}{'median ms':>12}{'min ms':>10}")
    for name, times in rows:
        print(f"{name:<24}{statistics.median(times) * 1000:>12.1f}{min(times) * 1000:>10.1f}")
    ratio = statistics.median(cold) / statistics.median(noop)
    print(f"cold / no-op ratio: {ratio:.0f}x  (target: at least 50x, no-op under 50 ms)")


if __name__ == "__main__":
    sys.exit(main())
