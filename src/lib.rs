//! stet: run a Markdown experiment document and render its report.
//!
//! The flow is document → plan → build → report: [`document`] parses the Markdown and
//! the step settings, [`plan`] resolves references and computes cache keys, `build`
//! executes what the `cache` does not hold, and `report` renders HTML and JSON;
//! `cluster` spreads a document's runs over a Slurm job array; `watch` builds again
//! on every change and serves the report to a browser. The command layer
//! (`main.rs`) only parses flags, calls the entry points here, prints the lines
//! [`console`] formats and maps the outcome to an exit code.

// Only what the command, the tests and the fuzz targets use is public.
#![warn(unreachable_pub)]

pub(crate) mod build;
pub(crate) mod cache;
mod carry;
mod cluster;
pub mod console;
pub mod data;
mod diff;
pub mod document;
pub(crate) mod export;
pub mod judge;
pub mod nn;
pub mod plan;
pub(crate) mod report;
mod watch;
pub use document::spec::schema;
pub use watch::{WatchError, WatchOptions, watch};

pub use build::ShareSummary;
pub use build::share::{Share, ShareError};
pub use cache::freshness::StepStatus;
pub use cache::pruning::Cleaning;
pub use carry::CarryError;
pub use carry::inputs::RecordError;
pub use carry::unpack::{MissingFile, UnpackError, Unpacked};
pub use cluster::DispatchError;
pub use diff::{Comparison, DiffError};
pub use report::TemplateError;

use std::borrow::Cow;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Duration;

use build::{BuildResult, RunOptions, StepResult, outcome, share};
use cache::{Cache, atomic, freshness, manifest, pruning};
use document::{Document, DocumentErrors, Problem};
use plan::Plan;
use plan::input_file::{self, InputError};
use plan::outputs;

/// Where the cache lives.
#[derive(Clone, Debug)]
pub enum CacheChoice {
    /// `.stet/` beside the document, or `$STET_CACHE` when set.
    Default,
    Dir(PathBuf),
    /// Run everything, keep nothing.
    Off,
}

/// What `stet build` was asked to do.
#[derive(Clone, Debug)]
pub struct BuildOptions {
    pub document: PathBuf,
    /// The report path; `DOC.html` beside `DOC.md` when absent.
    pub output: Option<PathBuf>,
    pub json: Option<PathBuf>,
    pub cache: CacheChoice,
    pub jobs: usize,
    pub templates: Option<PathBuf>,
    pub allow_html: bool,
    /// The most the experiment the report carries may take compressed, in bytes, with
    /// the files its steps read; over it (and with `None`) those files are left out.
    pub embed_limit: Option<u64>,
    /// Where the document may read and write, and the resource limits.
    pub plan: plan::PlanOptions,
}

/// The default of `--embed-data-mb`.
pub const DEFAULT_EMBED_MB: u64 = 10;

