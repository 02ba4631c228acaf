//! `stet watch`: builds the document, serves the report on 127.0.0.1 and builds again
//! whenever the document or a file its steps read changes, through the same
//! [`crate::build_observed`] as `stet build`, so only changed steps run and the same
//! report file is written. Open pages follow each build through an event stream
//! (`live`, `page`, `server`).
//!
//! One thread decides (`Watcher::run`): it hears file changes, finished builds and
//! Ctrl-C on one channel and runs at most one build at a time on another thread. A
//! change during a build stops that build's training: runs already started finish and
//! are cached, the rest are dropped, and the new build starts as soon as it returns.

mod live;
mod page;
mod server;

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::mpsc::{self, Receiver, Sender};
use std::sync::{Arc, Mutex};
use std::time::Duration;

use notify_debouncer_full::notify::event::{AccessKind, AccessMode, EventKind};
use notify_debouncer_full::notify::{RecommendedWatcher, RecursiveMode};
use notify_debouncer_full::{DebounceEventResult, Debouncer, RecommendedCache, new_debouncer};

use crate::build::Progress;
use crate::{BuildOptions, Error, Observed, build_observed, console};
use live::{LastReport, Live};

/// Changes closer together than this are one change: an editor's save by writing a
/// temporary file and renaming it over the document touches the folder several times.
const DEBOUNCE: Duration = Duration::from_millis(200);

/// What `stet watch` was asked to do.
pub struct WatchOptions {
    /// The build each change runs; its report is the one written and served.
    pub build: BuildOptions,
    /// 0: any free port.
    pub port: u16,
    /// Open the page in the system browser.
    pub open: bool,
}

/// What the deciding thread hears.
enum Signal {
    /// Files changed (absolute paths, any file in a watched folder, possibly none
    /// of ours); no paths when the watcher failed and could not say which.
    Changed(Vec<PathBuf>),
    /// The build thread finished.
    Built(Result<Observed, Error>),
    /// Ctrl-C.
    Stop,
}

