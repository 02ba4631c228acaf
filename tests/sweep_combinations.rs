//! A sweep's combinations are typed overrides of its base train and net steps: each
//! combination must train exactly what a train step with those values written out
//! trains, so it runs under that step's run keys (issue 13).

mod common;

use common::Workspace;

/// Invented rows: two numeric inputs and a two-class target.
const CSV: &str = "a,b,class\n\
    0.1,1.0,yes\n0.2,0.9,no\n0.3,0.8,yes\n0.4,0.7,no\n\
    0.5,0.6,yes\n0.6,0.5,no\n0.7,0.4,yes\n0.8,0.3,no\n";

/// The base writes momentum (an sgd setting) and leaves the learning rate to its
/// default, which depends on the optimizer; its net writes an activation the varied
/// widths must keep.
const DOC: &str = r#"# Overrides

```yaml data rows
file: rows.csv
target: class
seed: 1
```

```yaml net three
hidden: [3]
activation: relu
```

```yaml net four
hidden: [4]
activation: relu
```

```yaml train base
data: rows
net: three
momentum: 0.5
epochs: 5
```

```yaml sweep shapes
from: base
vary:
  optimizer: [sgd, adam]
  hidden: [[3], [4]]
  batch: [full]
```

```yaml train sgd_three
data: rows
net: three
optimizer: sgd
momentum: 0.5
epochs: 5
batch: full
```

```yaml train adam_four
data: rows
net: four
optimizer: adam
epochs: 5
batch: full
```
"#;

fn planned() -> (Workspace, stet::plan::Plan) {
    let ws = Workspace::new();
    ws.write("rows.csv", CSV);
    let doc = ws.write("overrides.md", DOC);
    match stet::load(&doc, &stet::plan::PlanOptions::default()) {
        Ok(loaded) => (ws, loaded.plan),
        Err(error) => panic!("the document loads: {error}"),
    }
}

fn run_keys(plan: &stet::plan::Plan, id: &str, fit: usize) -> Vec<String> {
    let step = &plan.steps[plan.index_of(id).expect("the step is planned")];
    step.fits[fit].runs.iter().map(|r| r.key.clone()).collect()
}

#[test]
fn a_sweep_combination_runs_under_the_keys_of_a_train_step_with_its_values_written() {
    let (_ws, plan) = planned();
    // Grid order, first setting slowest: (sgd, [3]), (sgd, [4]), (adam, [3]), (adam, [4]).
    assert_eq!(
        run_keys(&plan, "shapes", 0),
        run_keys(&plan, "sgd_three", 0)
    );
    assert_eq!(
        run_keys(&plan, "shapes", 3),
        run_keys(&plan, "adam_four", 0)
    );
    assert_ne!(
        run_keys(&plan, "shapes", 1),
        run_keys(&plan, "sgd_three", 0)
    );
}

#[test]
fn a_sweep_combination_keeps_its_values_typed_and_as_written() {
    let (_ws, plan) = planned();
    let sweep = &plan.steps[plan.index_of("shapes").unwrap()];
    let described: Vec<String> = sweep
        .fits
        .iter()
        .map(|fit| stet::plan::describe(&fit.settings))
        .collect();
    assert_eq!(
        described[3], "optimizer = adam, hidden = [4], batch = full",
        "{described:?}"
    );
    // Neither a word, a list nor `full` is a number a chart could place.
    assert!(sweep.fits[3].settings.iter().all(|s| s.number().is_none()));
}
