//! Models that other tools load (issue 18): the JSON export's provenance, and the ONNX
//! export checked against the outside (the ONNX checker and onnxruntime).

mod common;

use common::{Workspace, reference_python, step};
use serde_json::Value;

/// Every hidden activation stet offers (the net step's `activation` words).
const HIDDEN_ACTIVATIONS: [&str; 5] = ["sigmoid", "tanh", "relu", "leaky_relu", "linear"];

/// Three data sets: three classes (softmax output), two classes (one sigmoid output),
/// and a numeric target (linear output, in the target's units).
const DATA: &str = r#"# Exports

```yaml data three
file: demo-data/hives.csv
target: status
inputs: [site, temp_c, humidity_pct, weight_kg, sound_hz]
seed: 2
```

```yaml data two
file: two-classes.csv
target: status
inputs: [site, temp_c, humidity_pct, weight_kg, sound_hz]
seed: 3
```

```yaml data water
file: demo-data/greenhouse.csv
target: water_l
seed: 4
```
"#;

/// A net, a train, a predict over the data file and an ONNX export per data set and
/// hidden activation; the model ids are `DATA_ACTIVATION`.
fn export_document() -> String {
    let mut text = DATA.to_string();
    for activation in HIDDEN_ACTIVATIONS {
        text +=
            &format!("\n```yaml net {activation}\nhidden: [6, 4]\nactivation: {activation}\n```\n");
        for (data, file) in [
            ("three", "demo-data/hives.csv"),
            ("two", "two-classes.csv"),
            ("water", "demo-data/greenhouse.csv"),
        ] {
            let id = format!("{data}_{activation}");
            text += &format!(
                "\n```yaml train {id}\ndata: {data}\nnet: {activation}\nlearning_rate: 0.02\nepochs: 25\nseed: 6\n```\n\
                 \n```yaml predict {id}_rows\nmodel: {id}\nfile: {file}\nwrite: out/{id}.csv\n```\n\
                 \n```yaml export {id}_onnx\nmodel: {id}\nformat: onnx\nwrite: out/{id}.onnx\n```\n"
            );
        }
    }
    text
}

/// The demo hives without the `swarming` rows: a two-class target.
fn write_two_classes(ws: &Workspace) {
    let hives = std::fs::read_to_string(ws.path("demo-data/hives.csv")).unwrap();
    let kept: String = hives
        .lines()
        .filter(|line| !line.ends_with(",swarming"))
        .map(|line| format!("{line}\n"))
        .collect();
    ws.write("two-classes.csv", &kept);
}

/// The numeric columns stet's predict wrote after the input columns: the class
/// probabilities (`p_…`) or the predicted values (`predicted_…` of a numeric target).
fn predicted(path: &std::path::Path, numeric_from: usize) -> Vec<Vec<f64>> {
    let mut reader = csv::Reader::from_path(path).unwrap();
    reader
        .records()
        .map(|record| {
            record
                .unwrap()
                .iter()
                .skip(numeric_from)
                .map(|cell| cell.parse().unwrap())
                .collect()
        })
        .collect()
}

/// Index of the first output column in a predict CSV: after the input file's columns,
/// and after `predicted_<target>` when classifying.
fn first_output_column(path: &std::path::Path, classify: bool) -> usize {
    let headers = csv::Reader::from_path(path)
        .unwrap()
        .headers()
        .unwrap()
        .clone();
    let prefix = if classify { "p_" } else { "predicted_" };
    let first = headers.iter().position(|h| h.starts_with(prefix)).unwrap();
    assert!(!classify || headers[first - 1].starts_with("predicted_"));
    first
}

