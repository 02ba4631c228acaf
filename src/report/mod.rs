//! The HTML report: one self-contained file with CSS and SVG charts inline, rendered
//! from minijinja templates compiled into the binary (or read from `--templates DIR`).
//! Renderers return strings; only the command layer writes files.

pub(crate) mod card_view;
pub(crate) mod chart;
pub(crate) mod compare_view;
pub(crate) mod diagnosis_view;
pub(crate) mod diff_view;
pub(crate) mod format;
pub(crate) mod headline;
pub(crate) mod model_view;
pub(crate) mod prose;
pub(crate) mod settings;
pub(crate) mod summary;
pub(crate) mod verdict;
pub(crate) mod view;

use std::path::{Path, PathBuf};

use minijinja::Environment;
use pulldown_cmark::{Event, Parser, Tag};
use serde::Serialize;

use crate::build::outcome::{DataSummary, Outcome, SweepResult};
use crate::build::{BuildResult, Status};
use crate::carry::Carried;
use crate::data::Scale;
use crate::data::card::{DataWarning, Role};
use crate::document::{Document, Piece, StepSpec};
use crate::plan::{Plan, Upstream, short_key};
use compare_view::{CompareView, Compared, SweepView, compare_view, sweep_view};
use format::seconds;
use model_view::{ExportView, PredictView, export_view, predict_view};
use settings::SettingRow;
use view::{DataView, TrainView, data_view, train_view};

/// The templates the binary carries: (name, text).
const BUILT_IN: &[(&str, &str)] = &[
    ("report.html", include_str!("../../templates/report.html")),
    ("step.html", include_str!("../../templates/step.html")),
    ("style.css", include_str!("../../templates/style.css")),
    ("diff.html", include_str!("../../templates/diff.html")),
];

/// A loaded set of templates.
pub(crate) struct Templates {
    env: Environment<'static>,
}

impl Templates {
    /// The templates compiled into the binary.
    pub(crate) fn built_in() -> Templates {
        let mut env = Environment::new();
        for (name, text) in BUILT_IN {
            env.add_template(name, text)
                .expect("built-in templates parse");
        }
        Templates { env }
    }

    /// The built-in templates, each replaced by a file of the same name in `dir` if present.
    pub(crate) fn with_overrides(dir: &Path) -> Result<Templates, TemplateError> {
        if !dir.is_dir() {
            return Err(TemplateError::NoFolder(dir.to_path_buf()));
        }
        let mut env = Environment::new();
        for (name, text) in BUILT_IN {
            let path = dir.join(name);
            let source = match std::fs::read_to_string(&path) {
                Ok(source) => source,
                Err(error) if error.kind() == std::io::ErrorKind::NotFound => text.to_string(),
                Err(source) => return Err(TemplateError::Unreadable { path, source }),
            };
            if let Err(source) = env.add_template_owned(name.to_string(), source) {
                return Err(TemplateError::Invalid { path, source });
            }
        }
        Ok(Templates { env })
    }
}

/// Why a `--templates` folder cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum TemplateError {
    #[error("--templates {}: no such folder", .0.display())]
    NoFolder(PathBuf),
    #[error("reading {}: {source}", path.display())]
    Unreadable {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("template {}: {source}", path.display())]
    Invalid {
        path: PathBuf,
        source: minijinja::Error,
    },
}

/// Everything a report is made from.
pub(crate) struct ReportInput<'a> {
    pub document: &'a Document,
    /// The document's path as the user gave it.
    pub document_name: &'a str,
    pub document_hash: &'a str,
    pub plan: &'a Plan,
    pub results: &'a BuildResult,
    pub allow_html: bool,
    /// Local images the prose shows, read by the command layer.
    pub images: &'a prose::Embedded,
    /// When the build ran, already formatted.
    pub built_at: &'a str,
    /// The report's file name, for the footer's unpack command.
    pub report_file: &'a str,
    /// The experiment the report carries.
    pub carried: &'a Carried,
}

#[derive(Serialize)]
struct ReportView<'a> {
    title: String,
    author: Option<&'a str>,
    notes: Option<&'a str>,
    built_at: &'a str,
    run_summary: String,
    version: &'static str,
    document_name: &'a str,
    document_hash: &'a str,
    headlines: Vec<headline::Headline>,
    pieces: Vec<PieceView>,
    /// The footer's sentence on unpacking, its command, and the block it unpacks.
    unpack_hint: String,
    unpack_command: String,
    experiment: &'a str,
}

