//! The content-addressed store: one file per entry, named by its key, written to a
//! temporary file and renamed into place, and checked against its own checksum on
//! every load. Entries are write-once and identical for a given key, so concurrent
//! writers (several builds, several machines on a shared file system) need no lock.

use std::fs;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};

use serde::Serialize;
use serde::de::DeserializeOwned;

const MAGIC: &[u8; 8] = b"stet\0ent";
const HEADER_LEN: usize = MAGIC.len() + 32;

/// What kind of result an entry holds; part of the file name so kinds never collide.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum EntryKind {
    /// A data step's summary for the report.
    DataSummary,
    /// A data step's prepared matrices, loaded only when a run must train.
    Prepared,
    /// A record that a step with nothing to compute (net, compare) was built.
    Marker,
    /// A predict step's predictions.
    Predict,
    /// An export step's JSON.
    Export,
    /// One trained network on one partition.
    Run,
}

impl EntryKind {
    fn suffix(self) -> &'static str {
        match self {
            EntryKind::DataSummary => "data",
            EntryKind::Prepared => "prepared",
            EntryKind::Marker => "marker",
            EntryKind::Predict => "predict",
            EntryKind::Export => "export",
            EntryKind::Run => "run",
        }
    }
}

/// The cache, or no cache at all (`--no-cache`, or a folder that cannot be used).
#[derive(Debug)]
pub struct Cache {
    dir: Option<PathBuf>,
    /// Set once a write failed, so the warning is printed once per build.
    write_failed: AtomicBool,
    warnings: std::sync::Mutex<Vec<String>>,
}

impl Cache {
    /// A cache in `dir`, created on first write.
    pub fn at(dir: PathBuf) -> Cache {
        Cache {
            dir: Some(dir),
            write_failed: AtomicBool::new(false),
            warnings: Default::default(),
        }
    }

    /// A cache that finds nothing and keeps nothing.
    pub fn disabled() -> Cache {
        Cache {
            dir: None,
            write_failed: AtomicBool::new(false),
            warnings: Default::default(),
        }
    }

    pub fn dir(&self) -> Option<&Path> {
        self.dir.as_deref()
    }

    /// Warnings gathered while loading and storing (corrupt entries, failed writes).
    pub fn take_warnings(&self) -> Vec<String> {
        std::mem::take(&mut self.warnings.lock().expect("warnings lock"))
    }

    fn warn(&self, message: String) {
        self.warnings.lock().expect("warnings lock").push(message);
    }

    /// The path of an entry.
    pub fn entry_path(&self, key: &str, kind: EntryKind) -> Option<PathBuf> {
        let dir = self.dir.as_ref()?;
        Some(
            dir.join("entries")
                .join(&key[..2])
                .join(format!("{key}.{}", kind.suffix())),
        )
    }

    /// Whether an entry exists (without verifying it).
    pub fn contains(&self, key: &str, kind: EntryKind) -> bool {
        self.entry_path(key, kind)
            .is_some_and(|path| path.is_file())
    }

    /// Loads an entry; a missing one is `None`, and so is one that fails its checksum
    /// or does not decode, which is then removed with a warning.
    pub fn load<T: DeserializeOwned>(&self, key: &str, kind: EntryKind) -> Option<T> {
        let path = self.entry_path(key, kind)?;
        let bytes = fs::read(&path).ok()?;
        match decode(&bytes) {
            Some(value) => Some(value),
            None => {
                self.warn(format!(
                    "cache entry {} failed its integrity check; recomputing it",
                    path.display()
                ));
                let _ = fs::remove_file(&path);
                None
            }
        }
    }

    /// Stores an entry; a failure (read-only or full disk) is a warning, not an error.
    pub fn store<T: Serialize>(&self, key: &str, kind: EntryKind, value: &T) {
        let Some(path) = self.entry_path(key, kind) else {
            return;
        };
        if let Err(error) = crate::atomic::write(&path, &encode(value))
            && !self.write_failed.swap(true, Ordering::Relaxed)
        {
            let dir = self
                .dir
                .as_deref()
                .map_or(String::new(), |d| d.display().to_string());
            self.warn(format!(
                "cannot write to the cache in {dir} ({error}); continuing without caching"
            ));
        }
    }
}

fn encode<T: Serialize>(value: &T) -> Vec<u8> {
    let payload = postcard::to_stdvec(value).expect("results serialise");
    let mut bytes = Vec::with_capacity(HEADER_LEN + payload.len());
    bytes.extend_from_slice(MAGIC);
    bytes.extend_from_slice(blake3::hash(&payload).as_bytes());
    bytes.extend_from_slice(&payload);
    bytes
}

fn decode<T: DeserializeOwned>(bytes: &[u8]) -> Option<T> {
    if bytes.len() < HEADER_LEN || &bytes[..MAGIC.len()] != MAGIC {
        return None;
    }
    let (checksum, payload) = bytes[MAGIC.len()..].split_at(32);
    if blake3::hash(payload).as_bytes() != checksum {
        return None;
    }
    postcard::from_bytes(payload).ok()
}

#[cfg(test)]
mod tests {
    use super::*;

    const KEY: &str = "00aa11bb22cc33dd44ee55ff66778899aabbccddeeff00112233445566778899";

    #[test]
    fn an_entry_round_trips() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::at(dir.path().to_path_buf());
        cache.store(KEY, EntryKind::Run, &vec![1.5f64, 2.5]);
        assert_eq!(
            cache.load::<Vec<f64>>(KEY, EntryKind::Run),
            Some(vec![1.5, 2.5])
        );
        assert_eq!(cache.load::<Vec<f64>>(KEY, EntryKind::Prepared), None);
    }

    #[test]
    fn a_flipped_byte_is_detected_and_the_entry_discarded() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::at(dir.path().to_path_buf());
        cache.store(KEY, EntryKind::Run, &vec![1.5f64, 2.5]);
        let path = cache.entry_path(KEY, EntryKind::Run).unwrap();
        let mut bytes = fs::read(&path).unwrap();
        let last = bytes.len() - 1;
        bytes[last] ^= 0x01;
        fs::write(&path, bytes).unwrap();
        assert_eq!(cache.load::<Vec<f64>>(KEY, EntryKind::Run), None);
        assert!(!path.exists());
        assert_eq!(cache.take_warnings().len(), 1);
    }

    #[test]
    fn a_truncated_entry_is_detected() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::at(dir.path().to_path_buf());
        cache.store(KEY, EntryKind::Run, &vec![1.5f64, 2.5]);
        let path = cache.entry_path(KEY, EntryKind::Run).unwrap();
        let bytes = fs::read(&path).unwrap();
        fs::write(&path, &bytes[..bytes.len() / 2]).unwrap();
        assert_eq!(cache.load::<Vec<f64>>(KEY, EntryKind::Run), None);
    }

    #[test]
    fn a_disabled_cache_keeps_nothing() {
        let cache = Cache::disabled();
        cache.store(KEY, EntryKind::Run, &1u32);
        assert_eq!(cache.load::<u32>(KEY, EntryKind::Run), None);
    }
}
