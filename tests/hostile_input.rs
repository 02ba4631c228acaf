//! A shared document or data file must not be able to put markup into the report.

mod common;

use common::Workspace;

#[test]
fn script_in_a_class_label_a_column_name_and_a_setting_is_escaped() {
    let ws = Workspace::new();
    let mut csv = String::from("<script>alert('col')</script>,kind\n");
    for i in 0..40 {
        let label = if i % 2 == 0 {
            "<script>alert(1)</script>"
        } else {
            "plain"
        };
        csv.push_str(&format!("{}.0,{label}\n", i % 7));
    }
    ws.write("evil.csv", &csv);
    let doc = ws.write(
        "evil.md",
        "---\ntitle: <script>alert('title')</script>\n---\nProse with <script>alert('prose')</script> inline.\n\n<img src=x onerror=alert(2)>\n\n```yaml data d\nfile: evil.csv\ntarget: kind\n```\n\n```yaml net n\nhidden: [3]\n```\n\n```yaml train t\ndata: d\nnet: n\nepochs: 5\n```\n",
    );
    ws.build_ok(&doc, &[]);
    let html = std::fs::read_to_string(ws.path("evil.html")).unwrap();
    // The one script element is the carried experiment's data block, which never runs.
    let carried = "<script type=\"application/octet-stream\" id=\"stet-experiment\"";
    assert_eq!(
        (
            html.matches("<script").count(),
            html.matches(carried).count()
        ),
        (1, 1),
        "no script element gets through"
    );
    assert!(!html.contains("<img"), "raw HTML in prose is shown as text");
    assert!(
        html.contains("&lt;script&gt;alert(1)&lt;&#x2f;script&gt;")
            || html.contains("&lt;script&gt;alert(1)&lt;/script&gt;")
    );
    assert!(html.contains("&lt;img src=x onerror=alert(2)&gt;"));

    ws.build_ok(&doc, &["--allow-html"]);
    let html = std::fs::read_to_string(ws.path("evil.html")).unwrap();
    assert!(
        html.contains("<img src=x onerror=alert(2)>"),
        "--allow-html renders the author's HTML"
    );
    assert!(
        !html.contains("<script>alert(1)"),
        "data is escaped even then"
    );
}

#[test]
fn a_document_named_from_its_own_folder_is_still_confined() {
    let ws = Workspace::new();
    let outside = tempfile::tempdir().unwrap();
    let secret = outside.path().join("secret.csv");
    std::fs::write(&secret, "password,x\nhunter2,1\n").unwrap();
    ws.write(
        "doc.md",
        &format!(
            "```yaml data d\nfile: {}\ntarget: x\n```\n",
            secret.display()
        ),
    );
    let output = common::stet(&["build".into(), "doc.md".into()], ws.dir.path());
    assert_eq!(output.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&output.stderr).contains("outside this document's project"));
    assert!(!ws.path("doc.html").exists());
}
