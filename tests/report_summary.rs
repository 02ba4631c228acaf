//! The top of a report: the document's `# Title` once, as the title, and a summary of
//! each train and sweep step's headline metric linking to its card (issue 16).

mod common;

use common::Workspace;

#[test]
fn the_hives_report_opens_with_its_title_once_and_a_summary_linking_to_each_fit() {
    let ws = Workspace::new();
    let doc = ws.demo("hives.md");
    ws.build_ok(&doc, &[]);
    let html = std::fs::read_to_string(doc.with_extension("html")).unwrap();
    // The demo starts with `# Telling a queenless hive from a swarming one`.
    let title = "Telling a queenless hive from a swarming one";
    assert_eq!(
        html.matches(&format!(">{title}</h1>")).count(),
        1,
        "one heading"
    );
    let summary = &html[html.find("<nav class=\"summary\"").expect("a summary")..];
    let summary = &summary[..summary.find("</nav>").unwrap()];
    // The demo's four train steps and its sweep, in document order.
    let links: Vec<&str> = summary
        .split("<a href=\"#step-")
        .skip(1)
        .map(|rest| rest.split('"').next().unwrap())
        .collect();
    assert_eq!(
        links,
        ["base", "no_momentum", "relu_early", "adam_full", "rates"]
    );
    for id in &links {
        assert!(
            html.contains(&format!("id=\"step-{id}\"")),
            "{id} has a card"
        );
    }
    assert_eq!(summary.matches("class=\"best\"").count(), 1, "{summary}");
    assert!(summary.contains("held out") && summary.contains("accuracy"));
    // Each fit's interval and verdict in a few words (the hives demo's networks beat the
    // model without a hidden layer: tests/verdicts.rs).
    assert_eq!(
        summary
            .matches("beats the model without a hidden layer")
            .count(),
        5,
        "{summary}"
    );
    assert!(summary.contains("95 % interval") && summary.contains("0.80–0.93"));
}
