//! Prose Markdown → HTML. Raw HTML in a document is shown as text unless the reader
//! allows it, because reports are opened by people other than the document's author.
//! Links keep only destinations that cannot run code or reach the reader's machine,
//! and images are never loaded: opening a report must not fetch anything (issue 12).
//! A local image inside the project is embedded as a `data:` URI instead (issue 16), so
//! a mailed report stays whole; any other image is shown as a link.

use std::collections::HashMap;
use std::iter::Peekable;

use pulldown_cmark::{CowStr, Event, LinkType, Parser, Tag, TagEnd, html};

use crate::document::markdown_options;

/// Images the report embeds: each destination as written in the prose, with its
/// `data:` URI. Made by the command layer, which reads the files.
pub(crate) type Embedded = HashMap<String, String>;

/// The destinations of the images in some prose that may be local files: those with no
/// scheme (a relative or absolute path).
pub(crate) fn local_image_destinations(markdown: &str) -> Vec<String> {
    Parser::new_ext(markdown, markdown_options())
        .filter_map(|event| match event {
            Event::Start(Tag::Image { dest_url, .. }) if scheme_of(&dest_url).is_none() => {
                Some(dest_url.to_string())
            }
            _ => None,
        })
        .collect()
}

/// Renders Markdown; with `allow_html` false, raw HTML blocks and inline tags are escaped.
/// Link destinations are filtered and images shown as links whatever `allow_html` says,
/// except those in `embedded`, which are shown from their `data:` URI.
pub(crate) fn render(markdown: &str, allow_html: bool, embedded: &Embedded) -> String {
    let events = Parser::new_ext(markdown, markdown_options()).map(|event| match event {
        Event::Html(raw) | Event::InlineHtml(raw) if !allow_html => Event::Text(raw),
        other => other,
    });
    let mut out = String::with_capacity(markdown.len() * 3 / 2);
    let events = events.map(|event| match event {
        Event::Start(Tag::Image {
            link_type,
            dest_url,
            title,
            id,
        }) if embedded.contains_key(dest_url.as_ref()) => Event::Start(Tag::Image {
            link_type,
            dest_url: CowStr::from(format!("{EMBEDDED_MARK}{}", embedded[dest_url.as_ref()])),
            title,
            id,
        }),
        other => other,
    });
    html::push_html(&mut out, SafeLinks::new(events));
    out
}

/// Marks an image destination replaced by its embedded `data:` URI, so `SafeLinks`
/// keeps that image (a `data:` URI written in the prose is still refused). A NUL cannot
/// come from Markdown: the parser replaces it.
const EMBEDDED_MARK: &str = "\0embedded:";

/// Schemes a report may link to. Everything else (`javascript:`, `vbscript:`, `data:`,
/// `file:`, schemes nobody has heard of) could run code or open something on the
/// reader's machine, so its link is shown as plain text.
const ALLOWED_SCHEMES: [&str; 3] = ["http", "https", "mailto"];

/// Whether a link may point at `url`: an allowed scheme, or none (a relative path or a
/// `#fragment`).
fn is_allowed_destination(url: &str) -> bool {
    // Browsers drop tabs and line breaks anywhere in a URL and controls and spaces
    // before it, so `java\tscript:` and ` javascript:` are `javascript:` to them.
    let cleaned: String = url
        .chars()
        .filter(|c| !matches!(c, '\t' | '\n' | '\r'))
        .collect();
    let cleaned = cleaned.trim_start_matches(|c: char| c <= ' ');
    match scheme_of(cleaned) {
        None => true,
        Some(scheme) => ALLOWED_SCHEMES
            .iter()
            .any(|allowed| scheme.eq_ignore_ascii_case(allowed)),
    }
}

/// The text before a `:` that comes before any `/`, `?` or `#`: a scheme, or something
/// a browser might take for one (which is then not on the allowed list).
fn scheme_of(url: &str) -> Option<&str> {
    let end = url.find([':', '/', '?', '#'])?;
    url[end..].starts_with(':').then(|| &url[..end])
}

/// Markdown events with every link to a disallowed destination unwrapped to its text,
/// and every image turned into a link to it (or its alt text alone), so no `<img>`
/// is ever written.
struct SafeLinks<'a, I: Iterator<Item = Event<'a>>> {
    events: Peekable<I>,
    /// For each open link or image, what its start became (so its end matches).
    open: Vec<Opened>,
    /// The URL to show as an image link's text when the image has no alt text.
    pending_text: Option<CowStr<'a>>,
}

/// What the start of a link or image was written as.
#[derive(Clone, Copy, PartialEq)]
enum Opened {
    Link,
    /// Left out: only its text is shown.
    Dropped,
    /// An embedded image.
    Image,
}

