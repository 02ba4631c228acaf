//! Issue 18, "The report carries its experiment": a report carries its document, the
//! hash of every file its steps read and (under `--embed-data-mb`) the files; `stet
//! unpack` writes them back out, refusing every path that would land outside its folder,
//! and an unpacked document rebuilds to the same numbers bit for bit.

mod common;

use std::path::Path;

use base64::Engine;
use base64::engine::general_purpose::STANDARD as BASE64;
use common::{Workspace, stet};
use serde_json::Value;

/// A sweep over a train step whose data step splits the rows into folds (Fisher's Iris
/// data, `tests/data/iris.csv`).
const FOLDED_SWEEP: &str = "# Folds and a sweep\n\
\n\
```yaml data flowers\n\
file: iris.csv\n\
target: species\n\
folds: 3\n\
```\n\
\n\
```yaml net small\n\
hidden: [4]\n\
```\n\
\n\
```yaml train base\n\
data: flowers\n\
net: small\n\
epochs: 40\n\
```\n\
\n\
```yaml sweep rates\n\
from: base\n\
vary:\n  learning_rate: [0.01, 0.05]\n\
```\n";

/// Runs `stet ARGS` in the workspace.
fn run(ws: &Workspace, args: &[&str]) -> std::process::Output {
    let args: Vec<String> = args.iter().map(|arg| arg.to_string()).collect();
    stet(&args, ws.dir.path())
}

fn stderr(output: &std::process::Output) -> String {
    String::from_utf8_lossy(&output.stderr).into_owned()
}

/// The summary without what differs between two builds of the same experiment: the
/// document's path as given, the time taken, and whether a result was cached.
fn numbers(summary: &Value) -> Value {
    match summary {
        Value::Object(map) => Value::Object(
            map.iter()
                .filter(|(key, _)| !["document", "seconds", "status"].contains(&key.as_str()))
                .map(|(key, value)| (key.clone(), numbers(value)))
                .collect(),
        ),
        Value::Array(items) => Value::Array(items.iter().map(numbers).collect()),
        other => other.clone(),
    }
}

/// Builds `document`, unpacks its report into `unpacked/`, builds the unpacked copy (in
/// a cache of its own, beside it) and checks every number is the same.
fn rebuilds_to_the_same_numbers(ws: &Workspace, document: &Path) {
    let original = ws.build_ok(document, &[]);
    let report = document.with_extension("html");
    let unpack = run(ws, &["unpack", report.to_str().unwrap(), "unpacked"]);
    assert!(unpack.status.success(), "{}", stderr(&unpack));
    let relative = document.strip_prefix(ws.dir.path()).unwrap();
    let copy = ws.path("unpacked").join(relative);
    assert_eq!(
        std::fs::read(&copy).unwrap(),
        std::fs::read(document).unwrap()
    );
    let rebuilt = ws.build_ok(&copy, &[]);
    assert_eq!(rebuilt["steps"][0]["status"], "ran", "a cold cache");
    assert_eq!(numbers(&rebuilt), numbers(&original));
}

#[test]
fn the_unpacked_hives_demo_rebuilds_to_the_same_numbers() {
    let ws = Workspace::new();
    rebuilds_to_the_same_numbers(&ws, &ws.demo("hives.md"));
}

#[test]
fn the_unpacked_greenhouse_demo_rebuilds_to_the_same_numbers() {
    let ws = Workspace::new();
    rebuilds_to_the_same_numbers(&ws, &ws.demo("greenhouse.md"));
}

#[test]
fn an_unpacked_document_with_folds_and_a_sweep_rebuilds_to_the_same_numbers() {
    let ws = Workspace::new();
    rebuilds_to_the_same_numbers(&ws, &ws.write("folded.md", FOLDED_SWEEP));
}

