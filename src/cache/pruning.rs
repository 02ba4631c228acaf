//! Pruning, for `stet clean`: remove the cache entries that no document still uses.
//! Only files named as entries (and temporary files of interrupted writes) are ever
//! removed; anything else found in the cache is passed over and named.

use std::collections::HashSet;
use std::fs;
use std::path::{Path, PathBuf};

use crate::cache::manifest::{self, UnreadableRecord};
use crate::cache::{Cache, is_entry_name, is_leftover_name};
use crate::plan::Plan;

/// A file a clean removed (or, in a dry run, would remove).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Removal {
    pub path: PathBuf,
    pub bytes: u64,
}

/// Something in the cache a clean left where it was, and why.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Skipped {
    pub path: PathBuf,
    pub reason: String,
}

/// What a clean removed (or would remove) and what it passed over.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Cleaning {
    pub removed: Vec<Removal>,
    pub skipped: Vec<Skipped>,
}

impl Cleaning {
    pub fn bytes(&self) -> u64 {
        self.removed.iter().map(|r| r.bytes).sum()
    }

    fn skip(&mut self, path: PathBuf, reason: impl Into<String>) {
        self.skipped.push(Skipped {
            path,
            reason: reason.into(),
        });
    }
}

/// The entry names a clean of the `named` documents keeps: every entry their current
/// plans use, and every entry the build record of any *other* document lists. The
/// named documents' own records do not protect anything, so what only their earlier
/// builds used goes.
pub(crate) fn entries_in_use(
    cache: &Cache,
    named: &[PathBuf],
    plans: &[&Plan],
) -> Result<HashSet<String>, UnreadableRecord> {
    let named_records: HashSet<PathBuf> = named
        .iter()
        .filter_map(|document| manifest::record_path(cache, document))
        .collect();
    let mut keep: HashSet<String> = plans
        .iter()
        .flat_map(|plan| manifest::entries_of(plan))
        .collect();
    for (path, record) in manifest::records(cache)? {
        if !named_records.contains(&path) {
            keep.extend(record.entries);
        }
    }
    Ok(keep)
}

/// Removes every entry whose name is not in `keep` (all of them, and every build
/// record, when `keep` is `None`) and any temporary file a killed writer left behind.
/// With `dry_run` nothing is removed; the result lists what would be.
pub(crate) fn remove_unused(
    cache_dir: &Path,
    keep: Option<&HashSet<String>>,
    dry_run: bool,
) -> Cleaning {
    let mut cleaning = Cleaning::default();
    let entries = cache_dir.join("entries");
    if entries.is_dir() {
        for shard in listing(&entries, &mut cleaning) {
            if shard.file_type.is_dir() {
                prune_shard(&shard.path, keep, dry_run, &mut cleaning);
                if !dry_run {
                    // An emptied shard folder goes too; one still in use is left.
                    let _ = fs::remove_dir(&shard.path);
                }
            } else {
                cleaning.skip(shard.path, "not a folder of cache entries");
            }
        }
    }
    if keep.is_none() {
        remove_records(&cache_dir.join("documents"), dry_run, &mut cleaning);
    }
    cleaning
}

/// One item of a folder, with its type as stored (a link is a link, never followed).
struct Item {
    path: PathBuf,
    name: String,
    file_type: fs::FileType,
}

/// A folder's items; what cannot be listed is skipped and named.
fn listing(dir: &Path, cleaning: &mut Cleaning) -> Vec<Item> {
    let read = match fs::read_dir(dir) {
        Ok(read) => read,
        Err(error) => {
            cleaning.skip(dir.to_path_buf(), format!("cannot list it: {error}"));
            return Vec::new();
        }
    };
    let mut items = Vec::new();
    for item in read {
        match item.and_then(|item| Ok((item.path(), item.file_type()?))) {
            Ok((path, file_type)) => items.push(Item {
                name: path
                    .file_name()
                    .map_or(String::new(), |n| n.to_string_lossy().into_owned()),
                path,
                file_type,
            }),
            Err(error) => cleaning.skip(dir.to_path_buf(), format!("cannot list it: {error}")),
        }
    }
    items
}

fn prune_shard(
    shard: &Path,
    keep: Option<&HashSet<String>>,
    dry_run: bool,
    cleaning: &mut Cleaning,
) {
    for item in listing(shard, cleaning) {
        match verdict(&item, keep) {
            Verdict::Remove => remove(item.path, dry_run, cleaning),
            Verdict::Keep => {}
            Verdict::NotAnEntry => cleaning.skip(item.path, "not a cache entry"),
        }
    }
}

enum Verdict {
    Remove,
    Keep,
    /// A folder, a link, or a file named unlike any entry: not the cache's to remove.
    NotAnEntry,
}

fn verdict(item: &Item, keep: Option<&HashSet<String>>) -> Verdict {
    if !item.file_type.is_file() {
        Verdict::NotAnEntry
    } else if is_leftover_name(&item.name) {
        Verdict::Remove
    } else if !is_entry_name(&item.name) {
        Verdict::NotAnEntry
    } else if keep.is_some_and(|keep| keep.contains(&item.name)) {
        Verdict::Keep
    } else {
        Verdict::Remove
    }
}

/// Build records go only with the whole cache.
fn remove_records(dir: &Path, dry_run: bool, cleaning: &mut Cleaning) {
    if !dir.is_dir() {
        return;
    }
    for item in listing(dir, cleaning) {
        if item.file_type.is_file() && item.name.ends_with(".json") {
            if !dry_run && let Err(error) = fs::remove_file(&item.path) {
                cleaning.skip(item.path, format!("cannot remove it: {error}"));
            }
        } else {
            cleaning.skip(item.path, "not a build record");
        }
    }
    if !dry_run {
        let _ = fs::remove_dir(dir);
    }
}

fn remove(path: PathBuf, dry_run: bool, cleaning: &mut Cleaning) {
    let bytes = fs::symlink_metadata(&path).map_or(0, |m| m.len());
    if !dry_run && let Err(error) = fs::remove_file(&path) {
        cleaning.skip(path, format!("cannot remove it: {error}"));
        return;
    }
    cleaning.removed.push(Removal { path, bytes });
}
