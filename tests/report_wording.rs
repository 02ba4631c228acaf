//! Wording in the report that read badly (issue 16).

mod common;

use common::Workspace;

#[test]
fn a_classifier_trained_on_cross_entropy_shows_loss_once_not_again_as_log_loss() {
    let ws = Workspace::new();
    let doc = ws.demo("hives.md");
    ws.build_ok(&doc, &[]);
    let html = std::fs::read_to_string(doc.with_extension("html")).unwrap();
    assert!(html.contains("<th>loss</th>"));
    assert!(
        !html.contains("<th>log loss</th>"),
        "log loss repeats the loss"
    );
    // The demo's classifier export lists its class labels.
    assert!(html.contains("activations and class labels."));
}

#[test]
fn folds_say_their_epochs_on_average_and_a_regression_export_names_no_class_labels() {
    let ws = Workspace::new();
    let doc = ws.write(
        "experiments/water.md",
        "```yaml data benches\nfile: ../demo-data/greenhouse.csv\ntarget: water_l\n\
         inputs: [crop, air_temp_c]\n```\n\n\
         ```yaml data benches_folds\nfile: ../demo-data/greenhouse.csv\ntarget: water_l\n\
         inputs: [crop, air_temp_c]\nfolds: 3\n```\n\n\
         ```yaml net small\nhidden: [3]\n```\n\n\
         ```yaml train fit\ndata: benches\nnet: small\nepochs: 4\n```\n\n\
         ```yaml train folded\ndata: benches_folds\nnet: small\nepochs: 4\n```\n\n\
         ```yaml export model\nmodel: fit\nwrite: model.json\n```\n",
    );
    ws.build_ok(&doc, &[]);
    let html = std::fs::read_to_string(doc.with_extension("html")).unwrap();
    // Three folds of four epochs each (no early stop is set).
    assert!(
        html.contains("stopped: epoch limit · 4 epochs on average over 3 runs ·"),
        "{html}"
    );
    assert!(html.contains("weights, biases and activations."), "{html}");
    assert!(!html.contains("class labels"));
}
