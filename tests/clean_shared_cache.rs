//! `stet clean` on a cache that several documents share: it removes only what no
//! document still uses, lists what it would remove with `--dry-run`, and passes over
//! (and names) whatever in the cache is not an entry.

mod common;

use std::path::{Path, PathBuf};

use common::{Workspace, ids_with_status, stet};

/// Document A: one train step it shares with B, one of its own.
const DOC_A: &str = r#"# A

```yaml data iris
file: iris.csv
target: species
```

```yaml net small
hidden: [4]
```

```yaml train shared
data: iris
net: small
learning_rate: 0.03
epochs: 20
```

```yaml train own
data: iris
net: small
learning_rate: 0.01
epochs: 20
```
"#;

/// Document B: the same shared train step (so the same run entry), nothing else.
const DOC_B: &str = r#"# B

```yaml data iris
file: iris.csv
target: species
```

```yaml net small
hidden: [4]
```

```yaml train shared
data: iris
net: small
learning_rate: 0.03
epochs: 20
```
"#;

/// A and B built into one cache, then A edited so that neither of its train steps
/// uses its old run any more, and built again.
fn two_documents_then_an_edit(ws: &Workspace) -> (PathBuf, PathBuf) {
    let a = ws.write("a.md", DOC_A);
    let b = ws.write("b.md", DOC_B);
    ws.build_ok(&a, &["--cache", "shared"]);
    ws.build_ok(&b, &["--cache", "shared"]);
    ws.write(
        "a.md",
        &DOC_A
            .replace("learning_rate: 0.03", "learning_rate: 0.04")
            .replace("learning_rate: 0.01", "learning_rate: 0.02"),
    );
    ws.build_ok(&a, &["--cache", "shared"]);
    (a, b)
}

fn clean(ws: &Workspace, extra: &[&str]) -> std::process::Output {
    let mut args = vec!["clean".to_string()];
    args.extend(extra.iter().map(|s| s.to_string()));
    stet(&args, ws.dir.path())
}

fn entry_files(cache: &Path) -> Vec<PathBuf> {
    let mut files = Vec::new();
    for shard in std::fs::read_dir(cache.join("entries")).unwrap() {
        let shard = shard.unwrap().path();
        if shard.is_dir() {
            for entry in std::fs::read_dir(&shard).unwrap() {
                files.push(entry.unwrap().path());
            }
        }
    }
    files.sort();
    files
}

#[test]
fn cleaning_one_document_keeps_the_entries_another_document_uses() {
    let ws = Workspace::new();
    let (a, b) = two_documents_then_an_edit(&ws);
    let before = entry_files(&ws.path("shared"));

    let output = clean(&ws, &[a.to_str().unwrap(), "--cache", "shared"]);
    assert!(output.status.success(), "{output:?}");
    let stdout = String::from_utf8_lossy(&output.stdout);
    // Only A's old `own` run and its judgement go: its old `shared` run is B's run too.
    assert!(stdout.starts_with("removed 2 cache entries"), "{stdout}");
    assert_eq!(entry_files(&ws.path("shared")).len(), before.len() - 2);

    for document in [&a, &b] {
        let rebuilt = ws.build_ok(document, &["--cache", "shared"]);
        assert!(
            ids_with_status(&rebuilt, "ran").is_empty(),
            "{}: {rebuilt}",
            document.display()
        );
    }
}

#[test]
fn a_dry_run_lists_what_clean_would_remove_and_removes_nothing() {
    let ws = Workspace::new();
    let (a, _) = two_documents_then_an_edit(&ws);
    let before = entry_files(&ws.path("shared"));

    let output = clean(
        &ws,
        &[a.to_str().unwrap(), "--cache", "shared", "--dry-run"],
    );
    assert!(output.status.success(), "{output:?}");
    let stdout = String::from_utf8_lossy(&output.stdout);
    let listed: Vec<&str> = stdout
        .lines()
        .filter(|line| line.ends_with(" bytes)"))
        .collect();
    // A's old `own` run and its judgement (issue 14).
    assert_eq!(listed.len(), 2, "{stdout}");
    let mut total = 0;
    for line in listed {
        // "would remove PATH (N bytes)", PATH relative to the folder clean ran in.
        let (path, bytes) = line
            .strip_prefix("would remove ")
            .and_then(|rest| rest.strip_suffix(" bytes)"))
            .and_then(|rest| rest.rsplit_once(" ("))
            .unwrap_or_else(|| panic!("{stdout}"));
        let size = std::fs::metadata(ws.path(path)).unwrap().len();
        assert_eq!(bytes, size.to_string());
        total += size;
    }
    assert!(
        stdout.contains(&format!("would remove 2 cache entries, {total} bytes")),
        "{stdout}"
    );
    assert_eq!(entry_files(&ws.path("shared")), before, "nothing removed");
}

#[test]
fn a_stray_folder_and_file_in_the_cache_are_named_and_clean_finishes() {
    let ws = Workspace::new();
    let (a, _) = two_documents_then_an_edit(&ws);
    let shard = entry_files(&ws.path("shared"))[0]
        .parent()
        .unwrap()
        .to_path_buf();
    let stray_folder = shard.join("stray");
    std::fs::create_dir(&stray_folder).unwrap();
    let stray_file = ws.write("shared/entries/notes.txt", "mine");
    let named = |path: &Path| {
        path.strip_prefix(ws.dir.path())
            .unwrap()
            .display()
            .to_string()
    };
    let before = entry_files(&ws.path("shared")).len();

    let output = clean(&ws, &[a.to_str().unwrap(), "--cache", "shared"]);
    assert!(output.status.success(), "{output:?}");
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(stderr.contains(&named(&stray_folder)), "{stderr}");
    assert!(stderr.contains(&named(&stray_file)), "{stderr}");
    assert_eq!(entry_files(&ws.path("shared")).len(), before - 2);

    let output = clean(&ws, &["--cache", "shared"]);
    assert!(output.status.success(), "{output:?}");
    assert!(stray_folder.is_dir() && stray_file.is_file());
    assert_eq!(entry_files(&ws.path("shared")), vec![stray_folder]);
}

#[test]
fn an_unreadable_build_record_stops_clean_before_anything_is_removed() {
    let ws = Workspace::new();
    let (a, _) = two_documents_then_an_edit(&ws);
    let before = entry_files(&ws.path("shared"));
    ws.write("shared/documents/0123.json", "{ not a record");

    let output = clean(&ws, &[a.to_str().unwrap(), "--cache", "shared"]);
    assert_eq!(output.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(stderr.contains("shared/documents/0123.json"), "{stderr}");
    assert!(stderr.contains("nothing was removed"), "{stderr}");
    assert_eq!(entry_files(&ws.path("shared")), before);
}
