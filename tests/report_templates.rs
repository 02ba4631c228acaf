//! `--templates DIR` replaces built-in report templates by name.

mod common;

use common::Workspace;

#[test]
fn templates_from_a_folder_replace_the_built_in_ones_by_name() {
    let ws = Workspace::new();
    ws.write("looks/style.css", "body { color: #123456; }\n");
    let doc = ws.write(
        "plain.md",
        "```yaml data d\nfile: iris.csv\ntarget: species\n```\n",
    );
    ws.build_ok(&doc, &["--templates", "looks"]);
    let html = std::fs::read_to_string(ws.path("plain.html")).unwrap();
    assert!(
        html.contains("color: #123456"),
        "the folder's style.css is used"
    );
    assert!(
        html.contains("<section class=\"step "),
        "the other templates stay built in"
    );
}
