//! Reports read in a real browser (issue 16): the demo reports, a 200-combination
//! sweep and a ten-class labelled predict batch, opened in headless Chromium at a wide and a phone width by
//! `tests/browser/report_layout.py`, which checks the layout and lists what is wrong.
//! Set `STET_KEEP_SCREENSHOTS=DIR` to keep the screenshots it takes.

mod common;

use std::path::PathBuf;
use std::process::Command;

use common::{Workspace, browser_available, project, reference_python};

/// Three varied settings, 10 × 5 × 4 = 200 combinations, each a few epochs on Iris
/// (150 rows) so the whole sweep trains in seconds.
const LARGE_SWEEP: &str = "\
# A large sweep

```yaml data iris
file: ../iris.csv
target: species
```

```yaml net small
hidden: [4]
```

```yaml train base
data: iris
net: small
epochs: 3
```

```yaml sweep wide
from: base
vary:
  learning_rate: [0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1.0]
  momentum: [0, 0.3, 0.5, 0.8, 0.9]
  batch: [8, 16, 32, full]
```
";

/// Ten invented tree species told apart by three measurements, and a labelled batch
/// of new trees named by `tree_id` and `plot`, one label unseen: a predict card with a
/// ten-class confusion matrix and twelve prediction columns, wider than a phone.
fn ten_class_batch(ws: &Workspace) -> PathBuf {
    const SPECIES: [&str; 10] = [
        "alder",
        "birch",
        "cedar",
        "douglas_fir",
        "elm",
        "hemlock",
        "larch",
        "maple",
        "oak_red",
        "pine_scots",
    ];
    // Measurements a fixed function of the species and the row, so classes overlap a little.
    let measure = |class: usize, row: usize| {
        let wobble = ((row * 7919) % 100) as f64 / 250.0;
        format!(
            "{:.3},{:.3},{:.3}",
            class as f64 + wobble,
            (class % 3) as f64 + wobble,
            ((class * class) % 7) as f64 - wobble
        )
    };
    let mut trees = String::from("a,b,c,species\n");
    for row in 0..300 {
        let class = (row * 3) % SPECIES.len();
        trees.push_str(&format!("{},{}\n", measure(class, row), SPECIES[class]));
    }
    ws.write("experiments/trees.csv", &trees);
    let mut batch = String::from("tree_id,a,b,c,plot,species\n");
    for row in 0..40 {
        let class = (row * 7) % SPECIES.len();
        let label = if row == 5 { "yew" } else { SPECIES[class] };
        batch.push_str(&format!(
            "T-{},{},north-{},{label}\n",
            1000 + row,
            measure(class, row + 300),
            row % 4
        ));
    }
    ws.write("experiments/new-trees.csv", &batch);
    ws.write(
        "experiments/trees.md",
        "# Trees\n\n```yaml data trees\nfile: trees.csv\ntarget: species\n```\n\n\
         ```yaml net small\nhidden: [12]\n```\n\n\
         ```yaml train fit\ndata: trees\nnet: small\noptimizer: adam\nlearning_rate: 0.02\nepochs: 60\n```\n\n\
         ```yaml predict field\nmodel: fit\nfile: new-trees.csv\n```\n",
    )
}

/// Where the screenshots go: `STET_KEEP_SCREENSHOTS` if set, else the test's folder.
fn screenshot_folder(ws: &Workspace) -> PathBuf {
    std::env::var_os("STET_KEEP_SCREENSHOTS")
        .map(PathBuf::from)
        .unwrap_or_else(|| ws.path("screenshots"))
}

#[test]
fn a_sweep_of_200_combinations_shows_its_shape_and_its_best_ten_with_the_rest_folded() {
    let ws = Workspace::new();
    let sweep = ws.write("experiments/large_sweep.md", LARGE_SWEEP);
    ws.build_ok(&sweep, &[]);
    let html = std::fs::read_to_string(sweep.with_extension("html")).unwrap();
    let card = &html[html.find("id=\"step-wide\"").unwrap()..];
    let card = &card[..card.find("</section>").unwrap()];
    let (shown, folded) = card
        .split_once("<details class=\"more\">")
        .expect("a disclosure");
    // Each table row of a combination starts with its rank cell.
    assert_eq!(
        shown.matches("<tr><td>").count() + shown.matches("<tr class=\"best\">").count(),
        10
    );
    assert_eq!(folded.matches("<tr><td>").count(), 190);
    assert!(folded.starts_with("<summary>The other 190 combinations</summary>"));
    // A heat map over two settings, a plot per setting (three), the loss chart.
    assert_eq!(card.matches("<svg class=\"chart\"").count(), 5);
    assert!(card.contains("the best cell outlined"));
    assert!(card.contains("at each learning_rate (log axis)"));
}

#[test]
fn every_demo_report_a_large_sweep_and_a_ten_class_batch_read_well_at_wide_and_phone_widths() {
    let check = "report layout in Chromium";
    let Some(python) = reference_python(check) else {
        return;
    };
    if !browser_available(check) {
        return;
    }
    let ws = Workspace::new();
    // Each report, with the most A4 pages it may print on (issue 16: the hives demo on
    // at most ten); the large sweep is not printed.
    let mut reports = Vec::new();
    for demo in ["hives.md", "greenhouse.md"] {
        let doc = ws.demo(demo);
        ws.build_ok(&doc, &[]);
        reports.push(format!("{}:10", doc.with_extension("html").display()));
    }
    let sweep = ws.write("experiments/large_sweep.md", LARGE_SWEEP);
    ws.build_ok(&sweep, &[]);
    reports.push(sweep.with_extension("html").display().to_string());
    // Issue 15: a labelled batch's card with ten classes scrolls inside itself.
    let trees = ten_class_batch(&ws);
    ws.build_ok(&trees, &[]);
    reports.push(trees.with_extension("html").display().to_string());

    let output = Command::new(python)
        .arg(project().join("tests/browser/report_layout.py"))
        .arg(screenshot_folder(&ws))
        .args(&reports)
        .output()
        .expect("the layout script runs");
    assert!(
        output.status.success(),
        "layout problems:\n{}{}",
        String::from_utf8_lossy(&output.stdout),
        String::from_utf8_lossy(&output.stderr)
    );
}
