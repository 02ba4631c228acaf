//! The step graph: parsed specs, references resolved, execution order, file inputs
//! hashed, and each step's cache key.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use crate::cache::EntryKind;
use crate::confine;
use crate::data::Split;
use crate::document::problem::nearest;
pub use crate::document::spec::sweep::describe;
use crate::document::spec::sweep::{settings_text, variant};
use crate::document::spec::{NetSpec, TrainSpec, key_span, parse_step};
use crate::document::{Document, Problem, StepBlock, StepKind, StepSpec};
use crate::input_file::InputFile;

/// Bumped whenever the meaning of a cached result changes, so old entries miss.
pub const CACHE_FORMAT_VERSION: u32 = 1;

/// A step's cache key: the BLAKE3 hash of everything its result depends on, in hex.
pub type Key = String;

/// The first 10 hex digits of a key, as shown in reports and `stet status`.
pub fn short_key(key: &str) -> &str {
    &key[..10.min(key.len())]
}

/// One step, ready to run.
#[derive(Clone, Debug)]
pub struct PlannedStep {
    pub id: String,
    pub kind: StepKind,
    pub spec: StepSpec,
    /// Index of the step's block among the document's pieces.
    pub piece: usize,
    /// Indices (into `Plan::steps`) of the steps this one reads, in reference order.
    pub upstream: Vec<usize>,
    pub files: Vec<InputFile>,
    pub key: Key,
    /// The networks a train step (one) or a sweep (one per combination) fits.
    pub fits: Vec<FitPlan>,
}

/// One setting of net and train values, fitted once per seed and partition.
#[derive(Clone, Debug)]
pub struct FitPlan {
    /// The varied settings and their values as text (empty for a train step).
    pub settings: Vec<(String, String)>,
    /// Index of the data step the runs read.
    pub data: usize,
    pub net: NetSpec,
    pub train: TrainSpec,
    pub runs: Vec<RunPlan>,
}

/// One network to fit: a seed on one partition.
#[derive(Clone, Debug)]
pub struct RunPlan {
    pub key: Key,
    pub partition: usize,
    pub seed: u64,
}

impl PlannedStep {
    /// The cache entries that hold this step's result: all present means a build
    /// reuses it. (A data step also keeps its prepared matrices, loaded only to train.)
    pub fn result_entries(&self) -> Vec<(&str, EntryKind)> {
        match self.kind {
            StepKind::Data => vec![(self.key.as_str(), EntryKind::DataSummary)],
            StepKind::Net | StepKind::Compare => vec![(self.key.as_str(), EntryKind::Marker)],
            StepKind::Train | StepKind::Sweep => self
                .fits
                .iter()
                .flat_map(|fit| {
                    fit.runs
                        .iter()
                        .map(|run| (run.key.as_str(), EntryKind::Run))
                })
                .collect(),
            StepKind::Predict => vec![(self.key.as_str(), EntryKind::Predict)],
            StepKind::Export => vec![(self.key.as_str(), EntryKind::Export)],
        }
    }
}

/// Every step of a document in document order, with an order to run them in.
#[derive(Clone, Debug)]
pub struct Plan {
    pub steps: Vec<PlannedStep>,
    /// Indices into `steps` such that every step comes after the steps it reads.
    pub order: Vec<usize>,
}

impl Plan {
    pub fn index_of(&self, id: &str) -> Option<usize> {
        self.steps.iter().position(|step| step.id == id)
    }
}

/// Bounds against documents that would exhaust memory or time; each is a flag.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Limits {
    /// Widest hidden layer allowed.
    pub max_layer_width: usize,
    /// Most training runs one sweep may ask for (combinations × seeds × folds).
    pub max_sweep_runs: usize,
    /// Largest file a step may read, in bytes.
    pub max_file_bytes: u64,
}

impl Default for Limits {
    fn default() -> Limits {
        Limits {
            max_layer_width: 4096,
            max_sweep_runs: 2000,
            max_file_bytes: 1 << 30,
        }
    }
}

/// What a plan may touch.
#[derive(Clone, Debug, Default)]
pub struct PlanOptions {
    /// Let data paths and written files leave the document's project (`--allow-outside`).
    pub allow_outside: bool,
    pub limits: Limits,
}

/// Where a document may read and write: its folder and its project.
struct Place<'a> {
    base_dir: &'a Path,
    /// `None` when `--allow-outside` lifts the confinement.
    root: Option<PathBuf>,
    limits: Limits,
}

