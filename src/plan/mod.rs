//! The step graph: parsed specs, references resolved, execution order, file inputs
//! hashed, and each step's cache key (`keys`). Each train step's and sweep's fits and
//! runs are listed in `fits`; the rules for files a document reads and writes are in
//! `confinement`, `input_file` and `outputs`; checks of settings against their
//! upstream steps in `checks`.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

mod checks;
mod confinement;
mod fits;
pub(crate) mod input_file;
pub(crate) mod keys;
pub(crate) mod outputs;

use crate::cache::EntryKind;
use crate::document::problem::nearest;
use crate::document::spec::sweep::Varied;
pub use crate::document::spec::sweep::describe;
use crate::document::spec::{NetSpec, ParsedStep, TrainSpec, Written, key_span, parse_step};
use crate::document::{Document, Problem, StepBlock, StepKind, StepSpec};
use fits::fits;
use input_file::InputFile;
use keys::step_key;

use outputs::Output;

/// A step's cache key: the BLAKE3 hash of everything its result depends on, in hex.
pub(crate) type Key = String;

/// The first 10 hex digits of a key, as shown in reports and `stet status`.
pub(crate) fn short_key(key: &str) -> &str {
    &key[..10.min(key.len())]
}

/// One step, ready to run.
#[derive(Clone, Debug)]
pub struct PlannedStep {
    pub id: String,
    pub kind: StepKind,
    pub(crate) spec: StepSpec,
    /// The settings its block wrote (the rest are defaults).
    pub(crate) written: Written,
    /// Index of the step's block among the document's pieces.
    pub(crate) piece: usize,
    /// The steps this one reads, each named by the setting that names it.
    pub upstream: Upstream,
    pub(crate) files: Vec<InputFile>,
    /// The file a predict or export step writes, checked against every other use.
    pub(crate) output: Option<Output>,
    pub key: Key,
    /// The networks a train step (one) or a sweep (one per combination) fits.
    pub fits: Vec<FitPlan>,
}

/// The steps a step reads, as indices into `Plan::steps`, named by the setting that
/// names each: a plan holds one only when every reference resolved to a step of the
/// right kind, so no stage reads an upstream step by position.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Upstream {
    /// Data and net steps read no other step.
    Nothing,
    Train {
        data: usize,
        net: usize,
    },
    Sweep {
        from: usize,
    },
    Compare {
        runs: Vec<usize>,
    },
    /// Predict and export: the train step whose model they use, or the sweep whose
    /// best combination they use.
    Model {
        model: usize,
    },
}

impl Upstream {
    /// Every step read, in the order their keys enter this step's key.
    pub fn all(&self) -> Vec<usize> {
        match self {
            Upstream::Nothing => Vec::new(),
            Upstream::Train { data, net } => vec![*data, *net],
            Upstream::Sweep { from } => vec![*from],
            Upstream::Compare { runs } => runs.clone(),
            Upstream::Model { model } => vec![*model],
        }
    }
}

/// One setting of net and train values, fitted once per seed and partition.
#[derive(Clone, Debug)]
pub struct FitPlan {
    /// The varied settings and their values (empty for a train step).
    pub settings: Vec<Varied>,
    /// Index of the data step the runs read.
    pub(crate) data: usize,
    pub(crate) net: NetSpec,
    pub train: TrainSpec,
    pub runs: Vec<RunPlan>,
}

impl FitPlan {
    /// The runs a judgement reads: on each partition, the first seed's.
    pub(crate) fn judged_runs(&self) -> Vec<&RunPlan> {
        let mut seen = std::collections::BTreeSet::new();
        self.runs
            .iter()
            .filter(|run| seen.insert(run.partition))
            .collect()
    }

    /// The key of this fit's judgement; its bootstrap draws from the first run's seed.
    pub(crate) fn judgement_key(&self) -> Key {
        let runs = self.judged_runs();
        keys::judgement_key(runs.iter().map(|run| &run.key), runs[0].seed)
    }
}

