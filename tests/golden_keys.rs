//! Golden values: the keys of a fixed document and the bytes of a fixed entry, pinned,
//! so that a change to what enters a key or to how an entry is written fails here
//! until it is made on purpose. Every user's cache misses after such a change.

mod common;

use common::Workspace;

/// What to do when a golden value changes; printed with every failure.
const WHEN_DELIBERATE: &str = "If this change is deliberate (a new crate version, \
    CACHE_FORMAT_VERSION bumped because a result's meaning changed, a new entry layout), \
    paste the new value (`left`) into this test. If it is not, something changed \
    every user's keys or entries: their caches would miss. Undo it.";

/// Invented rows: two numeric inputs and a two-class target.
const CSV: &str = "a,b,class\n\
    0.1,1.0,yes\n0.2,0.9,no\n0.3,0.8,yes\n0.4,0.7,no\n\
    0.5,0.6,yes\n0.6,0.5,no\n0.7,0.4,yes\n0.8,0.3,no\n";

const DOC: &str = r#"# Golden

```yaml data rows
file: rows.csv
target: class
folds: 2
seed: 1
```

```yaml net small
hidden: [3]
```

```yaml train fit
data: rows
net: small
epochs: 5
seed: 2
```
"#;

// Cache format 3 (issue 14, a validation split; issue 15, the data card): runs store
// their metrics on validation rows, prepared partitions their validation rows and a data
// step's summary entry its data card, so every key and entry changed on purpose.
// `validation` itself is left out of a data spec's serialisation when unset, so only
// the format version moved these keys.

// Cache format 4 (issue 14, the verdicts): a run's entry keeps its held-out outputs
// for the paired tests.

// Cache format 5 (issue 15, `scale_target`): a prepared partition carries its target
// scaler. Format 6 (issue 14, judging on validation rows): a run's entry keeps how each
// validation row went, so a sweep ranked on them marks "within noise of the best".

// Cache format 7 (issue 15, a labelled predict batch): a predict result keeps its rows'
// identifying cells and the scores of rows whose target its file gives. The version
// enters every key, so these keys moved although the document's steps did not change.

/// The step keys of `DOC`, in document order.
const STEP_KEYS: [(&str, &str); 3] = [
    (
        "rows",
        "a20f6704cd6171d0dae7fe63119a21ccab9bb5cbd758d1e3fdfc33fbb76d6bab",
    ),
    (
        "small",
        "07237994fd5334692df7332ee5273bd7712aa1612e066c578b8ce694384254a9",
    ),
    (
        "fit",
        "6f41dd76dc12f95d31b69f4d4ad58143c99f2967605f7c1ac7d1f7dc17aca683",
    ),
];

/// The run keys of the train step `fit` (one per fold).
const RUN_KEYS: [&str; 2] = [
    "b02cab07a4dff439b1941bde16113d2738c69c890d3b2f95b5726883b67b2b0c",
    "28e42dfd1b401192f9f1a0540afbe95e8d4ead0bf50325536882a3c91f18efc2",
];

/// The whole entry file of the net step `small` (a marker: header, no payload).
const MARKER_ENTRY: &str =
    "7374657400656e3218b454febdbd173070a3ceaddfc367c32b0419aba667d79f3d8a9a301b49e7bf";

/// The BLAKE3 of the entry file holding the data step's summary (too long to pin whole).
const DATA_ENTRY_HASH: &str = "7327103440517661a6211af74fc8cca5b6d4e2fcd1779788efa33b85ae98ddc7";

fn workspace() -> (Workspace, std::path::PathBuf) {
    let ws = Workspace::new();
    ws.write("rows.csv", CSV);
    let doc = ws.write("golden.md", DOC);
    (ws, doc)
}

fn planned(doc: &std::path::Path) -> stet::plan::Plan {
    match stet::load(doc, &stet::plan::PlanOptions::default()) {
        Ok(loaded) => loaded.plan,
        Err(error) => panic!("the golden document loads: {error}"),
    }
}

#[test]
fn a_fixed_documents_step_keys_are_pinned() {
    let (_ws, doc) = workspace();
    let plan = planned(&doc);
    let keys: Vec<(&str, &str)> = plan
        .steps
        .iter()
        .map(|step| (step.id.as_str(), step.key.as_str()))
        .collect();
    assert_eq!(keys, STEP_KEYS, "{WHEN_DELIBERATE}");
}

#[test]
fn a_fixed_documents_run_keys_are_pinned() {
    let (_ws, doc) = workspace();
    let plan = planned(&doc);
    let fit = &plan.steps[plan.index_of("fit").unwrap()];
    let keys: Vec<&str> = fit.fits[0].runs.iter().map(|r| r.key.as_str()).collect();
    assert_eq!(keys, RUN_KEYS, "{WHEN_DELIBERATE}");
}

#[test]
fn a_fixed_documents_entries_have_pinned_bytes() {
    let (ws, doc) = workspace();
    ws.build_ok(&doc, &["--cache", "cache"]);
    let plan = planned(&doc);
    let entry = |id: &str, suffix: &str| {
        let key = &plan.steps[plan.index_of(id).unwrap()].key;
        let path = ws.path(&format!("cache/entries/{}/{key}.{suffix}", &key[..2]));
        std::fs::read(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
    };
    let marker = hex(&entry("small", "marker"));
    assert_eq!(marker, MARKER_ENTRY, "{WHEN_DELIBERATE}");
    let data = blake3::hash(&entry("rows", "data")).to_hex().to_string();
    assert_eq!(data, DATA_ENTRY_HASH, "{WHEN_DELIBERATE}");
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}