#[test]
fn the_default_folder_is_named_after_the_report_and_the_footer_says_how_to_unpack() {
    let ws = Workspace::new();
    let document = ws.demo("hives.md");
    ws.build_ok(&document, &[]);
    let html = std::fs::read_to_string(ws.path("experiments/hives.html")).unwrap();
    assert!(
        html.contains("<code>stet unpack hives.html</code>"),
        "the footer names the command"
    );
    let output = run(&ws, &["unpack", "experiments/hives.html"]);
    assert!(output.status.success(), "{}", stderr(&output));
    let out = String::from_utf8_lossy(&output.stdout);
    assert!(out.contains("wrote hives/experiments/hives.md"), "{out}");
    assert!(out.contains("wrote hives/demo-data/hives.csv"), "{out}");
    assert_eq!(
        std::fs::read(ws.path("hives/demo-data/hives-new.csv")).unwrap(),
        std::fs::read(ws.path("demo-data/hives-new.csv")).unwrap()
    );
}

#[test]
fn the_report_stays_valid_html_under_its_content_security_policy() {
    let ws = Workspace::new();
    let document = ws.demo("hives.md");
    ws.build_ok(&document, &[]);
    let html = std::fs::read_to_string(ws.path("experiments/hives.html")).unwrap();
    let mut scripts = Vec::new();
    for token in html5gum::Tokenizer::new(html.as_str()) {
        match token.unwrap() {
            html5gum::Token::Error(error) => panic!("invalid HTML: {error:?}"),
            html5gum::Token::StartTag(tag) if &tag.name[..] == b"script" => {
                scripts.push(tag.attributes)
            }
            _ => {}
        }
    }
    assert_eq!(scripts.len(), 1, "one block, the carried experiment");
    let kind = scripts[0].get(&b"type"[..]).map(|value| value.to_vec());
    assert_eq!(kind.as_deref(), Some(&b"application/octet-stream"[..]));
    // The policy as templates/report.html sets it: no script may run.
    assert!(html.contains(
        "content=\"default-src 'none'; style-src 'unsafe-inline'; img-src data:; \
         base-uri 'none'; form-action 'none'\""
    ));
}

#[test]
fn an_existing_file_is_replaced_only_with_force() {
    let ws = Workspace::new();
    let document = ws.demo("hives.md");
    ws.build_ok(&document, &[]);
    ws.write("out/experiments/hives.md", "mine");
    let refused = run(&ws, &["unpack", "experiments/hives.html", "out"]);
    assert_eq!(refused.status.code(), Some(2));
    assert!(stderr(&refused).contains("already exists; pass --force"));
    assert_eq!(
        std::fs::read_to_string(ws.path("out/experiments/hives.md")).unwrap(),
        "mine"
    );
    assert!(!ws.path("out/demo-data").exists(), "nothing written");
    let forced = run(&ws, &["unpack", "experiments/hives.html", "out", "--force"]);
    assert!(forced.status.success(), "{}", stderr(&forced));
    assert_eq!(
        std::fs::read(ws.path("out/experiments/hives.md")).unwrap(),
        std::fs::read(&document).unwrap()
    );
}

/// The carried block of a report: (HTML before it, manifest, bytes after the manifest
/// line, HTML after it).
fn open_block(html: &str) -> (String, Value, Vec<u8>, String) {
    let opening = "<script type=\"application/octet-stream\" id=\"stet-experiment\"";
    let start = html.rfind(opening).unwrap();
    let body = start + html[start..].find('>').unwrap() + 1;
    let end = body + html[body..].find("</script>").unwrap();
    let deflated = BASE64.decode(&html[body..end]).unwrap();
    let payload = miniz_oxide::inflate::decompress_to_vec(&deflated).unwrap();
    let line = payload.iter().position(|&b| b == b'\n').unwrap();
    let manifest = serde_json::from_slice(&payload[..line]).unwrap();
    (
        html[..start].to_string(),
        manifest,
        payload[line + 1..].to_vec(),
        html[end + "</script>".len()..].to_string(),
    )
}

