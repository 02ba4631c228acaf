//! The step graph a plan makes: the execution order puts every step after the steps it
//! reads and keeps document order among independent ones, and references that would
//! need a cycle are located errors. Documents are planned through `stet::load`; the
//! errors are also checked through the binary, which must exit 2 and write nothing.

mod common;

use common::Workspace;
use stet::plan::{Plan, PlanOptions};

fn plan_of(ws: &Workspace, text: &str) -> Plan {
    let path = ws.write("doc.md", text);
    match stet::load(&path, &PlanOptions::default()) {
        Ok(loaded) => loaded.plan,
        Err(error) => panic!("the document should plan: {error}"),
    }
}

/// The ids of a plan's steps in execution order.
fn order_ids(plan: &Plan) -> Vec<&str> {
    plan.order
        .iter()
        .map(|&i| plan.steps[i].id.as_str())
        .collect()
}

fn assert_every_step_follows_what_it_reads(plan: &Plan) {
    let position = |step: usize| plan.order.iter().position(|&i| i == step).unwrap();
    for (index, step) in plan.steps.iter().enumerate() {
        for upstream in step.upstream.all() {
            assert!(
                position(upstream) < position(index),
                "'{}' runs before '{}', which it reads: {:?}",
                step.id,
                plan.steps[upstream].id,
                order_ids(plan)
            );
        }
    }
}

/// Steps written before the steps they read, with independent steps between them.
const WRITTEN_OUT_OF_ORDER: &str = "\
```yaml train first
data: iris
net: small
epochs: 3
```

```yaml compare both
runs: [first, second]
```

```yaml data iris
file: iris.csv
target: species
```

```yaml net small
hidden: [3]
```

```yaml data iris_again
file: iris.csv
target: species
holdout: 0.3
```

```yaml train second
data: iris_again
net: small
epochs: 3
```

```yaml net unused
hidden: [2]
```
";

#[test]
fn every_step_runs_after_the_steps_it_reads_even_when_written_before_them() {
    let ws = Workspace::new();
    let plan = plan_of(&ws, WRITTEN_OUT_OF_ORDER);
    assert_every_step_follows_what_it_reads(&plan);
    assert_eq!(plan.order.len(), plan.steps.len());
}

#[test]
fn independent_steps_keep_document_order() {
    let ws = Workspace::new();
    let plan = plan_of(&ws, WRITTEN_OUT_OF_ORDER);
    // Each time, the first step in the document whose inputs are done runs next.
    assert_eq!(
        order_ids(&plan),
        [
            "iris",
            "small",
            "first",
            "iris_again",
            "second",
            "both",
            "unused"
        ]
    );
}

#[test]
fn a_demo_document_written_in_reading_order_runs_in_document_order() {
    let ws = Workspace::new();
    for demo in ["hives.md", "greenhouse.md"] {
        let path = ws.demo(demo);
        let plan = stet::load(&path, &PlanOptions::default())
            .unwrap_or_else(|error| panic!("{demo}: {error}"))
            .plan;
        assert_every_step_follows_what_it_reads(&plan);
        assert_eq!(
            plan.order,
            (0..plan.steps.len()).collect::<Vec<_>>(),
            "{demo}"
        );
    }
}

// No cycle can be written: a train reads only data and net steps, which read nothing; a
// sweep reads only a train; compare, predict and export are read by nothing that they
// read. So every reference a cycle would need names a step of the wrong kind, and that
// is refused at the reference.

const DATA_AND_NET: &str = "\
```yaml data iris
file: iris.csv
target: species
```

```yaml net small
hidden: [3]
```

";

/// Builds `text` with the binary and checks it is refused at `line:column` with
/// `expected` in the message, exit 2, and nothing written.
fn assert_refused_at(text: &str, line_column: &str, expected: &str) {
    let ws = Workspace::new();
    let doc = ws.write("doc.md", text);
    let (output, summary) = ws.build(&doc, &[]);
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert_eq!(output.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains(&format!("doc.md:{line_column}")),
        "not located at {line_column}: {stderr}"
    );
    assert!(stderr.contains(expected), "{stderr}");
    assert!(summary.is_none(), "a summary was written");
    assert!(!ws.path("doc.html").exists(), "a report was written");
}

#[test]
fn a_train_naming_itself_as_its_data_is_a_located_error() {
    assert_refused_at(
        &format!("{DATA_AND_NET}```yaml train loop\ndata: loop\nnet: small\n```\n"),
        "11:1",
        "'loop' is a train step, but data must name a data step",
    );
}

#[test]
fn a_sweep_starting_from_itself_is_a_located_error() {
    assert_refused_at(
        &format!(
            "{DATA_AND_NET}```yaml train fit\ndata: iris\nnet: small\nepochs: 3\n```\n\n```yaml sweep wider\nfrom: wider\nvary:\n  learning_rate: [0.1, 0.2]\n```\n"
        ),
        "17:1",
        "'wider' is a sweep step, but from must name a train step",
    );
}

#[test]
fn a_compare_naming_a_compare_is_a_located_error() {
    assert_refused_at(
        &format!(
            "{DATA_AND_NET}```yaml train fit\ndata: iris\nnet: small\nepochs: 3\n```\n\n```yaml compare one\nruns: [fit, two]\n```\n\n```yaml compare two\nruns: [fit, one]\n```\n"
        ),
        "17:1",
        "'two' is a compare step, but runs must name a train or sweep step",
    );
}