/// Builds the plan of a parsed document whose data paths are relative to `base_dir`.
pub fn plan(
    document: &Document,
    base_dir: &Path,
    options: &PlanOptions,
) -> Result<Plan, Vec<Problem>> {
    let default_seed = document.front.seed.unwrap_or(0);
    let mut problems = Vec::new();
    let place = Place {
        base_dir,
        root: (!options.allow_outside).then(|| confine::project_root(base_dir)),
        limits: options.limits,
    };
    let mut parsed: Vec<(usize, &StepBlock, StepSpec)> = Vec::new();
    let mut seen: HashMap<&str, &StepBlock> = HashMap::new();
    for (piece, block) in document
        .pieces
        .iter()
        .enumerate()
        .filter_map(|(i, piece)| match piece {
            crate::document::Piece::Step(block) => Some((i, block)),
            crate::document::Piece::Prose(_) => None,
        })
    {
        if let Some(first) = seen.insert(&block.id, block) {
            let (line, _) =
                crate::document::problem::line_and_column(&document.source, first.info_span.start);
            problems.push(
                Problem::new(
                    block.info_span.clone(),
                    format!(
                        "a step named '{}' is already defined on line {line}",
                        block.id
                    ),
                )
                .with_help("give each step its own id"),
            );
            continue;
        }
        if let Some(spec) = parse_step(block, default_seed, &mut problems) {
            parsed.push((piece, block, spec));
        }
    }

    let kinds: HashMap<&str, StepKind> =
        document.steps().map(|b| (b.id.as_str(), b.kind)).collect();
    let index: HashMap<&str, usize> = parsed
        .iter()
        .enumerate()
        .map(|(i, (_, b, _))| (b.id.as_str(), i))
        .collect();
    let mut steps = Vec::new();
    for (piece, block, spec) in &parsed {
        let mut upstream = Vec::new();
        for reference in spec.references() {
            let (id, setting) = (reference.id, reference.setting);
            match kinds.get(id) {
                // A block whose info string was unreadable already has its problem.
                None if document.unreadable_ids.iter().any(|u| u == id) => {}
                None => problems.push(missing_reference(block, setting, id, &kinds)),
                Some(kind) if !reference.kinds.contains(kind) => problems.push(Problem::new(
                    setting_span(block, setting),
                    format!(
                        "'{id}' is a {} step, but {setting} must name a {} step",
                        kind.word(),
                        reference
                            .kinds
                            .iter()
                            .map(|k| k.word())
                            .collect::<Vec<_>>()
                            .join(" or ")
                    ),
                )),
                // A referenced step that failed to parse already has its own problem.
                Some(_) => upstream.extend(index.get(id).copied()),
            }
        }
        let files = read_files(block, spec, &place, &mut problems);
        check_writes(block, spec, &place, &mut problems);
        if let StepSpec::Net(net) = spec {
            check_widths(block, &net.hidden, options.limits, "", &mut problems);
        }
        steps.push(PlannedStep {
            id: block.id.clone(),
            kind: block.kind,
            spec: spec.clone(),
            piece: *piece,
            upstream,
            files,
            key: String::new(),
            fits: Vec::new(),
        });
    }
    if !problems.is_empty() {
        return Err(problems);
    }
    let order = execution_order(&steps);
    for &i in &order {
        let upstream_keys: Vec<Key> = steps[i]
            .upstream
            .iter()
            .map(|&u| steps[u].key.clone())
            .collect();
        steps[i].key = step_key(&steps[i], &upstream_keys);
    }
    let blocks: Vec<&StepBlock> = parsed.iter().map(|(_, block, _)| *block).collect();
    for i in 0..steps.len() {
        steps[i].fits = fits(&steps, &blocks, i, default_seed, &mut problems);
        check_sweep_size(blocks[i], &steps[i], options.limits, &mut problems);
    }
    crate::plan_checks::check(document, &steps, &mut problems);
    if !problems.is_empty() {
        return Err(problems);
    }
    Ok(Plan { steps, order })
}

fn missing_reference(
    block: &StepBlock,
    setting: &str,
    id: &str,
    kinds: &HashMap<&str, StepKind>,
) -> Problem {
    let problem = Problem::new(
        setting_span(block, setting),
        format!("no step is named '{id}'"),
    );
    match nearest(id, kinds.keys().copied()) {
        Some(suggestion) => problem.with_help(format!("did you mean '{suggestion}'?")),
        None => problem.with_help(format!(
            "steps in this document: {}",
            kinds.keys().copied().collect::<Vec<_>>().join(", ")
        )),
    }
}