/// Why `stet watch` could not start, or why a build had nothing to build.
#[derive(Debug, thiserror::Error)]
pub enum WatchError {
    #[error(
        "cannot serve on 127.0.0.1:{port}: the port is in use (choose another with --port, or leave it out for a free one)"
    )]
    PortInUse { port: u16 },
    #[error("cannot serve on 127.0.0.1:{port}: {source}")]
    Bind { port: u16, source: std::io::Error },
    #[error("cannot catch Ctrl-C: {0}")]
    Interrupts(#[from] ctrlc::Error),
    #[error("cannot watch files: {0}")]
    Files(#[from] notify_debouncer_full::notify::Error),
    #[error("{} is gone (deleted or renamed); waiting for it to come back", .0.display())]
    DocumentGone(PathBuf),
}

/// `stet watch`: serves until Ctrl-C. A port in use or a watcher that cannot start is
/// an error before anything is built.
pub fn watch(options: WatchOptions) -> Result<(), Error> {
    let server = server::bind(options.port).map_err(|source| match source.kind() {
        std::io::ErrorKind::AddrInUse => WatchError::PortInUse { port: options.port },
        _ => WatchError::Bind {
            port: options.port,
            source,
        },
    })?;
    let url = format!("http://127.0.0.1:{}/", server.port);
    let (signals, heard) = mpsc::channel();
    let stop = signals.clone();
    ctrlc::set_handler(move || {
        let _ = stop.send(Signal::Stop);
    })
    .map_err(WatchError::from)?;
    let debouncer = file_changes(signals.clone())?;
    let live = Arc::new(Live::new());
    let serving = live.clone();
    std::thread::spawn(move || server.serve(serving));
    println!(
        "serving {} at {url} (Ctrl-C stops)",
        options.build.document.display()
    );
    if options.open {
        // Quiet when there is no browser: the address is printed above.
        std::thread::spawn(move || {
            let _ = webbrowser::open(&url);
        });
    }
    let watcher = Watcher {
        options: options.build,
        live,
        signals,
        debouncer,
        watched_dirs: BTreeSet::new(),
        watched_files: BTreeSet::new(),
    };
    watcher.run(&heard);
    Ok(())
}

/// A file watcher that sends each settled change to `signals`.
fn file_changes(
    signals: Sender<Signal>,
) -> Result<Debouncer<RecommendedWatcher, RecommendedCache>, WatchError> {
    let debouncer = new_debouncer(DEBOUNCE, None, move |result: DebounceEventResult| {
        let paths: Vec<PathBuf> = match result {
            Ok(events) => events
                .into_iter()
                .filter(|event| changes_contents(&event.kind))
                .flat_map(|event| event.event.paths)
                .collect(),
            // A watcher error (a folder went away, say) is heard as a change of
            // unknown files, so the next build finds out what is there.
            Err(_) => {
                let _ = signals.send(Signal::Changed(Vec::new()));
                return;
            }
        };
        if !paths.is_empty() {
            let _ = signals.send(Signal::Changed(paths));
        }
    })?;
    Ok(debouncer)
}

/// Whether an event may have changed a file: opening and reading one (as every build
/// does) does not, and must not start another build.
fn changes_contents(kind: &EventKind) -> bool {
    match kind {
        EventKind::Access(access) => matches!(access, AccessKind::Close(AccessMode::Write)),
        _ => true,
    }
}

/// The deciding thread's state.
struct Watcher {
    options: BuildOptions,
    live: Arc<Live>,
    signals: Sender<Signal>,
    debouncer: Debouncer<RecommendedWatcher, RecommendedCache>,
    /// Folders watched (not recursively): watching a file's folder rather than the
    /// file sees it deleted, renamed over or created again.
    watched_dirs: BTreeSet<PathBuf>,
    /// The document and the files its steps read, absolute.
    watched_files: BTreeSet<PathBuf>,
}

impl Watcher {
    /// Builds, and builds again on every change, until Ctrl-C.
    fn run(mut self, heard: &Receiver<Signal>) {
        self.watch_files(&[]);
        let mut due = true;
        let mut running: Option<Arc<AtomicBool>> = None;
        loop {
            if due && running.is_none() {
                running = Some(self.start_build());
                due = false;
            }
            let Ok(signal) = heard.recv() else { return };
            match signal {
                Signal::Changed(paths) => {
                    if paths.is_empty()
                        || paths.iter().any(|path| self.watched_files.contains(path))
                    {
                        due = true;
                        if let Some(stop) = &running {
                            stop.store(true, Ordering::Relaxed);
                        }
                    }
                }
                Signal::Built(result) => {
                    running = None;
                    self.finished(result);
                }
                Signal::Stop => {
                    Self::stop(running.as_deref(), heard);
                    return;
                }
            }
        }
    }

    /// Starts a build on its own thread; setting the flag returned stops its training.
    fn start_build(&self) -> Arc<AtomicBool> {
        let stop = Arc::new(AtomicBool::new(false));
        self.live.building();
        let options = self.options.clone();
        let live = self.live.clone();
        let signals = self.signals.clone();
        let stopped = stop.clone();
        std::thread::spawn(move || {
            let result = if options.document.is_file() {
                let progress = PageProgress::new(&live);
                build_observed(&options, &progress, &stopped)
            } else {
                Err(WatchError::DocumentGone(options.document.clone()).into())
            };
            let _ = signals.send(Signal::Built(result));
        });
        stop
    }

    /// Shows what a build did, on the page and the console, and watches the files the
    /// document now reads.
    fn finished(&mut self, result: Result<Observed, Error>) {
        match result {
            Ok(Observed {
                inputs,
                summary: Some(summary),
                html: Some(html),
            }) => {
                console::print(&console::build(&summary));
                self.live.report(
                    &html,
                    LastReport {
                        steps: summary.steps,
                        ran: summary.ran,
                        reused: summary.reused,
                        failed: summary.failed.len(),
                        warnings: summary.warnings.clone(),
                    },
                );
                self.watch_files(&inputs);
            }
            // Stopped for a newer build, which is due.
            Ok(observed) => {
                self.live.superseded();
                self.watch_files(&observed.inputs);
            }
            Err(error) => {
                console::print(&console::error(&error, console::stderr_decoration()));
                self.live.problem(console::error_text(&error));
            }
        }
    }

    /// Watches the document and `inputs` (a document that could not be planned keeps
    /// the files it read before, so restoring one of them is seen).
    fn watch_files(&mut self, inputs: &[PathBuf]) {
        let document = absolute(&self.options.document);
        let mut files: BTreeSet<PathBuf> = inputs.iter().map(|path| absolute(path)).collect();
        files.insert(document);
        if inputs.is_empty() {
            files.extend(self.watched_files.iter().cloned());
        }
        let dirs: BTreeSet<PathBuf> = files
            .iter()
            .filter_map(|file| file.parent().map(Path::to_path_buf))
            .collect();
        for gone in self.watched_dirs.difference(&dirs) {
            let _ = self.debouncer.unwatch(gone);
        }
        let mut watched = BTreeSet::new();
        for dir in dirs {
            let already = self.watched_dirs.contains(&dir);
            if already
                || self
                    .debouncer
                    .watch(&dir, RecursiveMode::NonRecursive)
                    .is_ok()
            {
                watched.insert(dir);
            }
        }
        self.watched_dirs = watched;
        self.watched_files = files;
    }

    /// Ctrl-C: lets a running build's started runs finish (they are cached and its
    /// temporary files renamed or removed), then returns. A second Ctrl-C while waiting
    /// ends the process at once.
    fn stop(running: Option<&AtomicBool>, heard: &Receiver<Signal>) {
        let Some(stop) = running else { return };
        stop.store(true, Ordering::Relaxed);
        eprintln!("stopping: letting the runs already started finish (Ctrl-C again to quit now)");
        while let Ok(signal) = heard.recv() {
            match signal {
                Signal::Built(_) => return,
                Signal::Stop => std::process::exit(130),
                Signal::Changed(_) => {}
            }
        }
    }
}

/// `path` made absolute the way the watcher reports it (its folder as watched, joined
/// with the name), without resolving links.
fn absolute(path: &Path) -> PathBuf {
    std::path::absolute(path).unwrap_or_else(|_| path.to_path_buf())
}

/// The progress line of open pages while runs train: the step of the last run trained
/// and the runs done of all.
struct PageProgress<'a> {
    live: &'a Live,
    runs: AtomicUsize,
    done: AtomicUsize,
    /// Keeps the line's updates in the order the runs finished.
    line: Mutex<()>,
}

