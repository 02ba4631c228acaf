//! Images in prose (issue 16): a local image inside the project is embedded as a
//! `data:` URI, so a mailed report stays whole; one outside the project or on the
//! network stays a link and is never loaded.

mod common;

use common::Workspace;

#[test]
fn a_local_image_is_embedded_and_outside_or_remote_ones_stay_links() {
    let ws = Workspace::new();
    // Three bytes whose base64 is known: "abc" → "YWJj" (RFC 4648).
    ws.write("experiments/plot.png", "abc");
    let elsewhere = tempfile::tempdir().unwrap();
    let outside = elsewhere.path().join("secret.png");
    std::fs::write(&outside, "xyz").unwrap();
    let doc = ws.write(
        "experiments/doc.md",
        &format!(
            "# Images\n\n![the plot](plot.png)\n\n![outside]({})\n\n![remote](https://example.org/r.png)\n\n\
             ```yaml data iris\nfile: ../iris.csv\ntarget: species\n```\n",
            outside.display()
        ),
    );
    ws.build_ok(&doc, &[]);
    let html = std::fs::read_to_string(doc.with_extension("html")).unwrap();
    assert!(
        html.contains(r#"<img src="data:image/png;base64,YWJj" alt="the plot" />"#),
        "{html}"
    );
    assert_eq!(html.matches("<img").count(), 1);
    assert!(html.contains(&format!(r#"<a href="{}">outside</a>"#, outside.display())));
    assert!(
        !html.contains("eHl6"),
        "the outside file's bytes are not in the report"
    );
    assert!(html.contains(r#"<a href="https://example.org/r.png">remote</a>"#));
}
