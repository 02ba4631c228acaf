//! Pruning, for `stet clean`: remove the cache entries that no named document uses.

use std::collections::HashSet;
use std::path::{Path, PathBuf};

use crate::cache::{Cache, EntryKind};
use crate::document::StepKind;
use crate::plan::Plan;

/// What a clean removed.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Freed {
    pub entries: usize,
    pub bytes: u64,
}

/// Every entry path the plans' steps use.
pub fn used_entries(plans: &[&Plan], cache: &Cache) -> HashSet<PathBuf> {
    let mut used = HashSet::new();
    for plan in plans {
        for step in &plan.steps {
            let entries = step.result_entries();
            used.extend(
                entries
                    .iter()
                    .filter_map(|(key, kind)| cache.entry_path(key, *kind)),
            );
            if step.kind == StepKind::Data {
                used.extend(cache.entry_path(&step.key, EntryKind::Prepared));
            }
        }
    }
    used
}

/// Removes every entry not in `keep` (all of them when `keep` is `None`), and any
/// temporary file a killed writer left behind.
pub fn remove_unused(cache_dir: &Path, keep: Option<&HashSet<PathBuf>>) -> std::io::Result<Freed> {
    let mut freed = Freed::default();
    let entries = cache_dir.join("entries");
    if !entries.is_dir() {
        return Ok(freed);
    }
    for shard in std::fs::read_dir(&entries)? {
        let shard = shard?.path();
        if !shard.is_dir() {
            continue;
        }
        for entry in std::fs::read_dir(&shard)? {
            let path = entry?.path();
            if keep.is_some_and(|keep| keep.contains(&path)) {
                continue;
            }
            let bytes = std::fs::metadata(&path).map_or(0, |m| m.len());
            std::fs::remove_file(&path)?;
            freed.entries += 1;
            freed.bytes += bytes;
        }
        // An emptied shard folder goes too; one still in use is left.
        let _ = std::fs::remove_dir(&shard);
    }
    if keep.is_none() {
        let _ = std::fs::remove_dir_all(cache_dir.join("documents"));
    }
    Ok(freed)
}
