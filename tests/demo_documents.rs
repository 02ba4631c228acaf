//! The demo documents build into complete reports, and rebuild to the same numbers.

mod common;

use common::{Workspace, ids_with_status, without_seconds};

/// Builds a demo twice without the cache; `charts` is how many SVG charts it draws (one
/// per train step and compare step, one or two per sweep).
fn build_demo(name: &str, steps: usize, charts: usize) {
    let ws = Workspace::new();
    let doc = ws.demo(name);
    let first = ws.build_ok(&doc, &["--no-cache"]);
    let listed = first["steps"].as_array().unwrap();
    assert_eq!(listed.len(), steps);
    assert_eq!(ids_with_status(&first, "ran").len(), steps);

    let html = std::fs::read_to_string(doc.with_extension("html")).unwrap();
    assert_eq!(html.matches("<section class=\"step ").count(), steps);
    // The data cards' small histograms (one per numeric column) are not charts.
    assert!(
        html.contains("<svg class=\"histogram\""),
        "the data cards draw histograms"
    );
    assert_eq!(html.matches("<svg class=\"chart\"").count(), charts);
    assert!(html.contains("<table class=\"grid numeric metrics\">"));
    assert!(
        html.contains("<style>") && !html.contains("<link "),
        "CSS is inline"
    );
    // Its one script element is the carried experiment's data, which never runs.
    assert_eq!(
        html.matches("<script").count(),
        html.matches("<script type=\"application/octet-stream\"")
            .count(),
        "the report runs no script"
    );

    let second = ws.build_ok(&doc, &["--no-cache"]);
    for (a, b) in listed.iter().zip(second["steps"].as_array().unwrap()) {
        assert_eq!(a["metrics"], b["metrics"], "{}", a["id"]);
        assert_eq!(a["stop"], b["stop"], "{}", a["id"]);
        // Compared as a whole, so a difference does not print every run.
        assert!(
            without_seconds(&a["runs"]) == without_seconds(&b["runs"]),
            "{}",
            a["id"]
        );
    }
    for kind in ["sweep", "compare", "predict"] {
        assert!(
            listed.iter().any(|s| s["kind"] == kind),
            "the demo uses a {kind} step"
        );
    }
}

#[test]
fn the_hives_demo_builds_a_complete_report() {
    // 4 trains (each a loss chart and an importance chart), a sweep (a heat map over
    // its two settings, a plot for each, its loss chart), a compare.
    build_demo("hives.md", 12, 13);
}

#[test]
fn the_greenhouse_demo_builds_a_complete_report() {
    // 4 trains (each a loss chart and an importance chart), a sweep over two
    // non-numeric settings (a heat map, a plot for each, its loss chart), a compare;
    // and each train's one target gets a predicted-against-actual and a residual
    // chart (8 more).
    build_demo("greenhouse.md", 11, 21);
}

#[test]
fn the_hives_report_shows_a_confusion_matrix_with_class_labels() {
    let ws = Workspace::new();
    let doc = ws.demo("hives.md");
    ws.build_ok(&doc, &[]);
    let html = std::fs::read_to_string(doc.with_extension("html")).unwrap();
    assert!(html.contains("<table class=\"grid numeric confusion\">"));
    for label in ["healthy", "queenless", "swarming"] {
        assert!(html.contains(&format!("<th>{label}</th>")), "{label}");
    }
}