/// A report whose manifest was rewritten by `edit`, with a block and checksum that are
/// otherwise in order: what someone crafting a hostile report would send.
fn forged_report(ws: &Workspace, edit: impl FnOnce(&mut Value)) -> String {
    let document = ws.demo("hives.md");
    ws.build_ok(&document, &[]);
    let html = std::fs::read_to_string(ws.path("experiments/hives.html")).unwrap();
    let (before, mut manifest, rest, after) = open_block(&html);
    edit(&mut manifest);
    let mut payload = serde_json::to_vec(&manifest).unwrap();
    payload.push(b'\n');
    payload.extend(rest);
    let deflated = miniz_oxide::deflate::compress_to_vec(&payload, 6);
    let block = format!(
        "<script type=\"application/octet-stream\" id=\"stet-experiment\" data-bytes=\"{}\" \
         data-blake3=\"{}\">{}</script>",
        payload.len(),
        blake3::hash(&deflated).to_hex(),
        BASE64.encode(&deflated)
    );
    let path = ws.write("forged.html", &format!("{before}{block}{after}"));
    path.display().to_string()
}

/// Unpacks `report` into `out/` and checks it was refused and wrote nothing.
fn refused_writing_nothing(ws: &Workspace, report: &str, expected: &str) {
    let output = run(ws, &["unpack", report, "out"]);
    assert_eq!(output.status.code(), Some(2), "{}", stderr(&output));
    assert!(stderr(&output).contains(expected), "{}", stderr(&output));
    assert!(!ws.path("out").exists(), "nothing may be written");
}

#[test]
fn a_path_that_climbs_out_with_dot_dot_is_refused() {
    let ws = Workspace::new();
    let report = forged_report(&ws, |manifest| {
        manifest["files"][0]["path"] = "../../escaped.csv".into();
    });
    refused_writing_nothing(&ws, &report, "climbs out with '..'");
    assert!(!ws.path("escaped.csv").exists());
}

#[test]
fn an_absolute_path_is_refused() {
    let ws = Workspace::new();
    let target = ws.path("absolute.md");
    let report = forged_report(&ws, |manifest| {
        manifest["document"]["path"] = target.display().to_string().into();
    });
    refused_writing_nothing(&ws, &report, "it is an absolute path");
    assert!(!target.exists());
}

#[test]
fn a_symbolic_link_inside_the_folder_is_refused() {
    let ws = Workspace::new();
    let document = ws.demo("hives.md");
    ws.build_ok(&document, &[]);
    std::fs::create_dir_all(ws.path("out")).unwrap();
    std::fs::create_dir_all(ws.path("elsewhere")).unwrap();
    std::os::unix::fs::symlink(ws.path("elsewhere"), ws.path("out/demo-data")).unwrap();
    let output = run(&ws, &["unpack", "experiments/hives.html", "out"]);
    assert_eq!(output.status.code(), Some(2));
    assert!(
        stderr(&output).contains("is a symbolic link"),
        "{}",
        stderr(&output)
    );
    assert_eq!(std::fs::read_dir(ws.path("elsewhere")).unwrap().count(), 0);
    assert!(!ws.path("out/experiments").exists(), "nothing written");
}

#[test]
fn html_that_is_not_a_report_is_refused_even_at_several_megabytes() {
    let ws = Workspace::new();
    // Several MB of junk markup, with a decoy script and a near-miss of the block's tag.
    let junk = "<div><script>var x = 1;</script><p>junk &amp; more</p>\
                <script type=\"application/octet-stream\" id=\"other\">QUJD</script></div>\n"
        .repeat(40_000);
    let html = format!("<!DOCTYPE html><html><body>{junk}</body></html>");
    assert!(html.len() > 4_000_000);
    ws.write("junk.html", &html);
    refused_writing_nothing(&ws, "junk.html", "not a stet report");
}

#[test]
fn a_truncated_report_is_refused() {
    let ws = Workspace::new();
    let document = ws.demo("hives.md");
    ws.build_ok(&document, &[]);
    let html = std::fs::read_to_string(ws.path("experiments/hives.html")).unwrap();
    let cut = html.rfind("</script>").unwrap() - 500;
    ws.write("cut.html", &html[..cut]);
    refused_writing_nothing(&ws, "cut.html", "damaged");
}

