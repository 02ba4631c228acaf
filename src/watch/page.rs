//! The page `stet watch` serves: the last good report with a problem banner, a notice
//! for warnings and a progress line above it, and the small script that keeps it up to
//! date. The script and its policy exist only here; the report written to disk is the
//! build's own, untouched.

use base64::Engine;
use sha2::{Digest, Sha256};

use crate::report::format::escaped;

/// The served page's only script.
pub(crate) const SCRIPT: &str = include_str!("../../templates/watch.js");

/// Ids the script looks up; the report's own ids start with `step-`.
const LIVE_STYLE: &str = "<style>\
#stet-live-progress{position:sticky;top:0;z-index:2;margin:0;padding:.2em .6em;\
font:12px/1.4 system-ui,sans-serif;background:#e8eef8;border-bottom:2px solid #3b6cc4}\
#stet-live-problem{margin:0;padding:.8em;white-space:pre-wrap;overflow-x:auto;\
background:#fdecea;border-bottom:2px solid #b3261e;color:#3c0d0a;font:13px/1.4 monospace}\
#stet-live-notice{margin:0;padding:.4em .8em;white-space:pre-wrap;background:#fff6dc;\
border-bottom:1px solid #c79a00;font:12px/1.4 system-ui,sans-serif}\
</style>";

/// A report split around its body, so the body alone can be sent to open pages.
#[derive(Clone, Debug)]
pub(crate) struct Report {
    /// Up to and including the `<body>` tag.
    head: String,
    body: String,
    /// From `</body>` on.
    tail: String,
}

impl Report {
    /// Splits a rendered report; a report without a body tag is all body.
    pub(crate) fn new(html: &str) -> Self {
        let opened = html
            .find("<body")
            .and_then(|at| html[at..].find('>').map(|end| at + end + 1));
        let closed = html.rfind("</body>");
        match (opened, closed) {
            (Some(open), Some(close)) if open <= close => Self {
                head: html[..open].to_string(),
                body: html[open..close].to_string(),
                tail: html[close..].to_string(),
            },
            _ => Self {
                head:
                    "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"></head><body>"
                        .into(),
                body: html.to_string(),
                tail: "</body></html>".into(),
            },
        }
    }

    /// What a page shows before the first build has written a report.
    pub(crate) fn empty() -> Self {
        Self::new(
            "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">\
             <title>stet watch</title></head><body></body></html>",
        )
    }

    pub(crate) fn body(&self) -> &str {
        &self.body
    }
}

/// What the page shows besides the report.
#[derive(Clone, Debug, Default)]
pub(crate) struct Overlay<'a> {
    pub(crate) problem: &'a str,
    pub(crate) notice: &'a str,
    pub(crate) progress: &'a str,
}

/// The policy of the served page: the report's own (nothing but inline styles and
/// `data:` images) plus exactly the script below and the event stream at `host`.
pub(crate) fn policy(host: &str) -> String {
    let digest = Sha256::digest(SCRIPT.as_bytes());
    let hash = base64::engine::general_purpose::STANDARD.encode(digest);
    format!(
        "default-src 'none'; style-src 'unsafe-inline'; img-src data:; \
         script-src 'sha256-{hash}'; connect-src http://{host}/events; \
         base-uri 'none'; form-action 'none'"
    )
}

/// The whole served page for a request that came with `Host: host`.
pub(crate) fn page(report: &Report, version: u64, overlay: &Overlay<'_>, host: &str) -> String {
    let head = with_policy(&report.head, &policy(host));
    let head = match head.find("</head>") {
        Some(at) => format!("{}{LIVE_STYLE}{}", &head[..at], &head[at..]),
        None => head,
    };
    format!(
        "{head}\n{progress}{problem}{notice}<div id=\"stet-live-report\" data-version=\"{version}\">{body}</div>\n\
         <script>{SCRIPT}</script>\n{tail}",
        progress = live_element("p", "stet-live-progress", overlay.progress),
        problem = live_element("pre", "stet-live-problem", overlay.problem),
        notice = live_element("p", "stet-live-notice", overlay.notice),
        body = report.body,
        tail = report.tail,
    )
}

/// `head` with its Content-Security-Policy meta tag replaced by one carrying `policy`
/// (browsers apply every policy a page has, so the report's own must go).
fn with_policy(head: &str, policy: &str) -> String {
    let ours = format!("<meta http-equiv=\"Content-Security-Policy\" content=\"{policy}\">");
    let mut head = head.to_string();
    let marker = "<meta http-equiv=\"Content-Security-Policy\"";
    while let Some(start) = head.find(marker) {
        let end = head[start..]
            .find('>')
            .map_or(head.len(), |end| start + end + 1);
        head.replace_range(start..end, "");
    }
    match head.find("<head>") {
        Some(at) => head.insert_str(at + "<head>".len(), &ours),
        None => head.insert_str(0, &ours),
    }
    head
}

fn live_element(tag: &str, id: &str, text: &str) -> String {
    let hidden = if text.is_empty() { " hidden" } else { "" };
    format!("<{tag} id=\"{id}\"{hidden}>{}</{tag}>", escaped(text))
}

/// One server-sent event; every line of `data` gets its own `data:` field, and carriage
/// returns (which the format also reads as line ends) are dropped.
pub(crate) fn event(name: &str, data: &str) -> String {
    let mut out = format!("event: {name}\n");
    for line in data.split('\n') {
        out.push_str("data: ");
        out.push_str(&line.replace('\r', ""));
        out.push('\n');
    }
    out.push('\n');
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    const REPORT: &str = "<!DOCTYPE html>\n<html><head>\n<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'\">\n<title>t</title>\n</head>\n<body>\n<main>hello</main>\n</body>\n</html>\n";

    #[test]
    fn the_served_page_carries_one_policy_allowing_its_script_and_the_event_stream() {
        let page = page(
            &Report::new(REPORT),
            3,
            &Overlay::default(),
            "127.0.0.1:4000",
        );
        assert_eq!(page.matches("Content-Security-Policy").count(), 1, "{page}");
        assert!(page.contains("connect-src http://127.0.0.1:4000/events;"));
        assert!(page.contains("script-src 'sha256-"));
        assert!(page.contains(&format!("<script>{SCRIPT}</script>")));
        assert!(page.contains("data-version=\"3\">\n<main>hello</main>\n</div>"));
    }

    #[test]
    fn a_problem_in_the_banner_is_shown_as_text() {
        let overlay = Overlay {
            problem: "doc.md:3:1 <script>",
            ..Overlay::default()
        };
        let page = page(&Report::new(REPORT), 1, &overlay, "h");
        assert!(page.contains("<pre id=\"stet-live-problem\">doc.md:3:1 &lt;script&gt;</pre>"));
        assert!(page.contains("<p id=\"stet-live-progress\" hidden></p>"));
    }

    #[test]
    fn an_event_gives_each_line_its_own_data_field() {
        assert_eq!(
            event("report", "7\r\n<p>\n</p>"),
            "event: report\ndata: 7\ndata: <p>\ndata: </p>\n\n"
        );
        assert_eq!(event("problem", ""), "event: problem\ndata: \n\n");
    }
}
