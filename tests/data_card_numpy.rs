//! The data card's column statistics against numpy (`np.min`, `np.quantile(x, 0.5,
//! method="linear")` — the median as numpy's default method takes it, which is the
//! method stet uses — `np.max`, `np.mean`, `np.std(ddof=1)`, `np.unique`), computed by
//! `tests/reference/column_stats.py` from the same CSV file: on Fisher's Iris data
//! (tests/data/README.md) and on an invented file with missing values.
//!
//! Needs `STET_PYTHON` (a Python with numpy); skips without it, except in CI.

mod common;

use std::path::Path;
use std::process::Command;

use common::{Workspace, project, reference_python, step};
use serde_json::Value;

/// Agreement required, relative to the value: numpy sums in pairs and stet per distinct
/// value, so the last bits of a mean or deviation may differ.
const TOLERANCE: f64 = 1e-12;

/// numpy's statistics of `columns` of the CSV at `csv`.
fn numpy_stats(python: &Path, csv: &Path, columns: &[&str]) -> Value {
    let output = Command::new(python)
        .arg(project().join("tests/reference/column_stats.py"))
        .arg(csv)
        .args(columns)
        .output()
        .expect("the reference Python runs");
    assert!(
        output.status.success(),
        "column_stats.py failed: {}",
        String::from_utf8_lossy(&output.stderr)
    );
    serde_json::from_slice(&output.stdout).expect("column_stats.py prints JSON")
}

/// Checks every numeric column of the data step `d` in `summary` against numpy.
fn assert_matches_numpy(summary: &Value, numpy: &Value, columns: &[&str]) {
    let data = step(summary, "d");
    for name in columns {
        let ours = data["columns"]
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["name"] == *name)
            .unwrap_or_else(|| panic!("no column {name}"));
        let theirs = &numpy[name];
        for count in ["count", "missing", "distinct"] {
            assert_eq!(ours[count], theirs[count], "{name} {count}");
        }
        for stat in ["min", "median", "max", "mean", "sd"] {
            let (a, b) = (ours[stat].as_f64().unwrap(), theirs[stat].as_f64().unwrap());
            assert!(
                (a - b).abs() <= TOLERANCE * b.abs().max(1.0),
                "{name} {stat}: stet {a}, numpy {b}"
            );
        }
    }
}

const IRIS_COLUMNS: [&str; 4] = [
    "sepal_length_cm",
    "sepal_width_cm",
    "petal_length_cm",
    "petal_width_cm",
];

#[test]
fn column_statistics_match_numpy_on_the_iris_file() {
    let Some(python) = reference_python("column statistics against numpy") else {
        return;
    };
    let ws = Workspace::new();
    let doc = ws.write(
        "doc.md",
        "```yaml data d\nfile: iris.csv\ntarget: species\n```\n",
    );
    let summary = ws.build_ok(&doc, &[]);
    let numpy = numpy_stats(&python, &ws.path("iris.csv"), &IRIS_COLUMNS);
    assert_matches_numpy(&summary, &numpy, &IRIS_COLUMNS);
}

/// Invented readings with gaps: `temp` has 11 values (an odd count) and 3 missing
/// cells, `humidity` 12 values (an even count, so the median falls between two) and 2
/// missing, among them a row that `missing: drop` leaves out but the card still counts.
const WITH_GAPS: &str = "temp,humidity,status
21.5,40,ok
,42.5,ok
19.25,NA,bad
23,38,ok
18.5,?,bad
24.75,41,ok
NA,39.5,bad
20,44,ok
22.125,37,bad
26.5,45.25,ok
17,36,bad
21.5,43,ok
 n/a ,40,bad
19.75,41.5,ok
";

#[test]
fn column_statistics_match_numpy_on_a_file_with_missing_values() {
    let Some(python) = reference_python("column statistics against numpy") else {
        return;
    };
    let ws = Workspace::new();
    let csv = ws.write("gaps.csv", WITH_GAPS);
    let doc = ws.write(
        "doc.md",
        "```yaml data d\nfile: gaps.csv\ntarget: status\nmissing: drop\n```\n",
    );
    let summary = ws.build_ok(&doc, &[]);
    let columns = ["temp", "humidity"];
    let numpy = numpy_stats(&python, &csv, &columns);
    // The file's own counts, by eye: 14 rows, temp missing on lines 3, 8 and 14.
    assert_eq!(
        (&numpy["temp"]["count"], &numpy["temp"]["missing"]),
        (&11.into(), &3.into())
    );
    assert_eq!(numpy["humidity"]["count"], 12);
    assert_matches_numpy(&summary, &numpy, &columns);
}
