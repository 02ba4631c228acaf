//! The `--json` summary against its documented JSON Schema, `schema/stet-summary.json`
//! (draft 2020-12): the demo documents' summaries, built and rebuilt, and a summary with
//! a failed step match it, and a summary the schema would let through wrongly is refused.

mod common;

use common::{Workspace, project, step};
use jsonschema::Validator;
use serde_json::Value;

fn schema() -> Value {
    let text = std::fs::read_to_string(project().join("schema/stet-summary.json"))
        .expect("schema/stet-summary.json is readable");
    serde_json::from_str(&text).expect("the summary schema is JSON")
}

fn validator() -> Validator {
    jsonschema::draft202012::new(&schema()).expect("the summary schema compiles")
}

fn assert_matches_schema(summary: &Value, what: &str) {
    let validator = validator();
    let errors: Vec<String> = validator
        .iter_errors(summary)
        .map(|error| format!("{}: {error}", error.instance_path()))
        .collect();
    assert!(errors.is_empty(), "{what}: {errors:#?}");
}

#[test]
fn the_summary_schema_is_itself_a_valid_draft_2020_12_schema() {
    let schema = schema();
    assert_eq!(
        schema["$schema"],
        "https://json-schema.org/draft/2020-12/schema"
    );
    jsonschema::draft202012::meta::validate(&schema).expect("a valid schema");
}

#[test]
fn the_demo_documents_summaries_match_the_summary_schema_built_and_reused() {
    let ws = Workspace::new();
    for demo in ["hives.md", "greenhouse.md"] {
        let doc = ws.demo(demo);
        let built = ws.build_ok(&doc, &[]);
        assert_matches_schema(&built, &format!("{demo}, first build"));
        let reused = ws.build_ok(&doc, &[]);
        assert!(
            reused["steps"]
                .as_array()
                .unwrap()
                .iter()
                .all(|step| step["status"] == "reused"),
            "{reused}"
        );
        assert_matches_schema(&reused, &format!("{demo}, rebuilt"));
    }
}