#[test]
fn an_edited_block_fails_its_checksum() {
    let ws = Workspace::new();
    let document = ws.demo("hives.md");
    ws.build_ok(&document, &[]);
    let html = std::fs::read_to_string(ws.path("experiments/hives.html")).unwrap();
    let at = html.rfind("</script>").unwrap() - 40;
    let replacement = if &html[at..=at] == "A" { "B" } else { "A" };
    let edited = format!("{}{replacement}{}", &html[..at], &html[at + 1..]);
    ws.write("edited.html", &edited);
    refused_writing_nothing(&ws, "edited.html", "checksum does not match");
}

#[test]
fn without_embedded_data_the_supplied_file_is_checked_against_the_recorded_hash() {
    let ws = Workspace::new();
    let document = ws.write("folded.md", FOLDED_SWEEP);
    let original = ws.build_ok(&document, &["--no-embed-data"]);
    let unpack = run(&ws, &["unpack", "folded.html", "out"]);
    assert!(unpack.status.success(), "{}", stderr(&unpack));
    let out = String::from_utf8_lossy(&unpack.stdout);
    let hash = blake3::hash(&std::fs::read(ws.path("iris.csv")).unwrap()).to_hex();
    assert!(
        out.contains(&format!("not included: out/iris.csv (BLAKE3 {hash})")),
        "{out}"
    );
    assert!(!ws.path("out/iris.csv").exists());

    // Another file at its place: refused at the data step's `file:` line (line 4).
    let iris = std::fs::read_to_string(ws.path("iris.csv")).unwrap();
    let altered = iris.replacen("5.1", "5.2", 1);
    ws.write("out/iris.csv", &altered);
    let (refused, _) = ws.build(&ws.path("out/folded.md"), &[]);
    assert_eq!(refused.status.code(), Some(2));
    let message = stderr(&refused);
    assert!(message.contains("folded.md:4:1"), "{message}");
    assert!(
        message.contains("'iris.csv' is not the file the report was built from"),
        "{message}"
    );

    // The original file: the same numbers.
    ws.write("out/iris.csv", &iris);
    let rebuilt = ws.build_ok(&ws.path("out/folded.md"), &[]);
    assert_eq!(numbers(&rebuilt), numbers(&original));
}

#[test]
fn files_over_the_embedding_limit_are_left_out_and_listed() {
    let ws = Workspace::new();
    let document = ws.demo("hives.md");
    ws.build_ok(&document, &["--embed-data-mb", "0"]);
    let html = std::fs::read_to_string(ws.path("experiments/hives.html")).unwrap();
    assert!(html.contains("3 not included"), "the footer says so");
    let output = run(&ws, &["unpack", "experiments/hives.html", "out"]);
    assert!(output.status.success(), "{}", stderr(&output));
    let out = String::from_utf8_lossy(&output.stdout);
    assert!(
        out.contains("not included: out/demo-data/hives.csv"),
        "{out}"
    );
    assert!(out.contains("--embed-data-mb 0"), "{out}");
    assert!(!ws.path("out/demo-data").exists());
}

// Every build renders the report, a no-op rebuild too: a file more than eight times the
// limit is left out without being read, however well it would compress (this one
// compresses about a thousand to one), so a large data file costs no build its size in
// memory or seconds of compression.
#[test]
fn a_file_over_eight_times_the_limit_is_left_out_unread() {
    let ws = Workspace::new();
    ws.write("big.csv", &format!("x,y\n{}", "1,2\n".repeat(2_400_000)));
    let document = ws.write(
        "big.md",
        "```yaml data rows\nfile: big.csv\ntarget: y\n```\n",
    );
    ws.build_ok(&document, &["--embed-data-mb", "1"]);
    let output = run(&ws, &["unpack", "big.html", "out"]);
    assert!(output.status.success(), "{}", stderr(&output));
    let out = String::from_utf8_lossy(&output.stdout);
    assert!(out.contains("not included: out/big.csv"), "{out}");
    assert!(
        out.contains("the files total 9.2 MiB, more than 8 times --embed-data-mb 1"),
        "{out}"
    );
}
