//! The lines each command prints when it finishes: results on standard output,
//! warnings, failures and the closing summary on standard error. They are formatted
//! here, beside the values they describe, so that `main.rs` only prints them and the
//! wording can be tested without running the binary.

use std::io::IsTerminal;

use crate::build::share::Share;
use crate::build::{Progress, ShareSummary};
use crate::cache::pruning::Cleaning;
use crate::document::{Decoration, DocumentErrors};
use crate::{BuildSummary, Dispatched, Error, StatusReport, Unpacked};

/// One line for one of the two streams.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Line {
    Out(String),
    Err(String),
}

/// Prints `lines` in order, each on its stream.
pub fn print(lines: &[Line]) {
    for line in lines {
        match line {
            Line::Out(text) => println!("{text}"),
            Line::Err(text) => eprintln!("{text}"),
        }
    }
}

/// `stet build`: cache warnings, each failed step, then the tally.
pub fn build(summary: &BuildSummary) -> Vec<Line> {
    let mut lines: Vec<Line> = summary
        .warnings
        .iter()
        .map(|warning| Line::Err(format!("warning: {warning}")))
        .collect();
    lines.extend(failed_steps(&summary.failed));
    lines.push(Line::Err(format!(
        "{}: {} steps, {} ran, {} reused, {} failed",
        summary.report.display(),
        summary.steps,
        summary.ran,
        summary.reused,
        summary.failed.len()
    )));
    lines
}

/// `stet unpack`: each file written, each file the report could not include with its
/// hash and where to put it, then the command that rebuilds.
pub fn unpacked(unpacked: &Unpacked) -> Vec<Line> {
    let mut lines: Vec<Line> = unpacked
        .written
        .iter()
        .map(|path| Line::Out(format!("wrote {}", path.display())))
        .collect();
    for missing in &unpacked.missing {
        lines.push(Line::Out(format!(
            "not included: {} (BLAKE3 {}): {}",
            missing.place.display(),
            missing.blake3,
            missing.why
        )));
    }
    if !unpacked.missing.is_empty() {
        lines.push(Line::Err(
            "put each file not included at its place; the build checks it against the hash above"
                .into(),
        ));
    }
    lines.push(Line::Err(format!(
        "rebuild with: stet build {}",
        unpacked.document.display()
    )));
    lines
}

/// `stet build --shard K/N`: each failed step, then what the share trained.
pub fn share(share: Share, done: &ShareSummary) -> Vec<Line> {
    let mut lines = failed_steps(&done.failed);
    lines.push(Line::Out(format!(
        "share {share}: trained {} runs; {} of the document's runs were uncached when it started",
        done.trained, done.uncached
    )));
    lines
}

/// `stet dispatch`: the job id (for scripts), the job script, and with `--wait` what
/// the final build did or how many runs a failed task left.
pub fn dispatched(dispatched: &Dispatched) -> Vec<Line> {
    let mut lines = vec![
        Line::Out(dispatched.job.clone()),
        Line::Err(format!("job script: {}", dispatched.script.display())),
    ];
    match &dispatched.finished {
        None => {}
        Some(Ok(summary)) => lines.extend(build(summary)),
        Some(Err(missing)) => lines.push(Line::Err(format!(
            "{missing} runs are still not in the cache: a task failed (its log is beside the job script); dispatch again to run only those"
        ))),
    }
    lines
}

/// `stet status`: one line per step (id, kind, short key, reuse or why it runs), then
/// the document's training runs.
pub fn status(report: &StatusReport) -> Vec<Line> {
    let mut lines: Vec<Line> = report
        .steps
        .iter()
        .map(|step| {
            let decision = match step.run_reason {
                None => "reuse".to_string(),
                Some(reason) => format!("run ({reason})"),
            };
            let runs = step.runs.map_or(String::new(), |(done, all)| {
                format!("  {done}/{all} runs cached")
            });
            Line::Out(format!(
                "{:<16} {:<7} {}  {decision}{runs}",
                step.id,
                step.kind.word(),
                step.short_key
            ))
        })
        .collect();
    let (done, all) = report.runs;
    lines.push(Line::Out(format!(
        "training runs: {done} cached, {} to train",
        all - done
    )));
    lines
}