#[derive(Serialize)]
#[serde(tag = "type", rename_all = "snake_case")]
enum PieceView {
    Prose { html: String },
    Step(Box<StepView>),
}

#[derive(Serialize)]
struct StepView {
    id: String,
    kind: &'static str,
    key: String,
    status: &'static str,
    status_text: String,
    error: Option<String>,
    beside_html: String,
    settings: Vec<SettingRow>,
    yaml: String,
    data: Option<DataView>,
    train: Option<TrainView>,
    sweep: Option<SweepView>,
    compare: Option<CompareView>,
    predict: Option<PredictView>,
    export: Option<ExportView>,
    /// Where a predict or export step wrote its file.
    wrote: Option<String>,
    /// For a predict or export step reading a sweep: which combination it used.
    model_choice: Option<String>,
}

/// Renders the report to a string.
pub(crate) fn render(
    input: &ReportInput<'_>,
    templates: &Templates,
) -> Result<String, minijinja::Error> {
    let title = title(input);
    let view = ReportView {
        pieces: pieces(input, &title),
        title,
        author: input.document.front.author.as_deref(),
        notes: input.document.front.notes.as_deref(),
        built_at: input.built_at,
        run_summary: run_summary(input.results),
        version: env!("CARGO_PKG_VERSION"),
        document_name: input.document_name,
        document_hash: input.document_hash,
        headlines: headline::headlines(input.plan, input.results),
        unpack_hint: unpack_hint(input),
        unpack_command: format!("stet unpack {}", input.report_file),
        experiment: &input.carried.html,
    };
    templates
        .env
        .get_template("report.html")?
        .render(minijinja::value::Serde(&view))
}

/// Says that the report can be unpacked, and what an unpacked copy will lack.
fn unpack_hint(input: &ReportInput<'_>) -> String {
    match input.carried.left_out {
        0 => "This report carries its document and data files; to write them out, ready to \
              rebuild, run"
            .into(),
        left_out => format!(
            "This report carries its document and the hashes of its data files ({left_out} \
             not included: supply {} and the build checks {} against the hashes); to write \
             the document out, run",
            if left_out == 1 { "it" } else { "them" },
            if left_out == 1 { "it" } else { "them" },
        ),
    }
}

/// The front matter's title, else the first heading's text, else the file name.
fn title(input: &ReportInput<'_>) -> String {
    if let Some(title) = &input.document.front.title {
        return title.clone();
    }
    for piece in &input.document.pieces {
        if let Piece::Prose(markdown) = piece {
            let mut in_heading = false;
            let mut text = String::new();
            for event in Parser::new(markdown) {
                match event {
                    Event::Start(Tag::Heading { .. }) => in_heading = true,
                    Event::End(pulldown_cmark::TagEnd::Heading(_)) if in_heading => return text,
                    Event::Text(t) | Event::Code(t) if in_heading => text.push_str(&t),
                    _ => {}
                }
            }
        }
    }
    input.document_name.to_string()
}

/// Steps, how many ran and were reused (and failed), and the time spent training.
fn run_summary(results: &BuildResult) -> String {
    let tally = results.tally();
    let mut summary = format!(
        "{} steps · {} ran · {} reused",
        results.steps.len(),
        tally.ran,
        tally.reused
    );
    if tally.failed > 0 {
        summary.push_str(&format!(" · {} failed", tally.failed));
    }
    summary.push_str(&format!(" · training {}", seconds(tally.training)));
    summary
}

fn pieces(input: &ReportInput<'_>, title: &str) -> Vec<PieceView> {
    let mut views = Vec::new();
    let mut pending_prose: Option<&str> = None;
    let flush = |views: &mut Vec<PieceView>, prose: &str| {
        views.push(PieceView::Prose {
            html: prose::render(prose, input.allow_html, input.images),
        })
    };
    for (index, piece) in input.document.pieces.iter().enumerate() {
        match piece {
            Piece::Prose(markdown) => {
                let markdown = if index == 0 {
                    without_leading_title(markdown, title)
                } else {
                    markdown.as_str()
                };
                if let Some(previous) = pending_prose.replace(markdown) {
                    flush(&mut views, previous);
                }
            }
            Piece::Step(block) => {
                let (lead, beside) = match pending_prose.take() {
                    Some(markdown) => split_lead(markdown),
                    None => ("", ""),
                };
                if !lead.trim().is_empty() {
                    flush(&mut views, lead);
                }
                let step_index = input
                    .plan
                    .steps
                    .iter()
                    .position(|step| step.piece == index)
                    .expect("every block is planned");
                views.push(PieceView::Step(Box::new(step_view(
                    input,
                    step_index,
                    &block.yaml,
                    prose::render(beside, input.allow_html, input.images),
                ))));
            }
        }
    }
    if let Some(rest) = pending_prose {
        flush(&mut views, rest);
    }
    views
}

