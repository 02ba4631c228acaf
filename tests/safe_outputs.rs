//! Nothing a build writes may destroy what it reads (issue 12, items 1–4): every
//! `write:`, `-o` and `--json` is checked when planning, a refused one is a located
//! error (exit 2) that leaves every file as it was, and every way of naming a document
//! reads and writes the same files.

mod common;

use std::path::Path;
use std::process::Output;

use common::{Workspace, stet};

/// A small document on Fisher's Iris data (tests/data) whose last step writes `write`.
fn document(kind_and_write: &str) -> String {
    format!(
        r#"# Victim

```yaml data iris
file: iris.csv
target: species
```

```yaml net small
hidden: [4]
```

```yaml train quick
data: iris
net: small
epochs: 20
```

```yaml predict rows
model: quick
file: new.csv
```

{kind_and_write}
"#
    )
}

/// An export step writing `write`.
fn export(write: &str) -> String {
    format!("```yaml export model\nmodel: quick\nwrite: {write}\n```")
}

/// A workspace with the Iris data, `new.csv` to predict and `victim.md` holding `text`.
fn victim(text: &str) -> Workspace {
    let ws = Workspace::new();
    std::fs::copy(ws.path("iris.csv"), ws.path("new.csv")).unwrap();
    ws.write("victim.md", text);
    ws
}

fn run(ws: &Workspace, args: &[&str]) -> Output {
    let args: Vec<String> = args.iter().map(|s| s.to_string()).collect();
    stet(&args, ws.dir.path())
}

fn stderr(output: &Output) -> String {
    String::from_utf8_lossy(&output.stderr).into_owned()
}

/// The line of the document holding `text`, 1-based.
fn line_of(document: &str, text: &str) -> usize {
    document
        .lines()
        .position(|line| line == text)
        .unwrap_or_else(|| panic!("no line {text:?}"))
        + 1
}

/// A build of `victim.md` that must be refused at the `write:` line, naming `other`,
/// with nothing run or written: no report, no cache, and every file in `unchanged`
/// byte for byte as before.
fn assert_refused_at_write(ws: &Workspace, write: &str, other: &str, unchanged: &[&str]) {
    let before: Vec<Option<Vec<u8>>> = unchanged
        .iter()
        .map(|f| std::fs::read(ws.path(f)).ok())
        .collect();
    let output = run(ws, &["build", "victim.md"]);
    let err = stderr(&output);
    assert_eq!(output.status.code(), Some(2), "write: {write}: {err}");
    let text = std::fs::read_to_string(ws.path("victim.md")).unwrap();
    let line = line_of(&text, &format!("write: {write}"));
    assert!(
        err.contains(&format!("victim.md:{line}:1")),
        "write: {write}: {err}"
    );
    assert!(
        err.contains(other),
        "write: {write}: expected {other:?} in {err}"
    );
    assert!(!ws.path("victim.html").exists() || unchanged.contains(&"victim.html"));
    assert!(
        !ws.path(".stet").exists(),
        "write: {write}: the build ran first"
    );
    for (file, bytes) in unchanged.iter().zip(before) {
        assert_eq!(std::fs::read(ws.path(file)).ok(), bytes, "{file} changed");
    }
}

#[test]
fn an_export_over_its_own_document_is_refused_at_its_write_line() {
    let ws = victim(&document(&export("victim.md")));
    assert_refused_at_write(&ws, "victim.md", "this document", &["victim.md"]);
}

#[test]
fn an_export_over_the_training_data_is_refused_at_its_write_line() {
    let ws = victim(&document(&export("iris.csv")));
    assert_refused_at_write(&ws, "iris.csv", "the file step 'iris' reads", &["iris.csv"]);
}

#[test]
fn a_predict_writing_over_its_own_rows_is_refused_at_its_write_line() {
    let text = document("").replace("file: new.csv\n", "file: new.csv\nwrite: ./new.csv\n");
    let ws = victim(&text);
    assert_refused_at_write(&ws, "./new.csv", "the file step 'rows' reads", &["new.csv"]);
}

#[test]
fn an_export_over_the_report_is_refused_at_its_write_line() {
    let ws = victim(&document(&export("victim.html")));
    ws.write("victim.html", "<p>the last report</p>");
    assert_refused_at_write(&ws, "victim.html", "the report", &["victim.html"]);
}

#[test]
fn two_steps_writing_one_file_are_both_refused() {
    let both = format!(
        "{}\n\n```yaml export again\nmodel: quick\nwrite: sub/../model.json\n```",
        export("model.json")
    );
    let ws = victim(&document(&both));
    assert_refused_at_write(&ws, "model.json", "the file step 'again' writes", &[]);
    let err = stderr(&run(&ws, &["build", "victim.md"]));
    assert!(err.contains("the file step 'model' writes"), "{err}");
    assert!(!ws.path("model.json").exists() && !ws.path("sub").exists());
}

