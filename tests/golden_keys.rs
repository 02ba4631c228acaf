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

/// The step keys of `DOC`, in document order. Changed with CACHE_FORMAT_VERSION 3
/// (issue 14: a run's entry keeps its held-out outputs for the paired tests).
const STEP_KEYS: [(&str, &str); 3] = [
    (
        "rows",
        "9fd5e83f5a19cb4c71b34e162d867685b2812d0d80d83b31f74e880ed46076bd",
    ),
    (
        "small",
        "c69e26618aa7c10b39a16df1c1ffd4de11be6d10e3143e4e18732eec2cce9f5b",
    ),
    (
        "fit",
        "f544b1826528e2a51fc754615e1cc486cbdb5577a77efb2bd27c1a91e01d9662",
    ),
];

/// The run keys of the train step `fit` (one per fold).
const RUN_KEYS: [&str; 2] = [
    "ae719a10d63c6c4cbf3214639e1db4d08771275c5abb67dca331d2841e49a6a2",
    "61ea0b8d7dbea1f2353d8860079157f1729a7707c6e0ebcb144ab7c7f17743cd",
];

/// The whole entry file of the net step `small` (a marker: header, no payload).
const MARKER_ENTRY: &str =
    "7374657400656e3237ca9026a18349a350ea3ee01270bacd231949cd590dca76f31524cacde92753";

/// The BLAKE3 of the entry file holding the data step's summary (too long to pin whole).
const DATA_ENTRY_HASH: &str = "003bc0b0dd7f2fa669b9f0fac6f3991c66d9504b22d54d1e28f964944e9f9d65";

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
