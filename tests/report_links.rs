//! Links and images in a document's prose: only destinations that cannot run code or
//! reach the reader's machine become links, and no image is ever loaded, so opening a
//! report fetches nothing.

mod common;

use std::collections::BTreeMap;

use common::Workspace;
use html5gum::{Token, Tokenizer};

/// Every kind of destination from issue 12, item 9, in every Markdown link form.
const DOC: &str = "# Links\n\
\n\
Kept: [http](http://example.org/a), [https](https://example.org/b),\n\
[mail](mailto:someone@example.org), [relative](notes/more.md), [colon](./a:b.md),\n\
[fragment](#results), [reference][good], <https://example.org/auto>,\n\
<someone@example.org>.\n\
\n\
Refused: [js](javascript:alert(1)), [mixed](JaVaScRiPt:alert(1)),\n\
[vb](vbscript:msgbox(1)), [data](data:text/html;base64,PHNjcmlwdD4=),\n\
[file](file:///etc/passwd), [unknown](steam://run/1),\n\
[entity](&#106;avascript:alert(1)), [spaced](< javascript:alert(1)>),\n\
[tabbed](<java\tscript:alert(1)>), [bad reference][bad], <javascript:alert(3)>,\n\
<vbscript:alert(3)>.\n\
\n\
Images: ![pixel](http://tracker.example/p.gif) ![](https://example.org/no-alt.png)\n\
![local plot](figures/plot.png) ![script](javascript:alert(4))\n\
[![inner](http://example.org/i.png)](https://example.org/outer)\n\
\n\
[good]: https://example.org/ref\n\
[bad]: javascript:alert(2)\n\
\n\
```yaml net small\n\
hidden: [3]\n\
```\n";

/// The hrefs the document's kept links must have, each once.
const KEPT: [&str; 13] = [
    "http://example.org/a",
    "https://example.org/b",
    "mailto:someone@example.org",
    "notes/more.md",
    "./a:b.md",
    "#results",
    "https://example.org/ref",
    "https://example.org/auto",
    "mailto:someone@example.org",
    // The images, as links.
    "http://tracker.example/p.gif",
    "https://example.org/no-alt.png",
    "figures/plot.png",
    "https://example.org/outer",
];

/// Every start tag of the report with its attributes.
fn start_tags(html: &str) -> Vec<(String, BTreeMap<String, String>)> {
    Tokenizer::new(html)
        .filter_map(|token| match token {
            Ok(Token::StartTag(tag)) => Some((
                String::from_utf8_lossy(&tag.name).into_owned(),
                tag.attributes
                    .iter()
                    .map(|(name, value)| {
                        (
                            String::from_utf8_lossy(name).into_owned(),
                            String::from_utf8_lossy(value).into_owned(),
                        )
                    })
                    .collect(),
            )),
            _ => None,
        })
        .collect()
}

fn report_of(ws: &Workspace, extra: &[&str]) -> String {
    let doc = ws.write("links.md", DOC);
    ws.build_ok(&doc, extra);
    std::fs::read_to_string(ws.path("links.html")).unwrap()
}

fn check_links(html: &str) {
    let tags = start_tags(html);
    let images: Vec<_> = tags.iter().filter(|(name, _)| name == "img").collect();
    assert!(images.is_empty(), "{images:?}");
    let sources: Vec<_> = tags.iter().filter_map(|(_, a)| a.get("src")).collect();
    assert!(sources.is_empty(), "{sources:?}");
    let mut hrefs: Vec<&str> = tags
        .iter()
        .filter(|(name, _)| name == "a")
        .filter_map(|(_, attributes)| attributes.get("href").map(String::as_str))
        .collect();
    hrefs.sort();
    let mut kept = KEPT.to_vec();
    kept.sort();
    assert_eq!(hrefs, kept);
    // A refused link still shows its text, as plain text.
    let plain = text_outside_links(html);
    for text in [
        "js,",
        "mixed,",
        "vb,",
        "data,",
        "file,",
        "unknown,",
        "entity,",
        "spaced,",
        "tabbed,",
        "bad reference,",
        "javascript:alert(3)",
        "vbscript:alert(3)",
        " script\n",
    ] {
        assert!(plain.contains(text), "{text:?} in {plain}");
    }
}

/// The report's text that is not inside a link.
fn text_outside_links(html: &str) -> String {
    let mut depth = 0usize;
    let mut text = String::new();
    for token in Tokenizer::new(html).flatten() {
        match token {
            Token::StartTag(tag) if &*tag.name == b"a" => depth += 1,
            Token::EndTag(tag) if &*tag.name == b"a" => depth = depth.saturating_sub(1),
            Token::String(piece) if depth == 0 => text.push_str(&String::from_utf8_lossy(&piece)),
            _ => {}
        }
    }
    text
}

#[test]
fn only_http_https_mailto_relative_and_fragment_links_survive_and_no_image_loads() {
    let ws = Workspace::new();
    check_links(&report_of(&ws, &[]));
}

#[test]
fn allowing_html_does_not_let_markdown_links_or_images_through() {
    let ws = Workspace::new();
    check_links(&report_of(&ws, &["--allow-html"]));
}

#[test]
fn the_report_forbids_every_network_load_in_its_content_security_policy() {
    let ws = Workspace::new();
    let html = report_of(&ws, &[]);
    let policy = start_tags(&html)
        .into_iter()
        .find(|(name, attributes)| {
            name == "meta"
                && attributes
                    .get("http-equiv")
                    .is_some_and(|v| v.eq_ignore_ascii_case("content-security-policy"))
        })
        .and_then(|(_, attributes)| attributes.get("content").cloned())
        .expect("a Content-Security-Policy meta tag");
    let directives: Vec<&str> = policy.split(';').map(str::trim).collect();
    for directive in [
        "default-src 'none'",
        "img-src data:",
        "style-src 'unsafe-inline'",
    ] {
        assert!(directives.contains(&directive), "{policy}");
    }
}