/// Fisher's Iris data (tests/data/README.md) beside a CSV whose second row is short of a
/// cell, which fails its data step and the train reading it when the build runs.
const WITH_A_FAILURE: &str = "\
```yaml data iris
file: iris.csv
target: species
```

```yaml net small
hidden: [3]
```

```yaml train fit
data: iris
net: small
epochs: 10
```

```yaml data broken
file: broken.csv
target: colour
```

```yaml train on_broken
data: broken
net: small
epochs: 10
```
";

/// The summary of a build whose `broken` and `on_broken` steps failed.
fn summary_with_a_failure(ws: &Workspace) -> Value {
    ws.write("broken.csv", "size,colour\n1,red\n2\n3,blue\n");
    let doc = ws.write("failing.md", WITH_A_FAILURE);
    let (output, summary) = ws.build(&doc, &[]);
    assert_eq!(output.status.code(), Some(1));
    let summary = summary.expect("a summary");
    assert_eq!(step(&summary, "on_broken")["status"], "failed");
    summary
}

#[test]
fn a_summary_with_a_failed_step_matches_the_summary_schema() {
    let ws = Workspace::new();
    assert_matches_schema(&summary_with_a_failure(&ws), "a failed step");
}

/// The index in `steps` of the step with `id`.
fn step_index(summary: &Value, id: &str) -> usize {
    summary["steps"]
        .as_array()
        .unwrap()
        .iter()
        .position(|step| step["id"] == id)
        .unwrap()
}

#[test]
fn a_summary_with_a_wrong_status_word_fails_the_summary_schema() {
    let ws = Workspace::new();
    let mut summary = summary_with_a_failure(&ws);
    let at = step_index(&summary, "fit");
    summary["steps"][at]["status"] = "skipped".into();
    let validator = validator();
    let paths: Vec<String> = validator
        .iter_errors(&summary)
        .map(|error| error.instance_path().to_string())
        .collect();
    assert!(
        paths.contains(&format!("/steps/{at}/status")),
        "the status word was not refused: {paths:?}"
    );
}

#[test]
fn a_failed_step_without_its_error_a_train_without_metrics_or_a_data_step_without_its_card_fails_the_schema()
 {
    let ws = Workspace::new();
    let summary = summary_with_a_failure(&ws);
    let validator = validator();
    for (id, field) in [
        ("on_broken", "error"),
        ("fit", "metrics"),
        ("fit", "seconds"),
        ("iris", "columns"),
        ("iris", "warnings"),
    ] {
        let mut changed = summary.clone();
        let at = step_index(&changed, id);
        changed["steps"][at].as_object_mut().unwrap().remove(field);
        assert!(
            !validator.is_valid(&changed),
            "'{id}' without {field} passed"
        );
    }
}

#[test]
fn a_step_with_a_field_the_schema_does_not_describe_fails_the_summary_schema() {
    let ws = Workspace::new();
    let summary = summary_with_a_failure(&ws);
    let validator = validator();
    for id in ["iris", "fit", "on_broken"] {
        let mut changed = summary.clone();
        let at = step_index(&changed, id);
        changed["steps"][at]["colour"] = "red".into();
        assert!(!validator.is_valid(&changed), "'{id}' with colour passed");
    }
}

// Issue 14: validation metrics appear beside the training and held-out ones, in a train
// step, in each fold and in each sweep run.
#[test]
fn a_summary_with_validation_rows_matches_the_summary_schema() {
    let ws = Workspace::new();
    let doc = ws.write(
        "validation.md",
        "```yaml data iris\nfile: iris.csv\ntarget: species\nfolds: 3\nvalidation: 0.2\n```\n\n\
         ```yaml net small\nhidden: [3]\n```\n\n\
         ```yaml train fit\ndata: iris\nnet: small\nepochs: 20\npatience: 3\n```\n\n\
         ```yaml sweep rates\nfrom: fit\nvary:\n  learning_rate: [0.01, 0.1]\n```\n",
    );
    let summary = ws.build_ok(&doc, &[]);
    assert!(step(&summary, "fit")["folds"][0]["metrics"]["validation"]["accuracy"].is_number());
    assert!(step(&summary, "rates")["runs"][1]["metrics"]["validation"].is_object());
    assert_matches_schema(&summary, "a document with validation");
}

/// Iris on a holdout split, and a predict step on `batch.csv` (written by the caller),
/// which holds the species column.
const LABELLED_BATCH: &str = "\
```yaml data iris
file: iris.csv
target: species
```

```yaml net small
hidden: [3]
```

```yaml train fit
data: iris
net: small
epochs: 20
```

```yaml predict batch
model: fit
file: batch.csv
```
";

// Issue 15: a predict step whose file holds the target gains its scored rows, those
// left out, its metrics, their interval and the confusion matrix.
#[test]
fn a_labelled_predict_batch_matches_the_summary_schema_and_its_scores_are_required_together() {
    let ws = Workspace::new();
    // Fisher's Iris data (tests/data/README.md): its first six rows, one label unseen.
    ws.write(
        "batch.csv",
        "sepal_length_cm,sepal_width_cm,petal_length_cm,petal_width_cm,species\n\
         5.1,3.5,1.4,0.2,setosa\n4.9,3.0,1.4,0.2,setosa\n7.0,3.2,4.7,1.4,versicolor\n\
         6.4,3.2,4.5,1.5,\n6.3,3.3,6.0,2.5,virginica\n5.8,2.7,5.1,1.9,Iris-new\n",
    );
    let summary = ws.build_ok(&ws.write("labelled.md", LABELLED_BATCH), &[]);
    let batch = step(&summary, "batch");
    assert_eq!(batch["scored_rows"], 4);
    assert!(batch["interval"]["accuracy"].is_array());
    assert_matches_schema(&summary, "a labelled predict batch");
    let validator = validator();
    let at = step_index(&summary, "batch");
    for field in ["interval", "scored_rows", "unseen_labels"] {
        let mut changed = summary.clone();
        changed["steps"][at].as_object_mut().unwrap().remove(field);
        assert!(
            !validator.is_valid(&changed),
            "'batch' without {field} passed"
        );
    }
    let mut changed = summary.clone();
    changed["steps"][at]["metrics"]["accuracy"] = "high".into();
    assert!(!validator.is_valid(&changed), "a text accuracy passed");
}