/// The span of `setting:` in the block, or its info string.
fn setting_span(block: &StepBlock, setting: &str) -> std::ops::Range<usize> {
    key_span(block.yaml_block(), setting).unwrap_or_else(|| block.info_span.clone())
}

fn read_files(
    block: &StepBlock,
    spec: &StepSpec,
    place: &Place<'_>,
    problems: &mut Vec<Problem>,
) -> Vec<InputFile> {
    let written = match spec {
        StepSpec::Data(data) => &data.file,
        StepSpec::Predict(predict) => &predict.file,
        _ => return Vec::new(),
    };
    let path = place.base_dir.join(written);
    let span = setting_span(block, "file");
    if let Some(root) = &place.root
        && !confine::is_inside(&path, root)
    {
        problems.push(
                Problem::new(span, format!("'{written}' is outside this document's project ({})", root.display()))
                    .with_help("a document reads only files under its project folder; pass --allow-outside if you trust it"),
            );
        return Vec::new();
    }
    let limit = place.limits.max_file_bytes;
    if let Ok(metadata) = std::fs::metadata(&path)
        && metadata.len() > limit
    {
        problems.push(
            Problem::new(
                span,
                format!(
                    "'{written}' is {} bytes, over the limit of {limit}",
                    metadata.len()
                ),
            )
            .with_help("raise the limit with --max-file-mb"),
        );
        return Vec::new();
    }
    // Hashed as a stream and not kept: the step reads the file again when it runs.
    match InputFile::hash(&path) {
        Ok(hash) => vec![InputFile {
            written: written.clone(),
            hash,
            path,
        }],
        Err(error) => {
            problems.push(
                Problem::new(span, format!("cannot read '{}': {error}", path.display()))
                    .with_help("the path is relative to the document's folder"),
            );
            Vec::new()
        }
    }
}

/// A file that predict or export will write must stay inside the project too.
fn check_writes(
    block: &StepBlock,
    spec: &StepSpec,
    place: &Place<'_>,
    problems: &mut Vec<Problem>,
) {
    let written = match spec {
        StepSpec::Predict(predict) => predict.write.as_ref(),
        StepSpec::Export(export) => Some(&export.write),
        _ => None,
    };
    if let (Some(written), Some(root)) = (written, &place.root)
        && !confine::is_writable_inside(&place.base_dir.join(written), root)
    {
        problems.push(
                Problem::new(
                    setting_span(block, "write"),
                    format!("'{written}' is outside this document's project ({})", root.display()),
                )
                .with_help("a document writes only under its project folder; pass --allow-outside if you trust it"),
            );
    }
}

fn check_widths(
    block: &StepBlock,
    hidden: &[usize],
    limits: Limits,
    prefix: &str,
    problems: &mut Vec<Problem>,
) {
    if let Some(&width) = hidden.iter().find(|&&w| w > limits.max_layer_width) {
        let setting = if prefix.is_empty() { "hidden" } else { "vary" };
        problems.push(
            Problem::new(
                setting_span(block, setting),
                format!(
                    "{prefix}a hidden layer of {width} units is wider than the limit of {}",
                    limits.max_layer_width
                ),
            )
            .with_help("raise the limit with --max-layer-width"),
        );
    }
}

/// A sweep's size and its combinations' widths, against the limits.
fn check_sweep_size(
    block: &StepBlock,
    step: &PlannedStep,
    limits: Limits,
    problems: &mut Vec<Problem>,
) {
    if step.kind != StepKind::Sweep {
        return;
    }
    let runs: usize = step.fits.iter().map(|fit| fit.runs.len()).sum();
    if runs > limits.max_sweep_runs {
        problems.push(
            Problem::new(
                setting_span(block, "vary"),
                format!(
                    "this sweep asks for {runs} training runs ({} combinations), over the limit of {}",
                    step.fits.len(),
                    limits.max_sweep_runs
                ),
            )
            .with_help("raise the limit with --max-sweep-runs"),
        );
        return;
    }
    for fit in &step.fits {
        let prefix = format!("with {}: ", describe(&fit.settings));
        check_widths(block, &fit.net.hidden, limits, &prefix, problems);
    }
}