#[test]
fn writes_into_version_control_the_cache_or_the_project_marker_are_refused() {
    let cases = [
        (".git/HEAD", "version-control folder .git"),
        (".hg/store/x.json", "version-control folder .hg"),
        (".svn/x.json", "version-control folder .svn"),
        (".stet/x.json", "the cache folder"),
        (".stet-project", "the project marker"),
    ];
    for (write, other) in cases {
        let ws = victim(&document(&export(write)));
        ws.write(".git/HEAD", "ref: refs/heads/main\n");
        assert_refused_at_write(&ws, write, other, &[".git/HEAD", ".stet-project"]);
        assert!(!ws.path(".hg").exists() && !ws.path(".svn").exists());
    }
}

#[test]
fn the_report_or_summary_over_the_document_or_its_data_is_refused() {
    let ws = victim(&document(&export("model.json")));
    for args in [
        &["build", "victim.md", "-o", "victim.md"][..],
        &["build", "victim.md", "-o", "./iris.csv"],
        &["build", "victim.md", "--json", "new.csv"],
        &["build", "victim.md", "--json", "victim.html"],
        &["build", "victim.md", "-o", ".stet/report.html"],
    ] {
        let before = [
            std::fs::read(ws.path("victim.md")).unwrap(),
            std::fs::read(ws.path("iris.csv")).unwrap(),
            std::fs::read(ws.path("new.csv")).unwrap(),
        ];
        let output = run(&ws, args);
        assert_eq!(
            output.status.code(),
            Some(2),
            "{args:?}: {}",
            stderr(&output)
        );
        assert!(
            stderr(&output).contains("would overwrite"),
            "{}",
            stderr(&output)
        );
        assert!(!ws.path(".stet").exists(), "{args:?} ran the build");
        assert_eq!(std::fs::read(ws.path("victim.md")).unwrap(), before[0]);
        assert_eq!(std::fs::read(ws.path("iris.csv")).unwrap(), before[1]);
        assert_eq!(std::fs::read(ws.path("new.csv")).unwrap(), before[2]);
    }
}

#[test]
fn a_missing_report_folder_is_created_only_inside_the_project() {
    let ws = victim(&document(&export("model.json")));
    let elsewhere = tempfile::tempdir().unwrap();
    let outside = elsewhere.path().join("missing/deeper/report.html");
    let output = run(
        &ws,
        &["build", "victim.md", "-o", outside.to_str().unwrap()],
    );
    assert_eq!(output.status.code(), Some(2), "{}", stderr(&output));
    assert!(stderr(&output).contains("creates folders only inside the project"));
    assert!(!elsewhere.path().join("missing").exists());
    let json = elsewhere.path().join("missing/summary.json");
    let output = run(
        &ws,
        &["build", "victim.md", "--json", json.to_str().unwrap()],
    );
    assert_eq!(output.status.code(), Some(2), "{}", stderr(&output));
    assert!(!elsewhere.path().join("missing").exists());

    let output = run(
        &ws,
        &["build", "victim.md", "-o", "reports/new/victim.html"],
    );
    assert!(output.status.success(), "{}", stderr(&output));
    assert!(ws.path("reports/new/victim.html").is_file());
}

#[test]
fn writes_that_name_no_file_are_refused_when_planning() {
    for write in ["sub/", ".", "sub", "~", "null", "\"a\\0b.json\""] {
        let ws = victim(&document(&export(write)));
        std::fs::create_dir_all(ws.path("sub")).unwrap();
        let output = run(&ws, &["build", "victim.md"]);
        let err = stderr(&output);
        assert_eq!(output.status.code(), Some(2), "write: {write}: {err}");
        let line = line_of(
            &std::fs::read_to_string(ws.path("victim.md")).unwrap(),
            &format!("write: {write}"),
        );
        assert!(
            err.contains(&format!("victim.md:{line}:1")),
            "write: {write}: {err}"
        );
        assert!(
            !ws.path(".stet").exists(),
            "write: {write}: the build ran first"
        );
        assert!(!ws.path("victim.html").exists());
        assert!(!ws.path("~").exists() && !ws.path("null").exists());
    }
}

