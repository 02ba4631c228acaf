//! Prose Markdown → HTML. Raw HTML in a document is shown as text unless the reader
//! allows it, because reports are opened by people other than the document's author.

use pulldown_cmark::{Event, Parser, html};

use crate::document::markdown_options;

/// Renders Markdown; with `allow_html` false, raw HTML blocks and inline tags are escaped.
pub fn render(markdown: &str, allow_html: bool) -> String {
    let events = Parser::new_ext(markdown, markdown_options()).map(|event| match event {
        Event::Html(raw) | Event::InlineHtml(raw) if !allow_html => Event::Text(raw),
        other => other,
    });
    let mut out = String::with_capacity(markdown.len() * 3 / 2);
    html::push_html(&mut out, events);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn raw_html_is_escaped_unless_allowed() {
        let markdown = "Hello <script>alert(1)</script> *world*\n";
        let safe = render(markdown, false);
        assert!(safe.contains("&lt;script&gt;"), "{safe}");
        assert!(safe.contains("<em>world</em>"));
        assert!(render(markdown, true).contains("<script>"));
    }

    #[test]
    fn github_tables_render() {
        let html = render("| a | b |\n|---|---|\n| 1 | 2 |\n", false);
        assert!(
            html.contains("<table>") && html.contains("<td>2</td>"),
            "{html}"
        );
    }
}
