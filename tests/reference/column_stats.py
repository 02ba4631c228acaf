"""Column statistics of a CSV file computed with numpy, for tests/data_card_numpy.rs.

Usage: python column_stats.py FILE COLUMN...

Prints a JSON object: per named column its count, missing, distinct, min, median, max,
mean and sd over the cells that hold a number. A cell is missing as stet reads it:
empty, or one of ?, NA, N/A, NaN in any case, after trimming spaces.
"""

import csv
import json
import sys

import numpy as np

MISSING = {"", "?", "na", "n/a", "nan"}


def values(path, column):
    with open(path, newline="", encoding="utf-8") as f:
        cells = [row[column].strip() for row in csv.DictReader(f)]
    present = [c for c in cells if c.lower() not in MISSING]
    return np.array([float(c) for c in present]), len(cells) - len(present)


def stats(path, column):
    x, missing = values(path, column)
    return {
        "count": int(x.size),
        "missing": missing,
        "distinct": int(np.unique(x).size),
        "min": float(np.min(x)),
        # numpy's default quantile method, named so the comparison says what it checks:
        # Hyndman and Fan's definition 7, the mean of the two middle values for an even count.
        "median": float(np.quantile(x, 0.5, method="linear")),
        "max": float(np.max(x)),
        "mean": float(np.mean(x)),
        "sd": float(np.std(x, ddof=1)),
    }


if __name__ == "__main__":
    path, columns = sys.argv[1], sys.argv[2:]
    print(json.dumps({column: stats(path, column) for column in columns}))