/// `stet clean`: what was passed over, then what was removed (or, with `dry_run`, each
/// entry that would be and their total).
pub fn clean(cleaning: &Cleaning, dry_run: bool) -> Vec<Line> {
    let mut lines: Vec<Line> = cleaning
        .skipped
        .iter()
        .map(|skipped| {
            Line::Err(format!(
                "warning: left {} in place: {}",
                skipped.path.display(),
                skipped.reason
            ))
        })
        .collect();
    let (count, bytes) = (cleaning.removed.len(), cleaning.bytes());
    if dry_run {
        lines.extend(cleaning.removed.iter().map(|removal| {
            Line::Out(format!(
                "would remove {} ({} bytes)",
                removal.path.display(),
                removal.bytes
            ))
        }));
        lines.push(Line::Out(format!(
            "would remove {count} cache entries, {bytes} bytes"
        )));
    } else {
        lines.push(Line::Out(format!(
            "removed {count} cache entries, {bytes} bytes freed"
        )));
    }
    lines
}

/// Why a command could not be carried out: document problems with their source line
/// marked, decorated for a terminal or plain, anything else as one line.
pub fn error(error: &Error, decoration: Decoration) -> Vec<Line> {
    match error {
        Error::Document(errors) => document_problems(errors, decoration),
        other => vec![Line::Err(format!("error: {other}"))],
    }
}

/// Bold and colour when stderr is a terminal; plain ASCII for a file or a pipe.
pub fn stderr_decoration() -> Decoration {
    if std::io::stderr().is_terminal() {
        Decoration::Terminal
    } else {
        Decoration::Plain
    }
}

/// [`error`] as plain text, for the page `stet watch` serves.
pub(crate) fn error_text(failure: &Error) -> String {
    let lines: Vec<String> = error(failure, Decoration::Plain)
        .into_iter()
        .map(|(Line::Out(text) | Line::Err(text))| text)
        .collect();
    lines.join("\n")
}

/// `stet build`'s bar while runs train; drawn only when stderr is a terminal.
pub(crate) struct TrainingBar(indicatif::ProgressBar);

impl TrainingBar {
    pub(crate) fn new() -> Self {
        let style = indicatif::ProgressStyle::with_template(
            "training {bar:30} {pos}/{len} runs, {elapsed}",
        )
        .expect("a valid progress template");
        let target = indicatif::ProgressDrawTarget::stderr();
        Self(indicatif::ProgressBar::with_draw_target(None, target).with_style(style))
    }
}

impl Progress for TrainingBar {
    fn training(&self, runs: usize) {
        self.0.set_length(runs as u64);
    }

    fn trained(&self, _step: &str) {
        self.0.inc(1);
    }

    fn finished(&self) {
        self.0.finish_and_clear();
    }
}

fn document_problems(errors: &DocumentErrors, decoration: Decoration) -> Vec<Line> {
    let mut lines: Vec<Line> = errors
        .rendered(decoration)
        .into_iter()
        .map(Line::Err)
        .collect();
    lines.push(Line::Err(format!(
        "{}: {} problem(s); nothing was written",
        errors.path,
        errors.problems.len()
    )));
    lines
}

fn failed_steps(failed: &[(String, String)]) -> Vec<Line> {
    failed
        .iter()
        .map(|(id, error)| Line::Err(format!("step '{id}' failed: {error}")))
        .collect()
}

#[cfg(test)]
mod tests {
    use std::path::PathBuf;

    use super::*;
    use crate::cache::freshness::StepStatus;
    use crate::document::StepKind;

    // Expected lines: the wording and padding `stet status` and `stet build` printed
    // before their formatting moved out of main.rs.
    #[test]
    fn a_status_line_pads_the_id_and_kind_and_says_why_the_step_runs() {
        let report = StatusReport {
            steps: vec![StepStatus {
                id: "fit".into(),
                kind: StepKind::Train,
                short_key: "0123456789".into(),
                run_reason: Some("settings changed"),
                runs: Some((1, 3)),
            }],
            runs: (1, 3),
        };
        assert_eq!(
            status(&report),
            [
                Line::Out(
                    "fit              train   0123456789  run (settings changed)  1/3 runs cached"
                        .into()
                ),
                Line::Out("training runs: 1 cached, 2 to train".into()),
            ]
        );
    }

    #[test]
    fn a_build_closes_with_its_warnings_and_failures_before_the_tally() {
        let summary = BuildSummary {
            report: PathBuf::from("doc.html"),
            steps: 3,
            ran: 1,
            reused: 1,
            failed: vec![("fit".into(), "the data file changed".into())],
            warnings: vec!["an entry failed its integrity check".into()],
        };
        assert_eq!(
            build(&summary),
            [
                Line::Err("warning: an entry failed its integrity check".into()),
                Line::Err("step 'fit' failed: the data file changed".into()),
                Line::Err("doc.html: 3 steps, 1 ran, 1 reused, 1 failed".into()),
            ]
        );
    }
}
