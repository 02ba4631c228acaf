//! `stet watch` driven as a user would: the real binary serving a temporary project on
//! a free port, the document and its data edited underneath it, the page and the
//! health endpoint read over HTTP.

mod common;

use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpStream;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use common::Workspace;
use serde_json::Value;

/// How long a change may take to show: generous, since the machine is shared.
const PATIENCE: Duration = Duration::from_secs(20);

const DOC: &str = r#"---
title: Watched
---
# Watched

The first paragraph.

```yaml data iris
file: iris.csv
target: species
holdout: 0.2
```

```yaml net small
hidden: [6]
```

```yaml train fit
data: iris
net: small
epochs: 30
```
"#;

/// A running `stet watch` and the port it printed; killed when dropped.
struct Watching {
    child: Child,
    port: u16,
    stderr: PathBuf,
}

impl Watching {
    /// Starts `stet watch DOC` in the workspace with `extra` arguments and waits for
    /// its first build.
    fn start(ws: &Workspace, document: &str, extra: &[&str]) -> Watching {
        let stderr = ws.path("watch-stderr.txt");
        let mut child = Command::new(env!("CARGO_BIN_EXE_stet"))
            .arg("watch")
            .arg(document)
            .args(extra)
            .current_dir(ws.dir.path())
            .env_remove("STET_CACHE")
            .stdout(Stdio::piped())
            .stderr(std::fs::File::create(&stderr).unwrap())
            .spawn()
            .expect("stet watch starts");
        let mut line = String::new();
        BufReader::new(child.stdout.take().unwrap())
            .read_line(&mut line)
            .unwrap();
        let port = line
            .split("http://127.0.0.1:")
            .nth(1)
            .and_then(|rest| rest.split('/').next())
            .and_then(|port| port.parse().ok())
            .unwrap_or_else(|| {
                panic!(
                    "no address in {line:?}; stderr: {}",
                    std::fs::read_to_string(&stderr).unwrap_or_default()
                )
            });
        let watching = Watching {
            child,
            port,
            stderr,
        };
        watching.until("the first build", |w| w.health()["builds"] == 1);
        watching
    }

    /// `GET path` with `Host: 127.0.0.1:PORT`: (status, body).
    fn get(&self, path: &str) -> (u16, String) {
        self.get_as(path, &format!("127.0.0.1:{}", self.port))
    }

    fn get_as(&self, path: &str, host: &str) -> (u16, String) {
        get(self.port, path, host)
    }

    /// The served page, which must be there.
    fn page(&self) -> String {
        let (status, body) = self.get("/");
        assert_eq!(status, 200, "{body}");
        body
    }

    fn health(&self) -> Value {
        let (status, body) = self.get("/health");
        assert_eq!(status, 200, "{body}");
        serde_json::from_str(&body).unwrap()
    }

    /// Polls until `done` holds, at most [`PATIENCE`].
    fn until(&self, what: &str, done: impl Fn(&Watching) -> bool) {
        let started = Instant::now();
        while !done(self) {
            assert!(
                started.elapsed() < PATIENCE,
                "waited {PATIENCE:?} for {what}; health {}; stderr: {}",
                self.health(),
                std::fs::read_to_string(&self.stderr).unwrap_or_default()
            );
            std::thread::sleep(Duration::from_millis(100));
        }
    }

    /// Polls until a build after the `builds`-th has finished.
    fn until_build_after(&self, builds: u64) {
        self.until("a new build", |w| {
            w.health()["builds"].as_u64().unwrap() > builds && w.health()["building"] == false
        });
    }

    fn builds(&self) -> u64 {
        self.health()["builds"].as_u64().unwrap()
    }
}