/// Kahn's algorithm, taking ready steps in document order so the order is stable.
/// The step kinds only ever read kinds that cannot read back, so there is no cycle.
fn execution_order(steps: &[PlannedStep]) -> Vec<usize> {
    let mut done = vec![false; steps.len()];
    let mut order = Vec::with_capacity(steps.len());
    while order.len() < steps.len() {
        let ready = (0..steps.len())
            .find(|&i| !done[i] && steps[i].upstream.iter().all(|&u| done[u]))
            .expect("step references form no cycle");
        done[ready] = true;
        order.push(ready);
    }
    order
}

/// The fits of a train step (its own settings) or a sweep (one per combination, each
/// checked as if its values were written in the base train and net steps).
fn fits(
    steps: &[PlannedStep],
    blocks: &[&StepBlock],
    index: usize,
    default_seed: u64,
    problems: &mut Vec<Problem>,
) -> Vec<FitPlan> {
    let step = &steps[index];
    match &step.spec {
        StepSpec::Train(train) => {
            let StepSpec::Net(net) = &steps[step.upstream[1]].spec else {
                unreachable!("references were checked")
            };
            vec![fit_plan(
                steps,
                step.upstream[0],
                Vec::new(),
                net.clone(),
                train.clone(),
                1,
            )]
        }
        StepSpec::Sweep(sweep) => {
            let base = step.upstream[0];
            let (data, net) = (steps[base].upstream[0], steps[base].upstream[1]);
            let span = setting_span(blocks[index], "vary");
            sweep
                .combinations()
                .iter()
                .filter_map(|combination| {
                    let (net, train) = variant(
                        blocks[base],
                        blocks[net],
                        combination,
                        default_seed,
                        span.clone(),
                        problems,
                    )?;
                    let settings = settings_text(combination);
                    Some(fit_plan(steps, data, settings, net, train, sweep.repeat))
                })
                .collect()
        }
        _ => Vec::new(),
    }
}

fn fit_plan(
    steps: &[PlannedStep],
    data: usize,
    settings: Vec<(String, String)>,
    net: NetSpec,
    train: TrainSpec,
    repeat: usize,
) -> FitPlan {
    let StepSpec::Data(data_spec) = &steps[data].spec else {
        unreachable!("references were checked")
    };
    let partitions = match data_spec.settings.split {
        Split::Holdout(_) => 1,
        Split::Folds(folds) => folds,
    };
    let mut runs = Vec::new();
    for r in 0..repeat as u64 {
        // The first repeat is the train step's own seed, so it shares the train's entry.
        let seed = train.seed.wrapping_add(r);
        let seeded = TrainSpec {
            seed,
            ..train.clone()
        };
        for partition in 0..partitions {
            runs.push(RunPlan {
                key: run_key(&steps[data].key, &net, &seeded, partition),
                partition,
                seed,
            });
        }
    }
    FitPlan {
        settings,
        data,
        net,
        train,
        runs,
    }
}

/// A run's key depends on what it computes, not on step names, so identical runs in
/// different steps share one entry.
pub fn run_key(data_key: &str, net: &NetSpec, train: &TrainSpec, partition: usize) -> Key {
    let settings = TrainSpec {
        data: String::new(),
        net: String::new(),
        ..train.clone()
    };
    let mut hasher = blake3::Hasher::new();
    hasher.update(&CACHE_FORMAT_VERSION.to_le_bytes());
    hasher.update(b"run\0");
    hasher.update(data_key.as_bytes());
    hasher.update(&serde_json::to_vec(&(net, &settings, partition)).expect("specs serialise"));
    hasher.finalize().to_hex().to_string()
}

/// BLAKE3 over the format version, the kind, the canonical settings, the upstream
/// keys and the hash of every file read. Prose never enters.
fn step_key(step: &PlannedStep, upstream_keys: &[Key]) -> Key {
    let mut hasher = blake3::Hasher::new();
    hasher.update(&CACHE_FORMAT_VERSION.to_le_bytes());
    hasher.update(step.kind.word().as_bytes());
    hasher.update(b"\0");
    let settings = serde_json::to_vec(&step.spec).expect("specs serialise");
    hasher.update(&(settings.len() as u64).to_le_bytes());
    hasher.update(&settings);
    for key in upstream_keys {
        hasher.update(key.as_bytes());
    }
    for file in &step.files {
        hasher.update(file.hash.as_bytes());
    }
    hasher.finalize().to_hex().to_string()
}