#[test]
fn onnxruntime_computes_stets_predictions_for_every_hidden_activation() {
    let ws = Workspace::new();
    write_two_classes(&ws);
    let doc = ws.write("exports.md", &export_document());
    ws.build_ok(&doc, &[]);
    let Some(python) = reference_python("the ONNX export against onnxruntime") else {
        return;
    };
    let script = common::project().join("tests/reference/run_onnx.py");
    for activation in HIDDEN_ACTIVATIONS {
        for (data, file, output, width) in [
            ("three", "demo-data/hives.csv", "probabilities", 3),
            ("two", "two-classes.csv", "probabilities", 2),
            ("water", "demo-data/greenhouse.csv", "predictions", 1),
        ] {
            let id = format!("{data}_{activation}");
            let run = std::process::Command::new(&python)
                .arg(&script)
                .arg(ws.path(&format!("out/{id}.onnx")))
                .arg(ws.path(file))
                .output()
                .unwrap();
            assert!(
                run.status.success(),
                "{id}: {}",
                String::from_utf8_lossy(&run.stderr)
            );
            let outside: Value = serde_json::from_slice(&run.stdout).unwrap();
            assert_eq!(outside["output"], output, "{id}");
            assert!(outside["opset"].as_i64().unwrap() >= 13, "{id}");
            let stet_csv = ws.path(&format!("out/{id}.csv"));
            let classify = data != "water";
            let stet = predicted(&stet_csv, first_output_column(&stet_csv, classify));
            let runtime: Vec<Vec<f64>> = serde_json::from_value(outside["values"].clone()).unwrap();
            assert_eq!(
                runtime.len(),
                stet.len(),
                "{id}: one output row per CSV row"
            );
            for (row, (theirs, ours)) in runtime.iter().zip(&stet).enumerate() {
                assert_eq!(theirs.len(), width, "{id} row {row}");
                assert_eq!(ours.len(), width, "{id} row {row}");
                for (a, b) in theirs.iter().zip(ours) {
                    // Every operator runs in double precision (issue 18's 1e-9).
                    assert!(
                        (a - b).abs() <= 1e-9,
                        "{id} row {row}: onnxruntime {a} vs stet {b}"
                    );
                }
            }
        }
    }
}

const MODEL: &str = r#"# Provenance

Prose that a later edit changes.

```yaml data hives
file: demo-data/hives.csv
target: status
inputs: [site, temp_c, humidity_pct, weight_kg, sound_hz, daily_weight_change_kg]
seed: 2
```

```yaml net leaky
hidden: [7, 4]
activation: leaky_relu
```

```yaml train model
data: hives
net: leaky
learning_rate: 0.03
epochs: 60
seed: 5
```

```yaml export json
model: model
write: out/model.json
```
"#;

fn read_json(path: std::path::PathBuf) -> Value {
    serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap()
}

#[test]
fn the_json_export_says_where_its_model_came_from() {
    let ws = Workspace::new();
    let doc = ws.write("model.md", MODEL);
    let summary = ws.build_ok(&doc, &[]);
    let export = read_json(ws.path("out/model.json"));
    assert_eq!(export["format"], "stet-model");
    assert_eq!(export["version"], 3);
    // A classifier's outputs are probabilities, never scaled.
    assert_eq!(export["target_scaling"]["kind"], "none");
    let provenance = &export["provenance"];
    assert_eq!(provenance["stet_version"], env!("CARGO_PKG_VERSION"));
    assert_eq!(provenance["document_hash"], summary["hash"]);
    assert_eq!(provenance["model_step"], "model");
    let run_key = provenance["run_key"].as_str().unwrap();
    assert_eq!(run_key.len(), 64, "a BLAKE3 hash in hex: {run_key}");
    // The run's cache entry is named by its key.
    let entry = ws.path(&format!(".stet/entries/{}", &run_key[..2]));
    assert!(
        std::fs::read_dir(&entry).unwrap().any(|e| e
            .unwrap()
            .file_name()
            .to_string_lossy()
            .starts_with(run_key)),
        "no cache entry for run {run_key}"
    );
    // Settings as applied: written ones, and the defaults stet filled in.
    assert_eq!(provenance["net"]["hidden"], serde_json::json!([7, 4]));
    assert_eq!(provenance["net"]["activation"], "leaky_relu");
    assert_eq!(provenance["net"]["init"], "xavier");
    assert_eq!(provenance["train"]["learning_rate"], 0.03);
    assert_eq!(provenance["train"]["epochs"], 60);
    assert_eq!(provenance["train"]["momentum"], 0.9);
    assert_eq!(provenance["train"]["precision"], "f64");
    // The held-out metrics are the summary's test metrics for the train step.
    assert_eq!(
        provenance["held_out"],
        step(&summary, "model")["metrics"]["test"]
    );
    let data = std::fs::read(ws.path("demo-data/hives.csv")).unwrap();
    assert_eq!(provenance["data_file"]["path"], "demo-data/hives.csv");
    assert_eq!(
        provenance["data_file"]["hash"],
        blake3::hash(&data).to_hex().as_str()
    );
}