/// One network to fit: a seed on one partition.
#[derive(Clone, Debug)]
pub struct RunPlan {
    pub key: Key,
    pub(crate) partition: usize,
    pub(crate) seed: u64,
}

impl PlannedStep {
    /// The data and net steps of a train step; `None` for every other kind.
    pub(crate) fn train_inputs(&self) -> Option<(usize, usize)> {
        match self.upstream {
            Upstream::Train { data, net } => Some((data, net)),
            _ => None,
        }
    }

    /// The cache entries of each fit's judgement and of the references it reads
    /// (`judge`): kept by `clean`, recomputed when missing without retraining.
    pub(crate) fn judge_entries(&self, steps: &[PlannedStep]) -> Vec<(Key, EntryKind)> {
        let mut entries = Vec::new();
        for fit in &self.fits {
            entries.push((fit.judgement_key(), EntryKind::Judgement));
            for run in fit.judged_runs() {
                let key = keys::reference_key(&steps[fit.data].key, run.partition);
                entries.push((key, EntryKind::Reference));
            }
        }
        entries
    }

    /// The cache entries that hold this step's result: all present means a build
    /// reuses it. (A data step also keeps its prepared matrices, loaded only to train.)
    pub(crate) fn result_entries(&self) -> Vec<(&str, EntryKind)> {
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
    /// The limits the plan was made under; a run checks against them what only the
    /// data decides (the network's input and output widths).
    pub(crate) limits: Limits,
}

/// Whether `file` lies inside the project of the document in `document_dir`, links
/// resolved: the report embeds only such images, whatever `--allow-outside` says.
pub(crate) fn inside_project(document_dir: &Path, file: &Path) -> bool {
    confinement::is_inside(file, &confinement::project_root(document_dir))
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
    /// Most hidden layers a network may have.
    pub max_layers: usize,
    /// Most weights and biases a network may have, input and output layers included.
    pub max_weights: u64,
    /// Most training runs one sweep may ask for (combinations × seeds × folds).
    pub max_sweep_runs: usize,
    /// Most row passes (runs × epochs × rows of the data file) one train step or
    /// sweep may ask for.
    pub max_work: u64,
    /// Largest file a step may read, in bytes.
    pub max_file_bytes: u64,
    /// Most distinct texts a text input, or classes a target, may have.
    pub max_categories: usize,
}

impl Default for Limits {
    fn default() -> Limits {
        Limits {
            max_layer_width: 4096,
            // Feed-forward networks for tabular data rarely pass ten hidden layers.
            max_layers: 100,
            // Training keeps some six copies of every weight (the network, gradients,
            // optimizer state, the best epoch's network), 8 bytes each: about 1 GB
            // per run here, with a run per job in parallel. Two hidden layers of the
            // widest default width (4096² ≈ 16.8 million) still fit.
            max_weights: 20_000_000,
            max_sweep_runs: 2000,
            // A laptop core makes some 10⁷ row passes a second through a small
            // network, so this is hours of training, not years; a full default
            // sweep (2000 runs × 1000 epochs) stays under it up to 50,000 rows.
            max_work: 100_000_000_000,
            max_file_bytes: 1 << 30,
            max_categories: crate::data::DEFAULT_MAX_CATEGORIES,
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
pub(crate) fn plan(
    document: &Document,
    base_dir: &Path,
    options: &PlanOptions,
) -> Result<Plan, Vec<Problem>> {
    let default_seed = document.front.seed.unwrap_or(0);
    let mut problems = Vec::new();
    let place = Place {
        base_dir,
        root: (!options.allow_outside).then(|| confinement::project_root(base_dir)),
        limits: options.limits,
    };
    let mut parsed: Vec<(usize, &StepBlock, ParsedStep)> = Vec::new();
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
        if let Some(step) = parse_step(block, default_seed, &mut problems) {
            parsed.push((piece, block, step));
        }
    }

    let kinds: HashMap<&str, StepKind> =
        document.steps().map(|b| (b.id.as_str(), b.kind)).collect();
    let index: HashMap<&str, usize> = parsed
        .iter()
        .enumerate()
        .map(|(i, (_, b, _))| (b.id.as_str(), i))
        .collect();
    let found = |id: &str, wanted: &[StepKind]| {
        index
            .get(id)
            .copied()
            .filter(|&i| wanted.contains(&parsed[i].1.kind))
    };
    let mut checked = Vec::new();
    for (_, block, ParsedStep { spec, .. }) in &parsed {
        check_references(document, block, spec, &kinds, &mut problems);
        let files = read_files(block, spec, &place, &mut problems);
        let output = check_writes(block, spec, &place, &mut problems);
        if let StepSpec::Net(net) = spec {
            check_net_size(block, &net.hidden, options.limits, "", &mut problems);
        }
        checked.push((upstream_of(spec, found), files, output));
    }
    // Keys and fits read every upstream step, so nothing past here runs on a document
    // with a problem; a reference left unresolved without a problem of its own names
    // a block whose header the parser already reported.
    let resolved: Option<Vec<_>> = checked
        .into_iter()
        .map(|(upstream, files, output)| Some((upstream?, files, output)))
        .collect();
    let Some(resolved) = resolved.filter(|_| problems.is_empty()) else {
        return Err(problems);
    };
    let mut steps: Vec<PlannedStep> = parsed
        .iter()
        .zip(resolved)
        .map(
            |((piece, block, parsed), (upstream, files, output))| PlannedStep {
                id: block.id.clone(),
                kind: block.kind,
                spec: parsed.spec.clone(),
                written: parsed.written.clone(),
                piece: *piece,
                upstream,
                files,
                output,
                key: String::new(),
                fits: Vec::new(),
            },
        )
        .collect();
    for (index, refusal) in outputs::step_clashes(&steps) {
        problems.push(refusal.at(setting_span(parsed[index].1, "write")));
    }
    if !problems.is_empty() {
        return Err(problems);
    }
    let order = execution_order(&steps);
    for &i in &order {
        let upstream_keys: Vec<Key> = steps[i]
            .upstream
            .all()
            .into_iter()
            .map(|u| steps[u].key.clone())
            .collect();
        steps[i].key = step_key(&steps[i], &upstream_keys);
    }
    let blocks: Vec<&StepBlock> = parsed.iter().map(|(_, block, _)| *block).collect();
    for i in 0..steps.len() {
        steps[i].fits = fits(
            &steps,
            &blocks,
            i,
            default_seed,
            options.limits,
            &mut problems,
        );
    }
    checks::check(document, &steps, options.limits, &mut problems);
    if !problems.is_empty() {
        return Err(problems);
    }
    Ok(Plan {
        steps,
        order,
        limits: options.limits,
    })
}

/// Each id the step reads names a step of a kind it may read; problems otherwise.
fn check_references(
    document: &Document,
    block: &StepBlock,
    spec: &StepSpec,
    kinds: &HashMap<&str, StepKind>,
    problems: &mut Vec<Problem>,
) {
    for reference in spec.references() {
        let (id, setting) = (reference.id, reference.setting);
        match kinds.get(id) {
            // A block whose info string was unreadable already has its problem.
            None if document.unreadable_ids.iter().any(|u| u == id) => {}
            None => problems.push(missing_reference(block, setting, id, kinds)),
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
            Some(_) => {}
        }
    }
}

/// The steps `spec` reads, each looked up by name with the kinds it may be; `None`
/// when any of them is not a parsed step of such a kind.
fn upstream_of(
    spec: &StepSpec,
    found: impl Fn(&str, &[StepKind]) -> Option<usize>,
) -> Option<Upstream> {
    use crate::document::spec::MODEL_KINDS as MODELS;
    Some(match spec {
        StepSpec::Data(_) | StepSpec::Net(_) => Upstream::Nothing,
        StepSpec::Train(train) => Upstream::Train {
            data: found(&train.data, &[StepKind::Data])?,
            net: found(&train.net, &[StepKind::Net])?,
        },
        StepSpec::Sweep(sweep) => Upstream::Sweep {
            from: found(&sweep.from, &[StepKind::Train])?,
        },
        StepSpec::Compare(compare) => Upstream::Compare {
            runs: compare
                .runs
                .iter()
                .map(|id| found(id, &[StepKind::Train, StepKind::Sweep]))
                .collect::<Option<_>>()?,
        },
        StepSpec::Predict(predict) => Upstream::Model {
            model: found(&predict.model, MODELS)?,
        },
        StepSpec::Export(export) => Upstream::Model {
            model: found(&export.model, MODELS)?,
        },
    })
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
pub(super) fn setting_span(block: &StepBlock, setting: &str) -> std::ops::Range<usize> {
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
        && !confinement::is_inside(&path, root)
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
    let shown = path.display().to_string();
    match InputFile::planned(written, path, limit) {
        Ok(file) => vec![file],
        Err(error) => {
            problems.push(
                Problem::new(span, format!("cannot read '{shown}': {error}"))
                    .with_help(error.help()),
            );
            Vec::new()
        }
    }
}

/// The file a predict or export step will write, resolved and checked (`outputs`).
fn check_writes(
    block: &StepBlock,
    spec: &StepSpec,
    place: &Place<'_>,
    problems: &mut Vec<Problem>,
) -> Option<Output> {
    let written = match spec {
        StepSpec::Predict(predict) => predict.write.as_ref(),
        StepSpec::Export(export) => Some(&export.write),
        _ => None,
    }?;
    match outputs::step_output(place.base_dir, written, place.root.as_deref()) {
        Ok(path) => Some(Output {
            path,
            written: written.clone(),
        }),
        Err(refusal) => {
            problems.push(refusal.at(setting_span(block, "write")));
            None
        }
    }
}

/// A network's hidden layers against the width, depth and weight limits. The
/// weights between hidden layers are counted here; those to the inputs and outputs
/// depend on the data and are checked when the run's shape is known.
pub(super) fn check_net_size(
    block: &StepBlock,
    hidden: &[usize],
    limits: Limits,
    prefix: &str,
    problems: &mut Vec<Problem>,
) {
    let setting = if prefix.is_empty() { "hidden" } else { "vary" };
    let mut exceeds = |message: String, flag: &str| {
        problems.push(
            Problem::new(setting_span(block, setting), format!("{prefix}{message}"))
                .with_help(format!("raise the limit with {flag}")),
        );
    };
    if let Some(&width) = hidden.iter().find(|&&w| w > limits.max_layer_width) {
        exceeds(
            format!(
                "a hidden layer of {width} units is wider than the limit of {}",
                limits.max_layer_width
            ),
            "--max-layer-width",
        );
    } else if hidden.len() > limits.max_layers {
        exceeds(
            format!(
                "{} hidden layers are more than the limit of {}",
                hidden.len(),
                limits.max_layers
            ),
            "--max-layers",
        );
    } else if weights_between(hidden) > u128::from(limits.max_weights) {
        exceeds(
            format!(
                "the hidden layers alone hold {} weights, over the limit of {}",
                weights_between(hidden),
                limits.max_weights
            ),
            "--max-weights",
        );
    }
}

/// Weights and biases between consecutive layers of sizes `sizes` (in a type wide
/// enough that no list of widths overflows it).
pub(crate) fn weights_between(sizes: &[usize]) -> u128 {
    sizes
        .windows(2)
        .map(|pair| (pair[0] as u128 + 1) * pair[1] as u128)
        .sum()
}

/// Kahn's algorithm, taking ready steps in document order so the order is stable.
/// The step kinds only ever read kinds that cannot read back, so there is no cycle.
fn execution_order(steps: &[PlannedStep]) -> Vec<usize> {
    let mut done = vec![false; steps.len()];
    let mut order = Vec::with_capacity(steps.len());
    while order.len() < steps.len() {
        let ready = (0..steps.len())
            .find(|&i| !done[i] && steps[i].upstream.all().into_iter().all(|u| done[u]))
            .expect("step references form no cycle");
        done[ready] = true;
        order.push(ready);
    }
    order
}