impl<'a> PageProgress<'a> {
    fn new(live: &'a Live) -> Self {
        Self {
            live,
            runs: AtomicUsize::new(0),
            done: AtomicUsize::new(0),
            line: Mutex::new(()),
        }
    }
}

impl Progress for PageProgress<'_> {
    fn training(&self, runs: usize) {
        self.runs.store(runs, Ordering::Relaxed);
        if runs > 0 {
            self.live.progress(format!("training: 0 of {runs} runs"));
        }
    }

    fn trained(&self, step: &str) {
        let _in_order = self
            .line
            .lock()
            .unwrap_or_else(|poisoned| poisoned.into_inner());
        let done = self.done.fetch_add(1, Ordering::Relaxed) + 1;
        let runs = self.runs.load(Ordering::Relaxed);
        self.live
            .progress(format!("training: step '{step}', {done} of {runs} runs"));
    }

    fn finished(&self) {
        self.live.progress("rendering the report…".into());
    }
}

#[cfg(test)]
mod tests {
    use notify_debouncer_full::notify::event::{CreateKind, ModifyKind, RemoveKind, RenameMode};

    use super::*;

    #[test]
    fn reading_a_file_is_no_change_but_writing_renaming_or_removing_it_is() {
        for read in [
            AccessKind::Open(AccessMode::Read),
            AccessKind::Open(AccessMode::Any),
            AccessKind::Close(AccessMode::Read),
            AccessKind::Read,
        ] {
            assert!(!changes_contents(&EventKind::Access(read)), "{read:?}");
        }
        for change in [
            EventKind::Access(AccessKind::Close(AccessMode::Write)),
            EventKind::Modify(ModifyKind::Any),
            EventKind::Modify(ModifyKind::Name(RenameMode::To)),
            EventKind::Create(CreateKind::File),
            EventKind::Remove(RemoveKind::File),
        ] {
            assert!(changes_contents(&change), "{change:?}");
        }
    }
}
