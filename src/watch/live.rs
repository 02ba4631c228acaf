//! What the open pages show, shared by the builds that change it and the server that
//! serves it. Every change is sent at once to each page's event stream; one lock holds
//! both the state and the streams, so a page that connects sees each change once, in
//! order.

use std::sync::Mutex;
use std::sync::mpsc::Sender;

use serde::Serialize;

use super::page::{self, Overlay, Report};

/// Most event streams open at once; more are refused, so a stuck page cannot pile up
/// threads.
const MAX_STREAMS: usize = 32;

/// The pages' shared state.
pub(crate) struct Live {
    inner: Mutex<Inner>,
}

struct Inner {
    state: State,
    streams: Vec<Sender<String>>,
}

struct State {
    report: Report,
    version: u64,
    problem: String,
    notice: String,
    progress: String,
    health: Health,
}

/// What `/health` answers, for scripts and tests.
#[derive(Clone, Debug, Default, Serialize)]
pub(crate) struct Health {
    /// Builds that finished (with a report or a problem) since the watch started.
    pub(crate) builds: u64,
    pub(crate) building: bool,
    /// Whether the banner shows a problem.
    pub(crate) problem: bool,
    /// The last build that wrote a report.
    pub(crate) last_report: Option<LastReport>,
}

/// What the last written report's build did.
#[derive(Clone, Debug, Serialize)]
pub(crate) struct LastReport {
    pub(crate) steps: usize,
    pub(crate) ran: usize,
    pub(crate) reused: usize,
    pub(crate) failed: usize,
    pub(crate) warnings: Vec<String>,
}

impl Live {
    pub(crate) fn new() -> Self {
        Self {
            inner: Mutex::new(Inner {
                state: State {
                    report: Report::empty(),
                    version: 0,
                    problem: String::new(),
                    notice: String::new(),
                    progress: String::new(),
                    health: Health::default(),
                },
                streams: Vec::new(),
            }),
        }
    }

    /// The page as it stands, for a request that came with `Host: host`.
    pub(crate) fn page(&self, host: &str) -> String {
        let inner = self.lock();
        let state = &inner.state;
        let overlay = Overlay {
            problem: &state.problem,
            notice: &state.notice,
            progress: &state.progress,
        };
        page::page(&state.report, state.version, &overlay, host)
    }

    pub(crate) fn health(&self) -> Health {
        self.lock().state.health.clone()
    }

    /// A build started.
    pub(crate) fn building(&self) {
        let mut inner = self.lock();
        inner.state.health.building = true;
        inner.set_progress("building…".into());
    }

    /// The progress line's text while runs train.
    pub(crate) fn progress(&self, text: String) {
        self.lock().set_progress(text);
    }

    /// A build wrote `html`: it replaces the report and clears the banner.
    pub(crate) fn report(&self, html: &str, last: LastReport) {
        let mut inner = self.lock();
        inner.state.report = Report::new(html);
        inner.state.version += 1;
        let data = format!("{}\n{}", inner.state.version, inner.state.report.body());
        inner.send(&page::event("report", &data));
        let notice = last
            .warnings
            .iter()
            .map(|warning| format!("warning: {warning}"))
            .collect::<Vec<_>>()
            .join("\n");
        inner.set_notice(notice);
        inner.set_problem(String::new());
        inner.state.health.last_report = Some(last);
        inner.finished();
    }

    /// A build could not write a report: `problem` shows above the last good one.
    pub(crate) fn problem(&self, problem: String) {
        let mut inner = self.lock();
        inner.set_problem(problem);
        inner.finished();
    }

    /// A build was dropped for a newer one, which starts at once.
    pub(crate) fn superseded(&self) {
        self.lock()
            .set_progress("the document changed: building again…".into());
    }

    /// A new event stream: its first events bring it up to date.
    pub(crate) fn subscribe(&self, stream: Sender<String>) -> bool {
        let mut inner = self.lock();
        if inner.streams.len() >= MAX_STREAMS {
            return false;
        }
        let state = &inner.state;
        let catch_up = [
            page::event(
                "report",
                &format!("{}\n{}", state.version, state.report.body()),
            ),
            page::event("problem", &state.problem),
            page::event("notice", &state.notice),
            page::event("progress", &state.progress),
        ];
        if catch_up.into_iter().all(|event| stream.send(event).is_ok()) {
            inner.streams.push(stream);
        }
        true
    }

    fn lock(&self) -> std::sync::MutexGuard<'_, Inner> {
        // A panic while holding the lock leaves plain data behind; keep serving it.
        self.inner
            .lock()
            .unwrap_or_else(|poisoned| poisoned.into_inner())
    }
}

impl Inner {
    /// Sends `event` to every open stream, forgetting those that closed.
    fn send(&mut self, event: &str) {
        self.streams
            .retain(|stream| stream.send(event.to_string()).is_ok());
    }

    fn set_progress(&mut self, text: String) {
        self.send(&page::event("progress", &text));
        self.state.progress = text;
    }

    fn set_problem(&mut self, text: String) {
        self.send(&page::event("problem", &text));
        self.state.health.problem = !text.is_empty();
        self.state.problem = text;
    }

    fn set_notice(&mut self, text: String) {
        self.send(&page::event("notice", &text));
        self.state.notice = text;
    }

    fn finished(&mut self) {
        self.state.health.builds += 1;
        self.state.health.building = false;
        self.set_progress(String::new());
    }
}
