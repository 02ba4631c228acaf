//! Cache keys: every step key and run key starts from the engine (the cache format
//! and the crate version), so results of another engine never answer for this one's.

use crate::document::spec::{NetSpec, StepKind, TrainSpec};

use super::{Key, PlannedStep};

/// Bumped whenever the meaning of a cached result changes, so old entries miss.
/// 2: entries' checksums cover their names, and keys hold the crate version.
/// 3: a run stores its metrics on validation rows, a prepared partition its
///    validation rows and a data summary their counts (all empty without
///    `validation`), and a data step's summary carries its data card (column
///    statistics and warnings), so version 2 entries no longer decode.
/// 4: a run keeps its held-out outputs, for the paired tests of issue 14.
/// 5: a prepared partition carries its target scaler (`scale_target`), and a
///    regression run trains on scaled targets by default.
/// 6: a run keeps how each validation row went, for the paired tests of a sweep
///    ranked on validation rows, and its inputs' permutation importance.
pub(crate) const CACHE_FORMAT_VERSION: u32 = 6;

/// Bumped whenever a predict step's cached result changes shape. It enters predict
/// keys only, so a change to predict does not throw away every trained run.
/// 1: a predict result keeps its rows' identifying cells and, when its file holds
///    the targets, the labelled rows' scores (issue 15).
const PREDICT_FORMAT_VERSION: u32 = 1;

/// A run's key depends on what it computes, not on step names, so identical runs in
/// different steps share one entry.
pub(super) fn run_key(data_key: &str, net: &NetSpec, train: &TrainSpec, partition: usize) -> Key {
    let settings = TrainSpec {
        data: String::new(),
        net: String::new(),
        ..train.clone()
    };
    let mut hasher = engine_hasher();
    hasher.update(b"run\0");
    hasher.update(data_key.as_bytes());
    hasher.update(&serde_json::to_vec(&(net, &settings, partition)).expect("specs serialise"));
    hasher.finalize().to_hex().to_string()
}

/// The key of a partition's baseline and model without a hidden layer: its data and
/// partition, never a network, so every fit on those rows shares one entry.
pub(crate) fn reference_key(data_key: &str, partition: usize) -> Key {
    let mut hasher = engine_hasher();
    hasher.update(b"reference\0");
    hasher.update(&crate::judge::JUDGE_VERSION.to_le_bytes());
    hasher.update(data_key.as_bytes());
    hasher.update(&(partition as u64).to_le_bytes());
    hasher.finalize().to_hex().to_string()
}

/// The key of a fit's judgement: the runs it reads (each naming its data and
/// partition) and the seed of its bootstrap.
pub(crate) fn judgement_key<'a>(run_keys: impl Iterator<Item = &'a Key>, seed: u64) -> Key {
    let mut hasher = engine_hasher();
    hasher.update(b"judgement\0");
    hasher.update(&crate::judge::JUDGE_VERSION.to_le_bytes());
    hasher.update(&seed.to_le_bytes());
    for key in run_keys {
        hasher.update(key.as_bytes());
    }
    hasher.finalize().to_hex().to_string()
}

/// The start of every key: the cache format and the crate version, so that results
/// of another engine (whose numbers may differ) never answer for this one's, even
/// when nobody remembered to bump `CACHE_FORMAT_VERSION`.
fn engine_hasher() -> blake3::Hasher {
    let mut hasher = blake3::Hasher::new();
    hasher.update(&CACHE_FORMAT_VERSION.to_le_bytes());
    hasher.update(env!("CARGO_PKG_VERSION").as_bytes());
    hasher.update(b"\0");
    hasher
}

/// BLAKE3 over the engine, the kind, the canonical settings, the upstream keys and
/// the hash of every file read. Prose never enters.
pub(super) fn step_key(step: &PlannedStep, upstream_keys: &[Key]) -> Key {
    let mut hasher = engine_hasher();
    hasher.update(step.kind.word().as_bytes());
    hasher.update(b"\0");
    if step.kind == StepKind::Predict {
        hasher.update(&PREDICT_FORMAT_VERSION.to_le_bytes());
    }
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