impl Drop for Watching {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

/// One request over a fresh connection, read to its end: (status, body).
fn get(port: u16, path: &str, host: &str) -> (u16, String) {
    let mut stream = TcpStream::connect(("127.0.0.1", port)).unwrap();
    stream.set_read_timeout(Some(PATIENCE)).unwrap();
    write!(
        stream,
        "GET {path} HTTP/1.1\r\nHost: {host}\r\nConnection: close\r\n\r\n"
    )
    .unwrap();
    let mut answer = Vec::new();
    let _ = stream.read_to_end(&mut answer);
    let answer = String::from_utf8_lossy(&answer).into_owned();
    let status = answer
        .split(' ')
        .nth(1)
        .and_then(|code| code.parse().ok())
        .unwrap_or_else(|| panic!("no status in {answer:?}"));
    let body = answer
        .split_once("\r\n\r\n")
        .map_or(String::new(), |(_, body)| body.to_string());
    (status, body)
}

/// The page's event stream, past the response head.
fn open_events(port: u16) -> BufReader<TcpStream> {
    let mut stream = TcpStream::connect(("127.0.0.1", port)).unwrap();
    stream.set_read_timeout(Some(PATIENCE)).unwrap();
    write!(
        stream,
        "GET /events HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\n\r\n"
    )
    .unwrap();
    let mut events = BufReader::new(stream);
    let mut head = String::new();
    events.read_line(&mut head).unwrap();
    assert!(head.starts_with("HTTP/1.1 200"), "{head}");
    events
}

/// Reads the stream until a line holding `text`.
fn read_until(events: &mut BufReader<TcpStream>, text: &str) {
    let started = Instant::now();
    let mut line = String::new();
    while !line.contains(text) {
        assert!(started.elapsed() < PATIENCE, "no {text:?} in the stream");
        line.clear();
        events.read_line(&mut line).unwrap();
    }
}

/// Rewrites a file in the workspace with `from` replaced by `to`.
fn edit(path: &Path, from: &str, to: &str) {
    let text = std::fs::read_to_string(path).unwrap();
    assert!(text.contains(from), "{from:?} not in {}", path.display());
    std::fs::write(path, text.replace(from, to)).unwrap();
}

#[test]
fn editing_breaking_and_fixing_the_document_updates_the_served_page() {
    let ws = Workspace::new();
    let doc = ws.write("doc.md", DOC);
    let watching = Watching::start(&ws, "doc.md", &[]);
    assert!(watching.page().contains("The first paragraph."));

    let builds = watching.builds();
    edit(
        &doc,
        "The first paragraph.",
        "A paragraph edited while watching.",
    );
    watching.until("the prose edit", |w| {
        w.page().contains("A paragraph edited while watching.")
    });
    watching.until_build_after(builds);
    let last = &watching.health()["last_report"];
    assert_eq!(last["ran"], 0, "a prose edit ran a step: {last}");
    assert_eq!(last["reused"], 3, "{last}");
    // The report on disk is the build's own: the same text, not the page's script.
    let written = std::fs::read_to_string(ws.path("doc.html")).unwrap();
    assert!(written.contains("A paragraph edited while watching."));
    for served_only in ["EventSource", "stet-live"] {
        assert!(
            !written.contains(served_only),
            "the written report has {served_only}"
        );
        assert!(watching.page().contains(served_only));
    }

    edit(&doc, "epochs: 30", "epochz: 30");
    watching.until("the problem banner", |w| {
        w.page().contains("<pre id=\"stet-live-problem\">")
    });
    let page = watching.page();
    // The banner names the file, line and column and shows the line itself; the last
    // good report stays below it.
    assert!(page.contains("doc.md:21:1"), "{page}");
    assert!(page.contains("epochz: 30"), "{page}");
    assert!(page.contains("A paragraph edited while watching."));
    assert_eq!(watching.health()["problem"], true);

    edit(&doc, "epochz: 30", "epochs: 30");
    watching.until("the banner to clear", |w| {
        w.page()
            .contains("<pre id=\"stet-live-problem\" hidden></pre>")
    });
    assert_eq!(watching.health()["problem"], false);
}

#[test]
fn paths_other_than_the_page_its_stream_and_health_are_not_found() {
    let ws = Workspace::new();
    ws.write("doc.md", DOC);
    let watching = Watching::start(&ws, "doc.md", &[]);
    let long = format!("/{}", "a".repeat(20_000));
    for path in [
        "/../../etc/passwd",
        "/%2e%2e/%2e%2e/etc/passwd",
        "/%2E%2E%2F%2E%2E%2Fetc%2Fpasswd",
        "/..%2f..%2fetc%2fpasswd",
        "/doc.md",
        "/iris.csv",
        "/doc.html",
        "/?x=1",
        long.as_str(),
    ] {
        let (status, body) = watching.get(path);
        assert_eq!(status, 404, "{path}: {body}");
        assert!(!body.contains("root:"), "{path}: {body}");
        assert!(!body.contains("sepal"), "{path}: {body}");
    }
}

#[test]
fn a_request_for_any_host_but_the_loopback_address_and_port_is_refused() {
    let ws = Workspace::new();
    ws.write("doc.md", DOC);
    let watching = Watching::start(&ws, "doc.md", &[]);
    let port = watching.port;
    for host in [
        format!("rebound.example:{port}"),
        format!("127.0.0.1:{}", port.wrapping_add(1)),
        "127.0.0.1".to_string(),
        String::new(),
    ] {
        for path in ["/", "/health", "/events"] {
            let (status, body) = watching.get_as(path, &host);
            assert_eq!(status, 403, "Host {host:?} {path}: {body}");
        }
    }
    assert_eq!(watching.get_as("/", &format!("localhost:{port}")).0, 200);
}

#[test]
fn a_second_watch_on_a_port_in_use_is_a_clear_error() {
    let ws = Workspace::new();
    ws.write("doc.md", DOC);
    let watching = Watching::start(&ws, "doc.md", &[]);
    let port = watching.port.to_string();
    let second = common::stet(
        &[
            "watch".into(),
            "doc.md".into(),
            "--port".into(),
            port.clone(),
        ],
        ws.dir.path(),
    );
    assert_eq!(second.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&second.stderr);
    assert!(
        stderr.contains(&format!("127.0.0.1:{port}: the port is in use")),
        "{stderr}"
    );
    assert!(stderr.contains("--port"), "{stderr}");
    // The first keeps serving.
    assert!(watching.page().contains("The first paragraph."));
}

#[test]
fn a_deleted_data_file_fails_at_its_step_and_restoring_it_recovers() {
    let ws = Workspace::new();
    ws.write("doc.md", DOC);
    let data = ws.path("iris.csv");
    let bytes = std::fs::read(&data).unwrap();
    let watching = Watching::start(&ws, "doc.md", &[]);

    std::fs::remove_file(&data).unwrap();
    watching.until("the missing file's problem", |w| {
        w.health()["problem"] == true
    });
    let page = watching.page();
    // Located at the data step's `file:` line, above the last good report.
    assert!(page.contains("doc.md:9:1"), "{page}");
    assert!(page.contains("iris.csv"), "{page}");
    assert!(page.contains("id=\"step-fit\""), "{page}");

    let builds = watching.builds();
    std::fs::write(&data, bytes).unwrap();
    watching.until_build_after(builds);
    assert_eq!(watching.health()["problem"], false);
    assert_eq!(watching.health()["last_report"]["failed"], 0);
}

#[test]
fn a_deleted_or_renamed_document_is_reported_and_awaited() {
    let ws = Workspace::new();
    let doc = ws.write("doc.md", DOC);
    let watching = Watching::start(&ws, "doc.md", &[]);

    let elsewhere = ws.path("renamed.md");
    std::fs::rename(&doc, &elsewhere).unwrap();
    watching.until("the document's absence", |w| {
        w.page()
            .contains("doc.md is gone (deleted or renamed); waiting for it to come back")
    });
    std::fs::rename(&elsewhere, &doc).unwrap();
    watching.until("the banner to clear", |w| w.health()["problem"] == false);

    std::fs::remove_file(&doc).unwrap();
    watching.until("the document's absence", |w| w.health()["problem"] == true);
    ws.write(
        "doc.md",
        &DOC.replace("The first paragraph.", "Written anew."),
    );
    watching.until("the new document", |w| w.page().contains("Written anew."));
    assert_eq!(watching.health()["problem"], false);
}

#[test]
fn an_unwritable_cache_is_a_warning_and_the_report_still_updates() {
    let ws = Workspace::new();
    let doc = ws.write("doc.md", DOC);
    let watching = Watching::start(&ws, "doc.md", &[]);

    // A file where the cache folder was: nothing can be written inside it, even by root.
    std::fs::remove_dir_all(ws.path(".stet")).unwrap();
    ws.write(".stet", "not a folder");
    let builds = watching.builds();
    edit(&doc, "The first paragraph.", "Edited with no cache.");
    watching.until_build_after(builds);
    assert!(watching.page().contains("Edited with no cache."));
    let health = watching.health();
    let warnings = health["last_report"]["warnings"].as_array().unwrap();
    assert!(!warnings.is_empty(), "{health}");
    let page = watching.page();
    assert!(
        page.contains("<p id=\"stet-live-notice\">warning: "),
        "{page}"
    );
    assert_eq!(health["last_report"]["failed"], 0, "{health}");
}

#[test]
fn the_event_stream_shows_the_step_and_runs_done_while_training() {
    let ws = Workspace::new();
    let doc = ws.write("doc.md", DOC);
    let watching = Watching::start(&ws, "doc.md", &["--jobs", "1"]);
    let mut events = open_events(watching.port);
    // A data step with three folds: three runs of step 'fit' to train.
    edit(&doc, "holdout: 0.2", "folds: 3");
    let started = Instant::now();
    let mut seen = Vec::new();
    let mut line = String::new();
    while !seen.iter().any(|l: &String| l.contains("3 of 3 runs")) {
        assert!(started.elapsed() < PATIENCE, "{seen:#?}");
        line.clear();
        events.read_line(&mut line).unwrap();
        if line.starts_with("data: training:") {
            seen.push(line.trim_end().to_string());
        }
    }
    assert_eq!(
        seen,
        [
            "data: training: 0 of 3 runs",
            "data: training: step 'fit', 1 of 3 runs",
            "data: training: step 'fit', 2 of 3 runs",
            "data: training: step 'fit', 3 of 3 runs",
        ]
    );
}

#[test]
fn ctrl_c_stops_the_watch_cleanly_and_leaves_no_temporary_files() {
    let ws = Workspace::new();
    let doc = ws.write("doc.md", DOC);
    let mut watching = Watching::start(&ws, "doc.md", &["--jobs", "1"]);
    // Enough training that the signal arrives while runs train.
    edit(&doc, "epochs: 30", "epochs: 3000");
    edit(&doc, "holdout: 0.2", "folds: 5");
    watching.until("training to start", |w| w.health()["building"] == true);

    let interrupted = Command::new("kill")
        .args(["-INT", &watching.child.id().to_string()])
        .status()
        .unwrap();
    assert!(interrupted.success());
    let started = Instant::now();
    let status = loop {
        if let Some(status) = watching.child.try_wait().unwrap() {
            break status;
        }
        assert!(started.elapsed() < PATIENCE, "still running after Ctrl-C");
        std::thread::sleep(Duration::from_millis(50));
    };
    assert!(status.success(), "{status}");
    let leftovers = temporaries_under(ws.dir.path());
    assert!(leftovers.is_empty(), "{leftovers:?}");
}

/// Every file under `dir` named as stet names its temporary files.
fn temporaries_under(dir: &Path) -> Vec<PathBuf> {
    let mut found = Vec::new();
    for entry in std::fs::read_dir(dir).unwrap().flatten() {
        let path = entry.path();
        if entry.file_type().unwrap().is_dir() {
            found.extend(temporaries_under(&path));
        } else if entry
            .file_name()
            .to_string_lossy()
            .starts_with(".stet-tmp-")
        {
            found.push(path);
        }
    }
    found
}

#[test]
fn an_open_page_shows_an_edit_without_a_navigation() {
    let check = "the watch page in a browser";
    let Some(python) = common::reference_python(check) else {
        return;
    };
    if !common::browser_available(check) {
        return;
    }
    let ws = Workspace::new();
    let doc = ws.write("doc.md", DOC);
    let watching = Watching::start(&ws, "doc.md", &[]);
    let script = common::project().join("tests/browser/watch_live.py");
    let output = Command::new(python)
        .arg(script)
        .arg(format!("http://127.0.0.1:{}/", watching.port))
        .arg(&doc)
        // Several paragraphs above the step the reader is at, which must stay in place.
        .arg("The first paragraph.")
        .arg(format!(
            "Seen without reloading.{}",
            "\n\nMore prose above.".repeat(8)
        ))
        .arg("step-fit")
        .output()
        .expect("the browser script runs");
    assert!(
        output.status.success(),
        "{}{}",
        String::from_utf8_lossy(&output.stdout),
        String::from_utf8_lossy(&output.stderr)
    );
}

#[test]
fn a_change_while_training_keeps_the_started_runs_and_drops_the_rest() {
    let ws = Workspace::new();
    let doc = ws.write("doc.md", DOC);
    let watching = Watching::start(&ws, "doc.md", &["--jobs", "1"]);
    assert_eq!(cached_runs(&ws), 1);
    let mut events = open_events(watching.port);

    // Four folds of long runs, one at a time (measured: about a second each here).
    edit(&doc, "holdout: 0.2", "folds: 4");
    edit(&doc, "epochs: 30", "epochs: 20000");
    read_until(&mut events, "1 of 4 runs");
    let builds = watching.builds();
    // The stale build's second run is under way when this is seen; the new document
    // asks for four other, short runs.
    edit(&doc, "epochs: 20000", "epochs: 300");
    watching.until_build_after(builds);
    let last = &watching.health()["last_report"];
    assert_eq!(last["failed"], 0, "{last}");

    // 1 from the first build, 4 from the last, and of the stale build's 4 only those
    // started before the change.
    let runs = cached_runs(&ws);
    assert!((6..9).contains(&runs), "{runs} runs cached");
}

/// Training runs in the workspace's cache.
fn cached_runs(ws: &Workspace) -> usize {
    let entries = ws.path(".stet/entries");
    std::fs::read_dir(entries)
        .unwrap()
        .flatten()
        .flat_map(|folder| std::fs::read_dir(folder.path()).unwrap().flatten())
        .filter(|entry| entry.file_name().to_string_lossy().ends_with(".run"))
        .count()
}

#[test]
fn open_without_a_browser_serves_quietly() {
    let ws = Workspace::new();
    ws.write("doc.md", DOC);
    // No program to open a page with: an empty PATH and no $BROWSER.
    let empty = ws.path("no-programs");
    std::fs::create_dir_all(&empty).unwrap();
    let mut child = Command::new(env!("CARGO_BIN_EXE_stet"))
        .args(["watch", "doc.md", "--open"])
        .current_dir(ws.dir.path())
        .env_remove("STET_CACHE")
        .env_remove("BROWSER")
        .env("PATH", &empty)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut line = String::new();
    BufReader::new(child.stdout.take().unwrap())
        .read_line(&mut line)
        .unwrap();
    assert!(
        line.starts_with("serving doc.md at http://127.0.0.1:"),
        "{line}"
    );
    let port: u16 = line
        .split(':')
        .nth(2)
        .unwrap()
        .split('/')
        .next()
        .unwrap()
        .parse()
        .unwrap();
    let started = Instant::now();
    while get(port, "/health", &format!("127.0.0.1:{port}"))
        .1
        .contains("\"builds\":0")
    {
        assert!(started.elapsed() < PATIENCE);
        std::thread::sleep(Duration::from_millis(100));
    }
    let _ = child.kill();
    let output = child.wait_with_output().unwrap();
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert_eq!(stderr, "doc.html: 3 steps, 3 ran, 0 reused, 0 failed\n");
}
