"""scikit-learn's permutation importance of a model exported by stet (JSON), applied
in numpy as apply_export.py does, on a CSV of held-out rows. Prints {input: mean fall
in R²} as JSON. Usage: permutation_importance.py MODEL.json ROWS.csv TARGET REPEATS"""

import csv
import json
import sys

import numpy as np
from sklearn.inspection import permutation_importance
from sklearn.metrics import r2_score

from apply_export import activation, in_target_units


class ExportedModel:
    """A thin estimator around the export: numeric inputs in the export's order."""

    def __init__(self, model):
        self.model = model

    def fit(self, x, y):
        return self

    def predict(self, x):
        scaling = self.model["scaling"]
        z = (x - np.array(scaling["offset"])) / np.array(scaling["divisor"])
        slope = self.model.get("leaky_relu_slope", 0.01)
        for layer in self.model["layers"]:
            z = activation(layer["activation"], z @ np.array(layer["weights"]) + np.array(layer["biases"]), slope)
        return in_target_units(self.model, z)[:, 0]

    def score(self, x, y):
        return r2_score(y, self.predict(x))


def main():
    model = json.load(open(sys.argv[1]))
    rows = list(csv.DictReader(open(sys.argv[2], newline="")))
    target, repeats = sys.argv[3], int(sys.argv[4])
    names = [column["name"] for column in model["inputs"]]
    assert all(column["kind"] == "numeric" for column in model["inputs"])
    x = np.array([[float(row[name]) for name in names] for row in rows])
    y = np.array([float(row[target]) for row in rows])
    result = permutation_importance(ExportedModel(model), x, y, n_repeats=repeats, random_state=0)
    json.dump(dict(zip(names, result.importances_mean.tolist())), sys.stdout)


if __name__ == "__main__":
    main()
