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

/// The step keys of `DOC`, in document order.
const STEP_KEYS: [(&str, &str); 3] = [
    (
        "rows",
        "2ae5fcde6ff3c414e944860153a0e695f01786300db735d81826444874a48d7e",
    ),
    (
        "small",
        "1b920d328b3dc17118565c4d19e32aebadd296e0d6c976f7db83a2f439fb7411",
    ),
    (
        "fit",
        "750bd57f4546123e0e57048ce453f733e840d583dd6bc8c6b680c99c0932ea79",
    ),
];

/// The run keys of the train step `fit` (one per fold).
const RUN_KEYS: [&str; 2] = [
    "8d43d3441524f9ef8c06aa0cc20629b1557e4bfa565b75a88f24c7df27550306",
    "3c20d14694428af3a860a70454af67d48b0b48f549319f56ee6ee12189761223",
];

/// The whole entry file of the net step `small` (a marker: header, no payload).
const MARKER_ENTRY: &str =
    "7374657400656e32ab91b0649577603bf2b722dce444fbe565a69d8a005a4f566c4d357e6cee2e23";

/// The BLAKE3 of the entry file holding the data step's summary (too long to pin whole).
const DATA_ENTRY_HASH: &str = "f29b6454f2d7a0243f8fddcefa1114dc1707f282704c730961b54eef240dc47f";

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