/// The document's prose without its leading `# Title` when that is the report's title,
/// which the masthead already shows.
fn without_leading_title<'a>(markdown: &'a str, title: &str) -> &'a str {
    let mut events = Parser::new(markdown).into_offset_iter();
    let Some((Event::Start(Tag::Heading { level, .. }), heading)) = events.next() else {
        return markdown;
    };
    if level != pulldown_cmark::HeadingLevel::H1 {
        return markdown;
    }
    let mut text = String::new();
    for (event, _) in events {
        match event {
            Event::Text(t) | Event::Code(t) => text.push_str(&t),
            Event::End(pulldown_cmark::TagEnd::Heading(_)) => break,
            _ => {}
        }
    }
    if text.trim() == title.trim() {
        &markdown[heading.end..]
    } else {
        markdown
    }
}

/// Splits the prose before a step at its last heading: the part up to the heading
/// spans the page, the heading and what follows it sit beside the step's results.
fn split_lead(markdown: &str) -> (&str, &str) {
    let last_heading = Parser::new(markdown)
        .into_offset_iter()
        .filter(|(event, _)| matches!(event, Event::Start(Tag::Heading { .. })))
        .map(|(_, range)| range.start)
        .last();
    match last_heading {
        Some(start) => markdown.split_at(start),
        None => ("", markdown),
    }
}

fn step_view(input: &ReportInput<'_>, index: usize, yaml: &str, beside_html: String) -> StepView {
    let step = &input.plan.steps[index];
    let record = &input.results.steps[index];
    let (status, status_text, error) = match &record.status {
        Status::Ran { seconds: s } => ("ran", format!("ran in {}", seconds(*s)), None),
        Status::Reused => ("reused", "reused from the cache".to_string(), None),
        Status::Failed { error } => ("failed", "failed".to_string(), Some(error.clone())),
    };
    let data_summary = trained_on(input, index);
    let classes = data_summary.and_then(|summary| summary.classes.clone());
    let targets = data_summary.map_or(Vec::new(), |summary| summary.target_names.clone());
    let scaled_targets = data_summary.is_some_and(scales_targets);
    let constant_target = data_summary.and_then(constant_target);
    StepView {
        id: step.id.clone(),
        kind: step.kind.word(),
        key: short_key(&step.key).to_string(),
        status,
        status_text,
        error,
        beside_html,
        settings: settings::rows(&step.spec, &step.written, record.outcome.as_ref()),
        yaml: yaml.to_string(),
        data: match &record.outcome {
            Some(Outcome::Data(summary)) => Some(data_view(summary)),
            _ => None,
        },
        train: match &record.outcome {
            Some(Outcome::Train(result)) => Some(train_view(
                result,
                classes.as_deref(),
                &targets,
                scaled_targets,
                constant_target,
            )),
            _ => None,
        },
        sweep: match &record.outcome {
            Some(Outcome::Sweep(result)) => Some(sweep_view(result, scaled_targets)),
            _ => None,
        },
        compare: match (&step.spec, &record.outcome) {
            (StepSpec::Compare(spec), Some(Outcome::Compare)) => {
                Some(compare_view(spec, &compared(input, step)))
            }
            _ => None,
        },
        predict: match &record.outcome {
            Some(Outcome::Predict(result)) => {
                Some(predict_view(result, classes.as_deref(), &targets))
            }
            _ => None,
        },
        export: match &record.outcome {
            Some(Outcome::Export(result)) => Some(export_view(result, input.document_hash)),
            _ => None,
        },
        wrote: match (&step.spec, &record.outcome) {
            (StepSpec::Predict(spec), Some(_)) => spec.write.clone(),
            (StepSpec::Export(spec), Some(_)) => Some(spec.write.clone()),
            _ => None,
        },
        model_choice: match (&step.upstream, &record.outcome) {
            (Upstream::Model { model }, Some(_)) => match &input.results.steps[*model].outcome {
                Some(Outcome::Sweep(sweep)) => Some(format!(
                    "Uses sweep '{}': {}, its first seed.",
                    input.plan.steps[*model].id,
                    sweep_choice(sweep)
                )),
                _ => None,
            },
            _ => None,
        },
    }
}