#[test]
fn a_prose_edit_restamps_the_exports_document_hash_without_rerunning_it() {
    let ws = Workspace::new();
    let doc = ws.write("model.md", MODEL);
    let first = ws.build_ok(&doc, &[]);
    ws.write(
        "model.md",
        &MODEL.replace("a later edit changes", "was edited"),
    );
    let second = ws.build_ok(&doc, &[]);
    assert_eq!(step(&second, "json")["status"], "reused");
    assert_ne!(first["hash"], second["hash"]);
    let export = read_json(ws.path("out/model.json"));
    assert_eq!(export["provenance"]["document_hash"], second["hash"]);
}

#[test]
fn an_unknown_export_format_is_a_located_error_naming_the_formats() {
    let ws = Workspace::new();
    let text = MODEL.replace(
        "write: out/model.json",
        "write: out/model.json\nformat: onnnx",
    );
    let doc = ws.write("model.md", &text);
    let (output, summary) = ws.build(&doc, &[]);
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert_eq!(output.status.code(), Some(2), "{stderr}");
    assert!(summary.is_none());
    assert!(!ws.path("out/model.json").exists());
    let (at, message, help) = common::problems_in(&ws, &text).remove(0);
    // The export block's `format:` line, the 28th of the document.
    assert_eq!(at, "28:1");
    assert_eq!(message, "format takes one of `json` or `onnx`, not 'onnnx'");
    assert_eq!(help.as_deref(), Some("did you mean 'onnx'?"));
}

#[test]
fn a_feature_that_cannot_name_an_onnx_input_fails_its_export_step_by_name() {
    let ws = Workspace::new();
    // The demo hives with `temp_c` renamed to a name stet keeps for the graph's insides.
    let hives = std::fs::read_to_string(ws.path("demo-data/hives.csv")).unwrap();
    ws.write(
        "demo-data/hives.csv",
        &hives.replacen("temp_c", "stet:scaled", 1),
    );
    let text = MODEL
        .replace("inputs: [site, temp_c,", "inputs: [site, \"stet:scaled\",")
        .replace(
            "write: out/model.json",
            "write: out/model.onnx\nformat: onnx",
        );
    let doc = ws.write("model.md", &text);
    let (output, summary) = ws.build(&doc, &[]);
    assert_eq!(output.status.code(), Some(1));
    let export = step(summary.as_ref().unwrap(), "json");
    assert_eq!(export["status"], "failed");
    let error = export["error"].as_str().unwrap();
    assert!(
        error.contains("'stet:scaled' cannot name an ONNX input"),
        "{error}"
    );
    assert!(!ws.path("out/model.onnx").exists());
}

#[test]
fn an_onnx_export_written_to_a_json_file_is_a_located_error() {
    let ws = Workspace::new();
    let text = MODEL.replace(
        "write: out/model.json",
        "write: out/model.JSON\nformat: onnx",
    );
    let doc = ws.write("model.md", &text);
    let (output, summary) = ws.build(&doc, &[]);
    assert_eq!(output.status.code(), Some(2));
    assert!(summary.is_none());
    let problems = common::problems_in(&ws, &text);
    assert_eq!(
        problems,
        vec![(
            // The export block's `write:` line, the 27th of the document.
            "27:1".to_string(),
            "write names a .json file, but the export's format is onnx: set format: json or change the file's extension".to_string(),
            None
        )]
    );
}