/// Why a command could not be carried out (exit code 2).
#[derive(Debug, thiserror::Error)]
pub enum Error {
    #[error("{0}")]
    Document(DocumentErrors),
    #[error("{context}: {source}")]
    Io {
        context: String,
        source: std::io::Error,
    },
    #[error("{0}")]
    Usage(String),
    #[error(transparent)]
    Dispatch(#[from] DispatchError),
    #[error(transparent)]
    Templates(#[from] TemplateError),
    #[error(transparent)]
    Unpack(#[from] UnpackError),
    #[error(transparent)]
    Record(#[from] RecordError),
    #[error(transparent)]
    Diff(#[from] DiffError),
    #[error(transparent)]
    Watch(#[from] WatchError),
}

/// What a finished build did.
#[derive(Debug)]
pub struct BuildSummary {
    pub report: PathBuf,
    pub steps: usize,
    pub ran: usize,
    pub reused: usize,
    /// Ids and errors of the steps that failed (exit code 1 when any).
    pub failed: Vec<(String, String)>,
    /// Cache warnings (corrupt entries recomputed, writes that failed).
    pub warnings: Vec<String>,
}

/// A document read from disk and planned.
pub struct Loaded {
    pub(crate) name: String,
    pub document: Document,
    pub(crate) hash: String,
    /// The document's text as read, before line endings were normalised: what the
    /// report carries, so an unpacked document has the same hash.
    pub(crate) original: String,
    pub plan: Plan,
}

/// Reads, parses and plans a document; every problem found is reported together.
pub fn load(path: &Path, options: &plan::PlanOptions) -> Result<Loaded, Error> {
    let bytes =
        input_file::read_regular(path, options.limits.max_file_bytes).map_err(
            |error| match error {
                InputError::Io(source) => Error::Io {
                    context: format!("reading {}", path.display()),
                    source,
                },
                refused => Error::Usage(format!("cannot read {}: {refused}", path.display())),
            },
        )?;
    let name = path.display().to_string();
    let source = match String::from_utf8(bytes) {
        Ok(source) => source,
        Err(error) => {
            let at = error.utf8_error().valid_up_to();
            let text = String::from_utf8_lossy(error.as_bytes()).into_owned();
            // The bad bytes read as U+FFFD in the text shown, three bytes long.
            let problem = Problem::new(
                at..at + '\u{FFFD}'.len_utf8(),
                "the document is not valid UTF-8 text",
            )
            .with_help("save the file as UTF-8");
            return Err(Error::Document(DocumentErrors::for_file(
                path,
                text,
                vec![problem],
            )));
        }
    };
    let hash = blake3::hash(source.as_bytes()).to_hex().to_string();
    let original = source.clone();
    let source = document::normalised(source);
    let (document, mut problems) = document::parse(&source);
    let base_dir = path.parent().unwrap_or(Path::new("."));
    let planned = document
        .as_ref()
        .map(|document| plan::plan(document, base_dir, options));
    if let Some(Err(more)) = &planned {
        problems.extend(more.iter().cloned());
    }
    let (Some(document), Some(Ok(plan)), true) = (document, planned, problems.is_empty()) else {
        problems.sort_by_key(|problem| problem.span.start);
        return Err(Error::Document(DocumentErrors::for_file(
            path, source, problems,
        )));
    };
    Ok(Loaded {
        name,
        document,
        hash,
        original,
        plan,
    })
}

/// The cache a command uses for a document.
fn open_cache(choice: &CacheChoice, document: &Path) -> Cache {
    match choice {
        CacheChoice::Off => Cache::disabled(),
        CacheChoice::Dir(dir) => Cache::at(dir.clone()),
        CacheChoice::Default => match std::env::var_os("STET_CACHE") {
            Some(dir) if !dir.is_empty() => Cache::at(PathBuf::from(dir)),
            _ => Cache::at(document.parent().unwrap_or(Path::new(".")).join(".stet")),
        },
    }
}

/// Largest image file a report embeds; a larger one stays a link.
const MAX_IMAGE_BYTES: u64 = 4 << 20;

/// The images the prose shows from files inside the document's project, as `data:`
/// URIs, so a mailed report stays whole. Destinations are taken as written (relative
/// to the document); images that are missing, too large, outside the project or not of
/// a known image type are left out and stay links.
fn embedded_images(document: &Document, document_path: &Path) -> report::prose::Embedded {
    let dir = document_path.parent().unwrap_or(Path::new(""));
    let mut images = report::prose::Embedded::new();
    for piece in &document.pieces {
        let document::Piece::Prose(markdown) = piece else {
            continue;
        };
        for destination in report::prose::local_image_destinations(markdown) {
            if images.contains_key(&destination) {
                continue;
            }
            if let Some(uri) = image_data_uri(dir, &dir.join(&destination)) {
                images.insert(destination, uri);
            }
        }
    }
    images
}

fn image_data_uri(document_dir: &Path, path: &Path) -> Option<String> {
    use base64::Engine;
    let extension = path.extension()?.to_str()?.to_ascii_lowercase();
    let media_type = match extension.as_str() {
        "png" => "image/png",
        "jpg" | "jpeg" => "image/jpeg",
        "gif" => "image/gif",
        "webp" => "image/webp",
        // An SVG shown through <img> runs no script and loads nothing.
        "svg" => "image/svg+xml",
        _ => return None,
    };
    if !plan::inside_project(document_dir, path) {
        return None;
    }
    let bytes = input_file::read_regular(path, MAX_IMAGE_BYTES).ok()?;
    let encoded = base64::engine::general_purpose::STANDARD.encode(bytes);
    Some(format!("data:{media_type};base64,{encoded}"))
}

/// `stet build`: runs what is not cached and writes the report (and the JSON summary).
/// Nothing is written when the document cannot be used.
pub fn build(options: &BuildOptions) -> Result<BuildSummary, Error> {
    let bar = console::TrainingBar::new();
    let never = AtomicBool::new(false);
    let built = build_observed(options, &bar, &never)?;
    Ok(built.summary.expect("a build nobody stops finishes"))
}

/// What [`build_observed`] did, for `stet watch`.
pub(crate) struct Observed {
    /// The files the document's steps read (empty when it could not be planned).
    pub(crate) inputs: Vec<PathBuf>,
    /// `None` when `stop` was set during training: nothing was written.
    pub(crate) summary: Option<BuildSummary>,
    /// The report written, when one was.
    pub(crate) html: Option<String>,
}

/// The one build behind `stet build` and `stet watch`: runs what is not cached,
/// telling `progress` about each run, and writes the report. When `stop` is set while
/// runs train, the runs started finish (and are cached), the rest are not started and
/// nothing else is written, since a newer build will.
pub(crate) fn build_observed(
    options: &BuildOptions,
    progress: &dyn build::Progress,
    stop: &AtomicBool,
) -> Result<Observed, Error> {
    let templates = match &options.templates {
        Some(dir) => report::Templates::with_overrides(dir)?,
        None => report::Templates::built_in(),
    };
    let loaded = load(&options.document, &options.plan)?;
    check_recorded_inputs(&options.document, &loaded)?;
    let inputs = loaded
        .plan
        .steps
        .iter()
        .flat_map(|step| step.files.iter().map(|file| file.path.clone()))
        .collect();
    let cache = open_cache(&options.cache, &options.document);
    let targets = check_outputs(options, &loaded, &cache)?;
    remove_stale_temporaries(&loaded.plan, &targets);
    let run_options = RunOptions {
        jobs: options.jobs,
        progress: Some(progress),
        stop: Some(stop),
    };
    let mut results = build::execute(&loaded.plan, &cache, &run_options);
    if stop.load(Ordering::Relaxed) {
        return Ok(Observed {
            inputs,
            summary: None,
            html: None,
        });
    }
    manifest::store(&cache, &options.document, &loaded.plan);
    write_model_files(&loaded.plan, &loaded.hash, &mut results.steps);
    let built_at = build_time();
    let summary = report::summary::summary(&loaded.name, &loaded.hash, &loaded.plan, &results);
    let carried = carry::carry(&carry::Carrying {
        document: &options.document,
        source: loaded.original.as_bytes(),
        plan: &loaded.plan,
        summary: &summary,
        embed_limit: options.embed_limit,
    });
    let html = report::render(
        &report::ReportInput {
            document: &loaded.document,
            document_name: &loaded.name,
            document_hash: &loaded.hash,
            plan: &loaded.plan,
            results: &results,
            allow_html: options.allow_html,
            images: &embedded_images(&loaded.document, &options.document),
            built_at: &built_at,
            report_file: &report_file_name(&targets.report),
            carried: &carried,
        },
        &templates,
    )
    .map_err(|error| Error::Usage(format!("rendering the report: {error:#}")))?;
    write_output(&targets.report, html.as_bytes())?;
    if let Some(json_path) = &targets.json {
        let text = serde_json::to_string_pretty(&summary).expect("a JSON value serialises");
        write_output(json_path, text.as_bytes())?;
    }
    let summary = summarise(
        report_path(options),
        &loaded.plan,
        &results,
        cache.take_warnings(),
    );
    Ok(Observed {
        inputs,
        summary: Some(summary),
        html: Some(html),
    })
}

/// The report's file name, as the footer's unpack command names it.
fn report_file_name(report: &Path) -> String {
    report.file_name().map_or_else(
        || report.display().to_string(),
        |name| name.to_string_lossy().into_owned(),
    )
}

/// Refuses, at their `file:` settings, files whose bytes differ from those recorded
/// beside a document that `stet unpack` wrote without them.
fn check_recorded_inputs(document: &Path, loaded: &Loaded) -> Result<(), Error> {
    let problems = carry::inputs::check(document, loaded)?;
    if problems.is_empty() {
        return Ok(());
    }
    Err(Error::Document(DocumentErrors::for_file(
        document,
        loaded.document.source.clone(),
        problems,
    )))
}

/// `stet unpack`: writes the document and the files a report carries into `dir`
/// (default: a folder named after the report), refusing paths that would land outside
/// it and, without `force`, files that exist. Nothing is written when it refuses.
pub fn unpack(report: &Path, dir: Option<&Path>, force: bool) -> Result<Unpacked, Error> {
    let unpacking = carry::unpack::prepare(report, dir, force)?;
    let mut written = Vec::new();
    for (path, bytes) in unpacking.writes {
        if let Some(parent) = path.parent() {
            std::fs::create_dir_all(parent).map_err(|source| Error::Io {
                context: format!("creating {}", parent.display()),
                source,
            })?;
        }
        write_output(&path, &bytes)?;
        written.push(path);
    }
    Ok(Unpacked {
        document: written[0].clone(),
        written,
        missing: unpacking.missing,
    })
}

/// What `stet diff` writes, and how it prints.
#[derive(Clone, Debug, Default)]
pub struct DiffOptions {
    pub html: Option<PathBuf>,
    pub json: Option<PathBuf>,
    /// Step headings in bold (for a terminal, never when piped).
    pub colour: bool,
}

/// `stet diff`: compares two builds, each a report or a `--json` summary, and writes
/// the page and the JSON asked for (never over either input). Returns the lines to
/// print: the comparison when no file was asked for, else what was written.
pub fn diff(old: &Path, new: &Path, outputs: &DiffOptions) -> Result<Vec<String>, Error> {
    let comparison = diff::compare_files(old, new)?;
    if let (Some(html), Some(json)) = (&outputs.html, &outputs.json)
        && html == json
    {
        return Err(Error::Usage(format!(
            "--html and --json both name {}",
            html.display()
        )));
    }
    for (flag, output) in [("--html", &outputs.html), ("--json", &outputs.json)] {
        if let Some(output) = output
            && [old, new].iter().any(|input| same_file(input, output))
        {
            return Err(Error::Usage(format!(
                "{flag} {}: that is one of the builds being compared",
                output.display()
            )));
        }
    }
    let mut lines = Vec::new();
    if let Some(path) = &outputs.html {
        let html = report::diff_view::render(&comparison, &report::Templates::built_in())
            .map_err(|error| Error::Usage(format!("rendering the comparison: {error:#}")))?;
        write_output(path, html.as_bytes())?;
        lines.push(format!("wrote {}", path.display()));
    }
    if let Some(path) = &outputs.json {
        let text = serde_json::to_string_pretty(&comparison).expect("a comparison serialises");
        write_output(path, text.as_bytes())?;
        lines.push(format!("wrote {}", path.display()));
    }
    if lines.is_empty() {
        lines = diff::text::lines(&comparison, outputs.colour);
    } else if !comparison.matched_any() {
        lines.push("no step matched: the two builds share no step id".into());
    }
    Ok(lines)
}

/// Whether two paths name one file (an output path that does not exist yet names none).
fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(a), Ok(b)) => a == b,
        _ => false,
    }
}

/// The report path as the user gave it, or `DOC.html` beside the document.
fn report_path(options: &BuildOptions) -> PathBuf {
    options
        .output
        .clone()
        .unwrap_or_else(|| options.document.with_extension("html"))
}

/// Every file the build will write, checked before anything runs: a report or summary
/// path that would replace the document, a file a step reads, the cache or each other
/// is a command-line error; a step's `write:` that would is a problem at its line.
fn check_outputs(
    options: &BuildOptions,
    loaded: &Loaded,
    cache: &Cache,
) -> Result<outputs::BuildTargets, Error> {
    let report = report_path(options);
    let paths = outputs::BuildPaths {
        document: &options.document,
        report: (
            &report,
            if options.output.is_some() {
                "-o"
            } else {
                "the report beside the document"
            },
        ),
        json: options.json.as_deref(),
        cache: cache.dir(),
    };
    outputs::check_build(&loaded.plan.steps, &paths).map_err(|refused| match refused {
        outputs::BuildRefusal::Flag { flag, refusal } => Error::Usage(format!("{flag}: {refusal}")),
        outputs::BuildRefusal::Steps(clashes) => {
            let problems = clashes
                .into_iter()
                .map(|(index, refusal)| refusal.at(write_span(loaded, index)))
                .collect();
            Error::Document(DocumentErrors::for_file(
                &options.document,
                loaded.document.source.clone(),
                problems,
            ))
        }
    })
}

/// Where a step's `write:` setting sits in the document.
fn write_span(loaded: &Loaded, step: usize) -> std::ops::Range<usize> {
    let document::Piece::Step(block) = &loaded.document.pieces[loaded.plan.steps[step].piece]
    else {
        unreachable!("a planned step comes from a step block")
    };
    document::spec::key_span(block.yaml_block(), "write").unwrap_or(block.info_span.clone())
}

/// A build killed while writing leaves its temporary files behind; the next build
/// removes those of its own beside the files it writes.
fn remove_stale_temporaries(plan: &Plan, targets: &outputs::BuildTargets) {
    let files = plan
        .steps
        .iter()
        .filter_map(|step| step.output.as_ref().map(|output| &output.path))
        .chain([&targets.report])
        .chain(&targets.json);
    let mut folders: Vec<&Path> = files.filter_map(|path| path.parent()).collect();
    folders.sort();
    folders.dedup();
    for folder in folders {
        atomic::remove_stale(folder);
    }
}

/// `stet build --shard K/N`: trains one share of the document's uncached runs into the
/// cache and renders nothing; what a cluster task runs.
pub fn build_share(
    options: &BuildOptions,
    share: share::Share,
) -> Result<build::ShareSummary, Error> {
    let loaded = load(&options.document, &options.plan)?;
    let cache = open_cache(&options.cache, &options.document);
    if cache.dir().is_none() {
        return Err(Error::Usage("--shard needs a cache to train into".into()));
    }
    let run_options = RunOptions {
        jobs: options.jobs,
        progress: None,
        stop: None,
    };
    Ok(build::execute_share(
        &loaded.plan,
        &cache,
        &run_options,
        share,
    ))
}

/// What `stet dispatch` did.
#[derive(Debug)]
pub struct Dispatched {
    pub job: String,
    pub script: PathBuf,
    /// With `--wait`: the final build, or how many runs are still missing.
    pub finished: Option<Result<BuildSummary, usize>>,
}

/// `stet dispatch`: prepares the document's data into the cache, submits a job array
/// of `tasks` shares, and with `wait` (the longest wait) waits for it and builds the
/// report (which then trains nothing) — unless a task failed and left runs uncached.
/// Slurm's programs are found, and the outputs checked, before anything is written.
pub fn dispatch(
    options: &BuildOptions,
    tasks: usize,
    wait: Option<Duration>,
    sbatch_options: &[String],
) -> Result<Dispatched, Error> {
    if tasks == 0 {
        return Err(Error::Usage("--tasks must be at least 1".into()));
    }
    let slurm = cluster::Slurm::locate(wait.is_some())?;
    let loaded = load(&options.document, &options.plan)?;
    let cache = open_cache(&options.cache, &options.document);
    let Some(dir) = cache.dir() else {
        return Err(Error::Usage("dispatch needs a shared cache folder".into()));
    };
    // The build after the wait writes the report: refuse now what it would refuse then.
    check_outputs(options, &loaded, &cache)?;
    let io = |context: String| move |source| Error::Io { context, source };
    std::fs::create_dir_all(dir).map_err(io(format!("creating {}", dir.display())))?;
    let cache_dir = dir
        .canonicalize()
        .map_err(io(format!("resolving {}", dir.display())))?;
    let document = options
        .document
        .canonicalize()
        .map_err(io(format!("resolving {}", options.document.display())))?;
    if let Some((id, error)) = build::prepare_only(&loaded.plan, &cache).into_iter().next() {
        return Err(Error::Usage(format!(
            "step '{id}' failed before any training: {error}"
        )));
    }
    let request = cluster::DispatchRequest {
        document: &document,
        cache_dir: &cache_dir,
        tasks,
        sbatch_options,
        plan: &options.plan,
    };
    let (job, script) = cluster::submit(&request, &slurm.sbatch)?;
    let (Some(timeout), Some(squeue)) = (wait, &slurm.squeue) else {
        return Ok(Dispatched {
            job,
            script,
            finished: None,
        });
    };
    eprintln!("submitted job {job} ({tasks} tasks); waiting for it");
    cluster::wait_for(&job, squeue, timeout)?;
    let (cached, all) = freshness::run_totals(&loaded.plan, &cache);
    let missing = all - cached;
    let finished = if missing > 0 {
        Err(missing)
    } else {
        Ok(build(options)?)
    };
    Ok(Dispatched {
        job,
        script,
        finished: Some(finished),
    })
}

/// `stet status`: what a build of the document would reuse and run, and why.
pub fn status(
    document: &Path,
    cache: &CacheChoice,
    options: &plan::PlanOptions,
) -> Result<StatusReport, Error> {
    let loaded = load(document, options)?;
    let cache = open_cache(cache, document);
    let previous = manifest::load(&cache, document);
    Ok(StatusReport {
        steps: freshness::status(&loaded.plan, &cache, &previous),
        runs: freshness::run_totals(&loaded.plan, &cache),
    })
}

/// What `stet status` prints.
#[derive(Debug)]
pub struct StatusReport {
    pub steps: Vec<freshness::StepStatus>,
    /// Training runs of the whole document, each once: (cached, all).
    pub runs: (usize, usize),
}

/// `stet clean`: removes the cache entries no document still uses (see
/// `pruning::entries_in_use`); with no document, the whole cache. The cache is the one
/// the first document (or the current folder) would use. With `dry_run` nothing is
/// removed and the result lists what would be.
pub fn clean(
    documents: &[PathBuf],
    cache: &CacheChoice,
    options: &plan::PlanOptions,
    dry_run: bool,
) -> Result<pruning::Cleaning, Error> {
    let anchor = documents
        .first()
        .cloned()
        .unwrap_or_else(|| PathBuf::from("stet.md"));
    let cache = open_cache(cache, &anchor);
    let Some(dir) = cache.dir().map(Path::to_path_buf) else {
        return Ok(pruning::Cleaning::default());
    };
    let loaded = documents
        .iter()
        .map(|path| load(path, options))
        .collect::<Result<Vec<_>, _>>()?;
    let plans: Vec<&Plan> = loaded.iter().map(|l| &l.plan).collect();
    let keep = if documents.is_empty() {
        None
    } else {
        let in_use = pruning::entries_in_use(&cache, documents, &plans).map_err(|error| {
            Error::Usage(format!(
                "{error}; nothing was removed, since what its document uses is unknown \
                 (remove that record, or clean the whole cache with `stet clean --cache {}`)",
                dir.display()
            ))
        })?;
        Some(in_use)
    };
    Ok(pruning::remove_unused(&dir, keep.as_ref(), dry_run))
}

fn summarise(
    report: PathBuf,
    plan: &Plan,
    results: &BuildResult,
    warnings: Vec<String>,
) -> BuildSummary {
    let tally = results.tally();
    BuildSummary {
        report,
        steps: results.steps.len(),
        ran: tally.ran,
        reused: tally.reused,
        failed: results.failures(plan),
        warnings,
    }
}

/// Writes the file each predict and export step asked for. A write that fails (the
/// plan checked every path, but the disk may still refuse) fails its step in place, so
/// the report is still written and shows why.
fn write_model_files(plan: &Plan, document_hash: &str, records: &mut [StepResult]) {
    for (step, record) in plan.steps.iter().zip(records.iter_mut()) {
        let (Some(output), Some(bytes)) = (&step.output, model_file(record, document_hash)) else {
            continue;
        };
        if let Err(error) = atomic::write(&output.path, &bytes) {
            record.status = build::Status::Failed {
                error: format!("writing {}: {error}", output.path.display()),
            };
        }
    }
}

/// The bytes a predict or export step's result saves; an export names the document.
fn model_file<'a>(record: &'a StepResult, document_hash: &str) -> Option<Cow<'a, [u8]>> {
    match &record.outcome {
        Some(outcome::Outcome::Predict(result)) => Some(Cow::Borrowed(result.csv.as_bytes())),
        Some(outcome::Outcome::Export(result)) => Some(Cow::Owned(result.file(document_hash))),
        _ => None,
    }
}

/// Writes a result file atomically so an interrupted build never leaves it torn.
fn write_output(path: &Path, bytes: &[u8]) -> Result<(), Error> {
    atomic::write(path, bytes).map_err(|source| Error::Io {
        context: format!("writing {}", path.display()),
        source,
    })
}

/// The build time in UTC; `SOURCE_DATE_EPOCH` fixes it for reproducible reports.
fn build_time() -> String {
    let now = std::env::var("SOURCE_DATE_EPOCH")
        .ok()
        .and_then(|seconds| seconds.parse::<u64>().ok())
        .map(|seconds| std::time::UNIX_EPOCH + std::time::Duration::from_secs(seconds))
        .unwrap_or_else(std::time::SystemTime::now);
    let stamp = humantime::format_rfc3339_seconds(now).to_string();
    stamp.replacen('T', " ", 1).replace('Z', " UTC")
}
