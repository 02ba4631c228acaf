//! A record, kept in the cache, of what each document's last build computed for each
//! step id, so that `stet status` can say why a step will run again.

use std::collections::BTreeMap;
use std::path::Path;

use serde::{Deserialize, Serialize};

use crate::cache::Cache;
use crate::plan::{Key, Plan, PlannedStep};

/// What went into one step's key at the last build.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct StepInputs {
    pub key: Key,
    pub settings: String,
    pub files: Vec<String>,
    pub upstream: Vec<Key>,
}

impl StepInputs {
    pub fn of(plan: &Plan, step: &PlannedStep) -> StepInputs {
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

/// Step id → its inputs at the last build of one document.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Manifest {
    pub steps: BTreeMap<String, StepInputs>,
}

fn path_for(cache: &Cache, document: &Path) -> Option<std::path::PathBuf> {
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
pub fn load(cache: &Cache, document: &Path) -> Manifest {
    path_for(cache, document)
        .and_then(|path| std::fs::read(path).ok())
        .and_then(|bytes| serde_json::from_slice(&bytes).ok())
        .unwrap_or_default()
}

/// Records a build; failing to write it only loses `status` reasons, so it is silent.
pub fn store(cache: &Cache, document: &Path, plan: &Plan) {
    let Some(path) = path_for(cache, document) else {
        return;
    };
    let manifest = Manifest {
        steps: plan
            .steps
            .iter()
            .map(|step| (step.id.clone(), StepInputs::of(plan, step)))
            .collect(),
    };
    let bytes = serde_json::to_vec_pretty(&manifest).expect("a manifest serialises");
    let _ = crate::atomic::write(&path, &bytes);
}