#[test]
fn a_predict_write_of_yaml_empty_value_is_refused_not_taken_as_no_file() {
    for write in ["~", "null", "Null", ""] {
        let step =
            format!("```yaml predict again\nmodel: quick\nfile: new.csv\nwrite: {write}\n```");
        let ws = victim(&document(&step));
        let output = run(&ws, &["build", "victim.md"]);
        let err = stderr(&output);
        assert_eq!(output.status.code(), Some(2), "write: {write}: {err}");
        let line = line_of(
            &std::fs::read_to_string(ws.path("victim.md")).unwrap(),
            &format!("write: {write}"),
        );
        assert!(
            err.contains(&format!("victim.md:{line}:1")) && err.contains("write must name a file"),
            "write: {write}: {err}"
        );
        assert!(!ws.path("victim.html").exists());
    }
}

#[test]
fn a_write_that_fails_at_the_end_fails_its_step_and_the_report_is_still_written() {
    // /proc takes no new files, not even from root: the path passes every check when
    // planning and fails only when written.
    let ws = victim(&document(&export("/proc/stet-model.json")));
    let (output, summary) = ws.build(&ws.path("victim.md"), &["--allow-outside"]);
    assert_eq!(output.status.code(), Some(1), "{}", stderr(&output));
    let summary = summary.expect("a JSON summary");
    let step = common::step(&summary, "model");
    assert_eq!(step["status"], "failed");
    assert!(
        step["error"]
            .as_str()
            .unwrap()
            .contains("/proc/stet-model.json")
    );
    assert_eq!(common::step(&summary, "rows")["status"], "ran");
    let report = std::fs::read_to_string(ws.path("victim.html")).unwrap();
    assert!(report.contains("This step failed."));
}

#[test]
fn a_step_back_that_lands_inside_the_project_is_accepted() {
    let ws = victim(&document(&export("missing/../model.json")));
    let output = run(&ws, &["build", "victim.md"]);
    assert!(output.status.success(), "{}", stderr(&output));
    assert!(ws.path("model.json").is_file());
    assert!(!ws.path("missing").exists());
}

/// Every way of naming one document: (the folder to run in, the name given).
fn names_of_the_document(ws: &Workspace) -> Vec<(std::path::PathBuf, String)> {
    let experiments = ws.path("experiments");
    vec![
        (experiments.clone(), "doc.md".into()),
        (experiments.clone(), "./doc.md".into()),
        (ws.path(""), "experiments/doc.md".into()),
        (ws.path("demo-data"), "../experiments/doc.md".into()),
        (
            ws.path("demo-data"),
            experiments.join("doc.md").display().to_string(),
        ),
        (ws.path(""), "linked/doc.md".into()),
        (ws.path("linked"), "doc.md".into()),
    ]
}

#[test]
fn a_document_named_every_way_reads_and_writes_the_same_files() {
    let ws = Workspace::new();
    let text = document(&export("models/model.json"))
        .replace("file: iris.csv", "file: ../iris.csv")
        .replace("file: new.csv", "file: ../demo-data/../iris.csv")
        .replace(
            "```yaml predict rows\nmodel: quick\n",
            "```yaml predict rows\nmodel: quick\nwrite: rows.csv\n",
        );
    ws.write("experiments/doc.md", &text);
    std::os::unix::fs::symlink(ws.path("experiments"), ws.path("linked")).unwrap();
    for (dir, name) in names_of_the_document(&ws) {
        for made in ["models", "rows.csv", "doc.html"] {
            let _ = std::fs::remove_dir_all(ws.path("experiments").join(made));
            let _ = std::fs::remove_file(ws.path("experiments").join(made));
        }
        let output = stet(&["build".to_string(), name.clone()], &dir);
        assert!(
            output.status.success(),
            "{name} in {}: {}",
            dir.display(),
            stderr(&output)
        );
        for made in ["models/model.json", "rows.csv", "doc.html"] {
            assert!(
                ws.path("experiments").join(made).is_file(),
                "{name} in {}: no {made}",
                dir.display()
            );
        }
    }
}

#[test]
fn a_document_named_every_way_refuses_the_same_write() {
    let ws = Workspace::new();
    let text = document(&export("../iris.csv")).replace("file: iris.csv", "file: ../iris.csv");
    ws.write(
        "experiments/doc.md",
        &text.replace("file: new.csv", "file: ../iris.csv"),
    );
    std::os::unix::fs::symlink(ws.path("experiments"), ws.path("linked")).unwrap();
    let data = std::fs::read(ws.path("iris.csv")).unwrap();
    for (dir, name) in names_of_the_document(&ws) {
        let output = stet(&["build".to_string(), name.clone()], &dir);
        assert_eq!(output.status.code(), Some(2), "{name}: {}", stderr(&output));
        assert!(
            stderr(&output).contains("the file step 'iris' reads"),
            "{name}: {}",
            stderr(&output)
        );
        assert_eq!(std::fs::read(ws.path("iris.csv")).unwrap(), data);
    }
    assert!(!Path::new(&ws.path("experiments/doc.html")).exists());
}
