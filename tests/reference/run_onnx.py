"""Checks an ONNX model exported by stet with the ONNX project's own checker, runs it
with onnxruntime on the rows of a CSV file, and prints the outputs as JSON, so a test can
compare them with stet's predictions. Usage: run_onnx.py MODEL.onnx ROWS.csv

The rows are encoded as the model's `inputs` metadata says: a numeric column is its
number, a categorical column one 0/1 feature per category, in order."""

import csv
import json
import sys

import numpy as np
import onnx
import onnxruntime


def encoded_columns(inputs, rows):
    """One list of values per feature, in the model's feature order."""
    columns = []
    for column in inputs:
        cells = [row[column["name"]].strip() for row in rows]
        if column["kind"] == "numeric":
            columns.append([float(cell) for cell in cells])
        else:
            for category in column["categories"]:
                columns.append([1.0 if cell == category else 0.0 for cell in cells])
    return columns


def main():
    model = onnx.load(sys.argv[1])
    onnx.checker.check_model(model, full_check=True)
    metadata = {entry.key: entry.value for entry in model.metadata_props}
    rows = list(csv.DictReader(open(sys.argv[2], newline="")))
    columns = encoded_columns(json.loads(metadata["inputs"]), rows)

    session = onnxruntime.InferenceSession(
        sys.argv[1], providers=["CPUExecutionProvider"]
    )
    names = [graph_input.name for graph_input in session.get_inputs()]
    assert names == json.loads(metadata["features"]), (names, metadata["features"])
    feeds = {
        name: np.array(values, dtype=np.float64).reshape(-1, 1)
        for name, values in zip(names, columns)
    }
    (outputs,) = session.run(None, feeds)
    assert outputs.dtype == np.float64, outputs.dtype
    json.dump(
        {
            "output": session.get_outputs()[0].name,
            "opset": model.opset_import[0].version,
            "values": outputs.tolist(),
        },
        sys.stdout,
    )


if __name__ == "__main__":
    main()
