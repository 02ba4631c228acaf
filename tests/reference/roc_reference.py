"""scikit-learn's ROC curve, AUC and Brier score of a stet model on its held-out rows,
for tests/diagnosis.rs. Reads JSON on stdin: {"model": exported model (JSON), "rows":
the data CSV, "target": its class column, "lines": the held-out rows' file lines}.
The model is applied with apply_export.py's numpy code; the positive class is the one
whose probability a two-class model outputs (the export's classes[1])."""

import csv
import json
import os
import sys

import numpy as np
from sklearn.metrics import brier_score_loss, roc_auc_score, roc_curve

sys.path.insert(0, os.path.dirname(__file__))
from apply_export import activation  # noqa: E402


def outputs(model, rows):
    x = np.array([[float(row[c["name"]]) for c in model["inputs"]] for row in rows])
    scaling = model["scaling"]
    x = (x - np.array(scaling["offset"])) / np.array(scaling["divisor"])
    for layer in model["layers"]:
        x = activation(layer["activation"], x @ np.array(layer["weights"]) + np.array(layer["biases"]), 0.01)
    return x[:, 0]


def main():
    request = json.load(sys.stdin)
    model = json.load(open(request["model"]))
    # The header is line 1, so a data row's file line is its index + 2.
    every = list(csv.DictReader(open(request["rows"], newline="")))
    rows = [every[line - 2] for line in request["lines"]]
    labels = np.array([row[request["target"]] == model["classes"][1] for row in rows], dtype=int)
    scores = outputs(model, rows)
    fpr, tpr, thresholds = roc_curve(labels, scores)
    json.dump(
        {
            "auc": [roc_auc_score(labels, scores)],
            "brier": [brier_score_loss(labels, scores)],
            "false_positive_rate": fpr.tolist(),
            "true_positive_rate": tpr.tolist(),
            # The first threshold is infinite (the curve's start): JSON has no infinity.
            "thresholds": thresholds[1:].tolist(),
        },
        sys.stdout,
    )


if __name__ == "__main__":
    main()
