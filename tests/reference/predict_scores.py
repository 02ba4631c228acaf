"""scikit-learn's scores of a stet predict step's labelled rows, for
tests/predict_scoring.rs. Reads JSON on stdin: {"predictions": the CSV the predict step
wrote, "targets": the target column names, "classes": the data step's classes (or null
for regression)}. The true values are the predictions CSV's own copies of the file's
target cells; rows whose target is empty (or, for classes, not among the classes) are
left out, as stet leaves them out."""

import csv
import json
import sys

import numpy as np
from sklearn.metrics import (
    accuracy_score,
    confusion_matrix,
    mean_absolute_error,
    mean_squared_error,
    r2_score,
)


def main():
    request = json.load(sys.stdin)
    rows = list(csv.DictReader(open(request["predictions"], newline="")))
    targets = request["targets"]
    classes = request["classes"]
    if classes is not None:
        target = targets[0]
        kept = [row for row in rows if row[target].strip() in classes]
        truth = [row[target].strip() for row in kept]
        predicted = [row[f"predicted_{target}"] for row in kept]
        result = {
            "accuracy": accuracy_score(truth, predicted),
            "confusion": confusion_matrix(truth, predicted, labels=classes).tolist(),
        }
    else:
        kept = [row for row in rows if all(row[t].strip() for t in targets)]
        truth = np.array([[float(row[t]) for t in targets] for row in kept])
        predicted = np.array([[float(row[f"predicted_{t}"]) for t in targets] for row in kept])
        result = {
            "mse": mean_squared_error(truth, predicted),
            "mae": mean_absolute_error(truth, predicted),
            "r2": r2_score(truth, predicted),
            "targets": [
                {
                    "mse": mean_squared_error(truth[:, j], predicted[:, j]),
                    "mae": mean_absolute_error(truth[:, j], predicted[:, j]),
                    "r2": r2_score(truth[:, j], predicted[:, j]),
                }
                for j in range(len(targets))
            ],
        }
    result["rows"] = len(kept)
    json.dump(result, sys.stdout)


main()
