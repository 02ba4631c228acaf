"""Applies a model exported by stet (JSON) to a CSV of new rows with plain numpy, and
prints the outputs as JSON, so a test can check that the export holds everything needed
to use the model elsewhere. Usage: apply_export.py MODEL.json ROWS.csv"""

import csv
import json
import sys

import numpy as np


def activation(name, z, slope):
    if name == "sigmoid":
        return 1.0 / (1.0 + np.exp(-z))
    if name == "tanh":
        return np.tanh(z)
    if name == "relu":
        return np.maximum(z, 0.0)
    if name == "leaky_relu":
        return np.where(z > 0.0, z, slope * z)
    if name == "linear":
        return z
    if name == "softmax":
        e = np.exp(z - z.max(axis=1, keepdims=True))
        return e / e.sum(axis=1, keepdims=True)
    raise ValueError(name)


def in_target_units(model, outputs):
    """Maps a regression network's outputs back to the targets' units (format 3's
    `target_scaling`; the identity for classifiers and older exports)."""
    scaling = model.get("target_scaling")
    if scaling is None:
        return outputs
    return outputs * np.array(scaling["divisor"]) + np.array(scaling["offset"])


def main():
    model = json.load(open(sys.argv[1]))
    rows = list(csv.DictReader(open(sys.argv[2], newline="")))
    features = []
    for row in rows:
        values = []
        for column in model["inputs"]:
            cell = row[column["name"]].strip()
            if column["kind"] == "numeric":
                values.append(float(cell))
            else:
                values.extend(1.0 if cell == c else 0.0 for c in column["categories"])
        features.append(values)
    x = np.array(features, dtype=np.float64)
    scaling = model["scaling"]
    x = (x - np.array(scaling["offset"])) / np.array(scaling["divisor"])
    slope = model.get("leaky_relu_slope", 0.01)
    for layer in model["layers"]:
        x = activation(layer["activation"], x @ np.array(layer["weights"]) + np.array(layer["biases"]), slope)
    json.dump(in_target_units(model, x).tolist(), sys.stdout)


if __name__ == "__main__":
    main()