impl<'a, I: Iterator<Item = Event<'a>>> SafeLinks<'a, I> {
    fn new(events: I) -> Self {
        SafeLinks {
            events: events.peekable(),
            open: Vec::new(),
            pending_text: None,
        }
    }

    /// Links cannot nest in HTML: inside a kept link, an image is only its alt text.
    fn inside_kept_link(&self) -> bool {
        self.open.contains(&Opened::Link)
    }

    fn start_link(&mut self, dest_url: &str) -> bool {
        let keep = is_allowed_destination(dest_url) && !self.inside_kept_link();
        self.open
            .push(if keep { Opened::Link } else { Opened::Dropped });
        keep
    }
}

impl<'a, I: Iterator<Item = Event<'a>>> Iterator for SafeLinks<'a, I> {
    type Item = Event<'a>;

    fn next(&mut self) -> Option<Event<'a>> {
        if let Some(text) = self.pending_text.take() {
            return Some(Event::Text(text));
        }
        loop {
            let event = self.events.next()?;
            match event {
                Event::Start(Tag::Link { ref dest_url, .. }) => {
                    if self.start_link(dest_url) {
                        return Some(event);
                    }
                }
                Event::Start(Tag::Image {
                    link_type,
                    dest_url,
                    title,
                    id,
                }) if dest_url.starts_with(EMBEDDED_MARK) => {
                    self.open.push(Opened::Image);
                    return Some(Event::Start(Tag::Image {
                        link_type,
                        dest_url: CowStr::from(dest_url[EMBEDDED_MARK.len()..].to_string()),
                        title,
                        id,
                    }));
                }
                Event::Start(Tag::Image {
                    dest_url,
                    title,
                    id,
                    ..
                }) => {
                    if self.start_link(&dest_url) {
                        if matches!(self.events.peek(), Some(Event::End(TagEnd::Image))) {
                            self.pending_text = Some(dest_url.clone());
                        }
                        return Some(Event::Start(Tag::Link {
                            link_type: LinkType::Inline,
                            dest_url,
                            title,
                            id,
                        }));
                    }
                }
                Event::End(TagEnd::Link | TagEnd::Image) => match self.open.pop() {
                    Some(Opened::Link) => return Some(Event::End(TagEnd::Link)),
                    Some(Opened::Image) => return Some(Event::End(TagEnd::Image)),
                    Some(Opened::Dropped) | None => {}
                },
                other => return Some(other),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn raw_html_is_escaped_unless_allowed() {
        let markdown = "Hello <script>alert(1)</script> *world*\n";
        let safe = render(markdown, false, &Embedded::new());
        assert!(safe.contains("&lt;script&gt;"), "{safe}");
        assert!(safe.contains("<em>world</em>"));
        assert!(render(markdown, true, &Embedded::new()).contains("<script>"));
    }

    #[test]
    fn github_tables_render() {
        let html = render("| a | b |\n|---|---|\n| 1 | 2 |\n", false, &Embedded::new());
        assert!(
            html.contains("<table>") && html.contains("<td>2</td>"),
            "{html}"
        );
    }

    #[test]
    fn only_allowed_schemes_or_none_pass_however_they_are_disguised() {
        for allowed in [
            "http://example.org",
            "HTTPS://example.org",
            "mailto:a@example.org",
            "notes/more.md",
            "./a:b.md",
            "#results",
            "?page=2",
            "",
        ] {
            assert!(is_allowed_destination(allowed), "{allowed:?}");
        }
        for refused in [
            "javascript:alert(1)",
            "JaVaScRiPt:alert(1)",
            "java\tscript:alert(1)",
            "java\nscript:alert(1)",
            " \u{1}javascript:alert(1)",
            "vbscript:msgbox(1)",
            "data:text/html,x",
            "file:///etc/passwd",
            "steam://run/1",
            "java script:alert(1)",
            "%6Aavascript:alert(1)",
        ] {
            assert!(!is_allowed_destination(refused), "{refused:?}");
        }
    }

    #[test]
    fn an_image_is_a_link_to_it_never_an_img() {
        let html = render(
            "![plot](https://example.org/p.png) ![](http://x.example/q.gif)",
            false,
            &Embedded::new(),
        );
        assert!(!html.contains("<img"), "{html}");
        assert!(
            html.contains(r#"<a href="https://example.org/p.png">plot</a>"#),
            "{html}"
        );
        assert!(
            html.contains(r#"<a href="http://x.example/q.gif">http://x.example/q.gif</a>"#),
            "{html}"
        );
    }

    #[test]
    fn an_embedded_image_is_an_img_from_its_data_uri_and_others_stay_links() {
        let embedded = Embedded::from([(
            "plots/p.png".to_string(),
            "data:image/png;base64,AAAA".to_string(),
        )]);
        let html = render(
            "![a plot](plots/p.png) ![raw](data:image/png;base64,BBBB) ![away](other.png)",
            false,
            &embedded,
        );
        assert!(
            html.contains(r#"<img src="data:image/png;base64,AAAA" alt="a plot" />"#),
            "{html}"
        );
        assert!(
            !html.contains("BBBB\""),
            "a data: URI in the prose is refused: {html}"
        );
        assert!(html.contains(r#"<a href="other.png">away</a>"#), "{html}");
        assert_eq!(html.matches("<img").count(), 1);
    }
}
