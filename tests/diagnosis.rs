//! Where a fit goes wrong, through the real binary: the ROC curve, AUC and Brier score
//! against scikit-learn on the held-out rows, one-vs-rest AUC and per-target metrics in
//! the summary, and a stated reason wherever the held-out rows cannot give a value.
//!
//! The scikit-learn check needs `STET_PYTHON` (see tests/common); without it it skips.

mod common;

use std::io::Write;
use std::process::{Command, Stdio};

use serde_json::{Value, json};

use common::{Workspace, project, reference_python, step};

fn numbers(value: &Value) -> Vec<f64> {
    value
        .as_array()
        .expect("an array")
        .iter()
        .map(|v| v.as_f64().expect("a number"))
        .collect()
}

fn assert_close(stet: &[f64], reference: &[f64], what: &str) {
    assert_eq!(stet.len(), reference.len(), "{what}: lengths differ");
    for (s, r) in stet.iter().zip(reference) {
        assert!((s - r).abs() < 1e-12, "{what}: stet {s}, scikit-learn {r}");
    }
}

/// Writes scikit-learn's bundled breast-cancer data (Wolberg, Street & Mangasarian,
/// 1995; shipped with scikit-learn under its BSD licence) as `cancer.csv`: 30
/// measurements `f0`..`f29` and the `diagnosis`, `malignant` or `benign`.
fn write_breast_cancer(python: &std::path::Path, ws: &Workspace) {
    let script = "import csv, sys\n\
        from sklearn.datasets import load_breast_cancer\n\
        d = load_breast_cancer()\n\
        w = csv.writer(open(sys.argv[1], 'w', newline=''))\n\
        w.writerow([f'f{i}' for i in range(d.data.shape[1])] + ['diagnosis'])\n\
        for row, t in zip(d.data, d.target):\n    \
            w.writerow([repr(float(v)) for v in row] + [d.target_names[t]])\n";
    let status = Command::new(python)
        .args(["-c", script])
        .arg(ws.path("cancer.csv"))
        .status()
        .expect("the reference Python starts");
    assert!(status.success(), "writing the breast-cancer data failed");
}

/// tests/reference/roc_reference.py on the exported model's held-out rows.
fn scikit_learn_on(python: &std::path::Path, request: &Value) -> Value {
    let mut child = Command::new(python)
        .arg(project().join("tests/reference/roc_reference.py"))
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .spawn()
        .expect("the reference Python starts");
    child
        .stdin
        .take()
        .unwrap()
        .write_all(request.to_string().as_bytes())
        .unwrap();
    let output = child.wait_with_output().unwrap();
    assert!(output.status.success(), "the reference script failed");
    serde_json::from_slice(&output.stdout).expect("the script writes JSON")
}

const CANCER: &str = "# Breast cancer

```yaml data cancer
file: cancer.csv
target: diagnosis
holdout: 0.3
seed: 4
```

```yaml net small
hidden: [6]
```

```yaml train model
data: cancer
net: small
learning_rate: 0.01
epochs: 40
seed: 2
```

```yaml export json
model: model
write: out/model.json
```
";

#[test]
fn auc_roc_points_and_brier_match_scikit_learn_on_the_breast_cancer_held_out_rows() {
    let Some(python) = reference_python("ROC, AUC and Brier against scikit-learn") else {
        return;
    };
    let ws = Workspace::new();
    write_breast_cancer(&python, &ws);
    let doc = ws.write("cancer.md", CANCER);
    let summary = ws.build_ok(&doc, &[]);
    let model = step(&summary, "model");
    let reference = scikit_learn_on(
        &python,
        &json!({
            "model": ws.path("out/model.json"),
            "rows": ws.path("cancer.csv"),
            "target": "diagnosis",
            "lines": model["held_out_lines"],
        }),
    );
    // Reference values: sklearn.metrics.roc_auc_score, brier_score_loss and roc_curve.
    assert_close(&[model["auc"].as_f64().unwrap()], &numbers(&reference["auc"]), "AUC");
    assert_close(&[model["brier"].as_f64().unwrap()], &numbers(&reference["brier"]), "Brier");
    let points = model["roc"]["points"].as_array().unwrap();
    let pick = |name: &str| -> Vec<f64> { points.iter().map(|p| p[name].as_f64().unwrap()).collect() };
    assert_close(&pick("false_positive_rate"), &numbers(&reference["false_positive_rate"]), "FPR");
    assert_close(&pick("true_positive_rate"), &numbers(&reference["true_positive_rate"]), "TPR");
    let thresholds: Vec<f64> = points[1..].iter().map(|p| p["threshold"].as_f64().unwrap()).collect();
    assert_close(&thresholds, &numbers(&reference["thresholds"]), "thresholds");
}