/// Which of a sweep's combinations is its best, and on which rows it was chosen.
fn sweep_choice(sweep: &SweepResult) -> String {
    format!(
        "the best of {} combinations ({}), chosen by {} on the {} rows",
        sweep.fits.len(),
        crate::plan::describe(&sweep.best().settings),
        sweep.rank_by.key().replace('_', " "),
        compare_view::rows_label(sweep.rank_rows)
    )
}

/// The data step a train step or a sweep (through the train step it varies) trained
/// on, when that step has a result.
fn trained_on<'a>(input: &'a ReportInput<'_>, index: usize) -> Option<&'a DataSummary> {
    let step = &input.plan.steps[index];
    let data = match (&step.spec, &step.upstream) {
        (_, Upstream::Train { data, .. }) => *data,
        (_, Upstream::Sweep { from }) => return trained_on(input, *from),
        // A predict step scores its rows as the model's data step encoded them.
        (StepSpec::Predict(_), Upstream::Model { model }) => {
            input.plan.steps[*model].fits.first()?.data
        }
        _ => return None,
    };
    match input.results.steps[data].outcome.as_ref()? {
        Outcome::Data(summary) => Some(summary),
        _ => None,
    }
}

/// Whether runs on this data trained on scaled targets, so their loss is in those units.
fn scales_targets(summary: &DataSummary) -> bool {
    summary.scale_target != Scale::None
}

/// A target column that holds one value in every row read (the data card's warning).
fn constant_target(summary: &DataSummary) -> Option<&str> {
    summary
        .card
        .warnings
        .iter()
        .find_map(|warning| match warning {
            DataWarning::Constant {
                column,
                role: Role::Target,
                ..
            } => Some(column.as_str()),
            _ => None,
        })
}

/// The fits a compare step lists: a train step's own, a sweep's best combination.
fn compared<'a>(
    input: &'a ReportInput<'_>,
    step: &'a crate::plan::PlannedStep,
) -> Vec<Compared<'a>> {
    step.upstream
        .all()
        .into_iter()
        .filter_map(|u| {
            let (what, fit) = match input.results.steps[u].outcome.as_ref()? {
                Outcome::Train(fit) => (String::new(), fit),
                Outcome::Sweep(sweep) => (sweep_choice(sweep), sweep.best()),
                _ => return None,
            };
            Some(Compared {
                id: input.plan.steps[u].id.as_str(),
                what,
                fit,
                scaled_targets: trained_on(input, u).is_some_and(scales_targets),
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_lead_splits_at_the_last_heading() {
        let (lead, beside) = split_lead("# Title\n\nIntro.\n\n## Base run\n\nWhy.\n");
        assert_eq!(lead, "# Title\n\nIntro.\n\n");
        assert_eq!(beside, "## Base run\n\nWhy.\n");
        assert_eq!(split_lead("Only prose.\n"), ("", "Only prose.\n"));
    }

    #[test]
    fn a_leading_title_heading_is_left_out_of_the_prose_only_when_it_is_the_title() {
        let markdown = "# Hives\n\nIntro.\n\n## Data\n";
        assert_eq!(
            without_leading_title(markdown, "Hives"),
            "\nIntro.\n\n## Data\n"
        );
        assert_eq!(without_leading_title(markdown, "Other"), markdown);
        assert_eq!(without_leading_title("## Hives\n", "Hives"), "## Hives\n");
    }

    #[test]
    fn a_template_that_does_not_parse_is_an_error_naming_its_file() {
        let dir = tempfile::tempdir().unwrap();
        let broken = dir.path().join("step.html");
        std::fs::write(&broken, "{% if %}").unwrap();
        let Err(error) = Templates::with_overrides(dir.path()) else {
            panic!("a broken template was accepted");
        };
        assert!(
            matches!(&error, TemplateError::Invalid { path, .. } if *path == broken),
            "{error:?}"
        );
        assert!(
            error
                .to_string()
                .starts_with(&format!("template {}: ", broken.display()))
        );
    }
}
