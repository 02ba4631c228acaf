//! Fisher's Iris data end to end (tests/data/README.md names its source and licence),
//! and how a build reports a failing step or an unusable document.

mod common;

use common::{Workspace, step, stet};

const IRIS: &str = r#"# Iris

```yaml data iris
file: iris.csv
target: species
holdout: 0.2
seed: 1
```

```yaml net four_eight_three
hidden: [8]
activation: tanh
```

```yaml train fit
data: iris
net: four_eight_three
learning_rate: 0.05
momentum: 0.9
batch: 16
epochs: 300
seed: 2
```
"#;

// Common practice: small networks score 0.93–0.98 held-out accuracy on Iris.
#[test]
fn a_four_eight_three_network_reaches_093_held_out_accuracy_on_iris() {
    let ws = Workspace::new();
    let doc = ws.write("iris.md", IRIS);
    let summary = ws.build_ok(&doc, &[]);
    let accuracy = step(&summary, "fit")["metrics"]["test"]["accuracy"]
        .as_f64()
        .unwrap();
    assert!(accuracy >= 0.93, "held-out accuracy {accuracy}");
}

#[test]
fn a_failing_step_shows_in_place_and_independent_steps_still_run() {
    let ws = Workspace::new();
    // A row short of a cell is found only when the step reads the file (a wrong column
    // name is refused with the document, from the header).
    ws.write("broken.csv", "size,colour\n1,red\n2\n3,blue\n");
    let doc = ws.write(
        "mixed.md",
        &format!(
            "{IRIS}\n```yaml data broken\nfile: broken.csv\ntarget: colour\n```\n\n```yaml train on_broken\ndata: broken\nnet: four_eight_three\nepochs: 5\n```\n"
        ),
    );
    let (output, summary) = ws.build(&doc, &[]);
    assert_eq!(output.status.code(), Some(1));
    let summary = summary.unwrap();
    assert_eq!(step(&summary, "fit")["status"], "ran");
    assert_eq!(step(&summary, "broken")["status"], "failed");
    assert!(
        step(&summary, "broken")["error"]
            .as_str()
            .unwrap()
            .contains("broken.csv")
    );
    assert_eq!(step(&summary, "on_broken")["status"], "failed");
    let html = std::fs::read_to_string(ws.path("mixed.html")).unwrap();
    assert!(html.contains("This step failed."));
}

#[test]
fn an_unusable_document_exits_2_names_the_line_and_writes_nothing() {
    let ws = Workspace::new();
    let doc = ws.write("iris.md", IRIS);
    ws.build_ok(&doc, &[]);
    let report_before = std::fs::read(ws.path("iris.html")).unwrap();
    ws.write("iris.md", &IRIS.replace("momentum: 0.9", "momentun: 0.9"));
    let output = stet(&["build".into(), doc.display().to_string()], ws.dir.path());
    assert_eq!(output.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(stderr.contains("iris.md:19:1"), "{stderr}");
    assert!(stderr.contains("did you mean 'momentum'?"), "{stderr}");
    assert_eq!(std::fs::read(ws.path("iris.html")).unwrap(), report_before);
}

#[test]
fn an_exploding_learning_rate_ends_in_diverged_with_its_epoch() {
    let ws = Workspace::new();
    let exploding = IRIS
        .replace("learning_rate: 0.05", "learning_rate: 100000000")
        .replace("activation: tanh", "activation: relu");
    let doc = ws.write("boom.md", &exploding);
    let summary = ws.build_ok(&doc, &[]);
    let fit = step(&summary, "fit");
    assert_eq!(
        fit["status"], "ran",
        "divergence is a result, not a failure"
    );
    assert_eq!(fit["stop"]["reason"], "diverged");
    let epoch = fit["stop"]["epoch"].as_u64().unwrap();
    assert!((1..300).contains(&epoch), "stopped at epoch {epoch}");
    let html = std::fs::read_to_string(ws.path("boom.html")).unwrap();
    assert!(html.contains("stopped: diverged"));
}
