//! A record, kept in the cache, of what each document's last build computed for each
//! step id, so that `stet status` can say why a step will run again, and of the cache
//! entries that build used, so that `stet clean` keeps what other documents use.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::cache::{Cache, EntryKind, entry_name};
use crate::document::StepKind;
use crate::plan::{Key, Plan, PlannedStep};

/// What went into one step's key at the last build.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct StepInputs {
    pub key: Key,
    pub settings: String,
    pub files: Vec<String>,
    pub upstream: Vec<Key>,
}

impl StepInputs {
    pub(crate) fn of(plan: &Plan, step: &PlannedStep) -> StepInputs {
        let settings = serde_json::to_vec(&step.spec).expect("specs serialise");
        StepInputs {
            key: step.key.clone(),
            settings: blake3::hash(&settings).to_hex().to_string(),
            files: step
                .files
                .iter()
                .map(|f| f.hash.to_hex().to_string())
                .collect(),
            upstream: step
                .upstream
                .all()
                .into_iter()
                .map(|u| plan.steps[u].key.clone())
                .collect(),
        }
    }
}

/// Step id → its inputs at the last build of one document, and the entries it used.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub(crate) struct Manifest {
    pub steps: BTreeMap<String, StepInputs>,
    /// File names of the cache entries the build used (see `entries_of`). Records
    /// written before this list existed read as using none.
    #[serde(default)]
    pub entries: BTreeSet<String>,
}

/// The file names of every cache entry a plan's steps use: their results, and a data
/// step's prepared matrices, and each fit's judgement and references.
pub(crate) fn entries_of(plan: &Plan) -> BTreeSet<String> {
    let mut names = BTreeSet::new();
    for step in &plan.steps {
        for (key, kind) in step.result_entries() {
            names.insert(entry_name(key, kind));
        }
        if step.kind == StepKind::Data {
            names.insert(entry_name(&step.key, EntryKind::Prepared));
        }
        for (key, kind) in step.judge_entries(&plan.steps) {
            names.insert(entry_name(&key, kind));
        }
    }
    names
}

/// Where a document's record lives in the cache.
pub(crate) fn record_path(cache: &Cache, document: &Path) -> Option<PathBuf> {
    let canonical = document
        .canonicalize()
        .unwrap_or_else(|_| document.to_path_buf());
    let name = blake3::hash(canonical.to_string_lossy().as_bytes()).to_hex();
    Some(
        cache
            .dir()?
            .join("documents")
            .join(format!("{}.json", &name[..32])),
    )
}

/// The manifest of a document's last build, if there was one.
pub(crate) fn load(cache: &Cache, document: &Path) -> Manifest {
    record_path(cache, document)
        .and_then(|path| std::fs::read(path).ok())
        .and_then(|bytes| serde_json::from_slice(&bytes).ok())
        .unwrap_or_default()
}

/// Records a build; failing to write it only loses `status` reasons, so it is silent.
pub(crate) fn store(cache: &Cache, document: &Path, plan: &Plan) {
    let Some(path) = record_path(cache, document) else {
        return;
    };
    let manifest = Manifest {
        steps: plan
            .steps
            .iter()
            .map(|step| (step.id.clone(), StepInputs::of(plan, step)))
            .collect(),
        entries: entries_of(plan),
    };
    let bytes = serde_json::to_vec_pretty(&manifest).expect("a manifest serialises");
    let _ = crate::cache::atomic::write(&path, &bytes);
}

/// A record that exists but cannot be read, so what its document uses is unknown.
#[derive(Debug, thiserror::Error)]
#[error("cannot read the build record {}: {reason}", path.display())]
pub(crate) struct UnreadableRecord {
    pub path: PathBuf,
    pub reason: String,
}

/// Every build record in the cache, by path. Anything in the records' folder that is
/// not a `.json` file is not a record and is passed over.
pub(crate) fn records(cache: &Cache) -> Result<Vec<(PathBuf, Manifest)>, UnreadableRecord> {
    let Some(dir) = cache.dir().map(|d| d.join("documents")) else {
        return Ok(Vec::new());
    };
    let Ok(listing) = std::fs::read_dir(&dir) else {
        return Ok(Vec::new());
    };
    let mut found = Vec::new();
    for item in listing {
        let path = item
            .map_err(|error| UnreadableRecord {
                path: dir.clone(),
                reason: error.to_string(),
            })?
            .path();
        if path.extension().is_some_and(|e| e == "json") && path.is_file() {
            let manifest = read_record(&path)?;
            found.push((path, manifest));
        }
    }
    Ok(found)
}

fn read_record(path: &Path) -> Result<Manifest, UnreadableRecord> {
    let unreadable = |reason: String| UnreadableRecord {
        path: path.to_path_buf(),
        reason,
    };
    let bytes = std::fs::read(path).map_err(|e| unreadable(e.to_string()))?;
    serde_json::from_slice(&bytes).map_err(|e| unreadable(e.to_string()))
}
