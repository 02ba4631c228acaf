//! The content-addressed store: one file per entry, named by its key, written to a
//! temporary file and renamed into place, and checked against its own checksum on
//! every load. Entries are write-once and identical for a given key, so concurrent
//! writers (several builds, several machines on a shared file system) need no lock.

use std::fs;
use std::io::{self, BufReader, BufWriter, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};

use serde::Serialize;
use serde::de::DeserializeOwned;

use crate::plan::input_file::Hashed;

/// Marks the entry layout; a different one (an older stet's) is another format, not
/// damage. Changed from `stet\0ent` when the checksum started covering the entry's name.
const MAGIC: &[u8; 8] = b"stet\0en2";
const HEADER_LEN: usize = MAGIC.len() + 32;

/// What kind of result an entry holds; part of the file name so kinds never collide.
/// Its serde word is the file name's suffix.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum EntryKind {
    /// A data step's summary for the report.
    #[serde(rename = "data")]
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
    /// A partition's baseline and model without a hidden layer.
    Reference,
    /// A fit held against its references on the held-out rows.
    Judgement,
}

impl EntryKind {
    const ALL: [EntryKind; 8] = [
        EntryKind::DataSummary,
        EntryKind::Prepared,
        EntryKind::Marker,
        EntryKind::Predict,
        EntryKind::Export,
        EntryKind::Run,
        EntryKind::Reference,
        EntryKind::Judgement,
    ];

    fn suffix(self) -> &'static str {
        crate::document::names::word(&self)
    }
}

/// The file name of an entry: `<key>.<kind>`.
pub(crate) fn entry_name(key: &str, kind: EntryKind) -> String {
    format!("{key}.{}", kind.suffix())
}

/// Whether a file name is one `entry_name` gives: a 64-digit hex key and a kind.
pub(crate) fn is_entry_name(name: &str) -> bool {
    name.split_once('.').is_some_and(|(key, suffix)| {
        key.len() == 64
            && key.bytes().all(|b| b.is_ascii_hexdigit())
            && EntryKind::ALL.iter().any(|kind| kind.suffix() == suffix)
    })
}

/// Whether a file name is a temporary file an interrupted write left behind.
pub(crate) fn is_leftover_name(name: &str) -> bool {
    name.starts_with(crate::cache::atomic::TEMPORARY_PREFIX)
}

/// The cache, or no cache at all (`--no-cache`, or a folder that cannot be used).
#[derive(Debug)]
pub(crate) struct Cache {
    dir: Option<PathBuf>,
    /// Set once a write failed, so the warning is printed once per build.
    write_failed: AtomicBool,
    warnings: std::sync::Mutex<Vec<String>>,
}

impl Cache {
    /// A cache in `dir`, created on first write.
    pub(crate) fn at(dir: PathBuf) -> Cache {
        Cache {
            dir: Some(dir),
            write_failed: AtomicBool::new(false),
            warnings: Default::default(),
        }
    }

    /// A cache that finds nothing and keeps nothing.
    pub(crate) fn disabled() -> Cache {
        Cache {
            dir: None,
            write_failed: AtomicBool::new(false),
            warnings: Default::default(),
        }
    }

    pub(crate) fn dir(&self) -> Option<&Path> {
        self.dir.as_deref()
    }

    /// Warnings gathered while loading and storing (corrupt entries, failed writes).
    pub(crate) fn take_warnings(&self) -> Vec<String> {
        std::mem::take(&mut self.warnings.lock().expect("warnings lock"))
    }

    fn warn(&self, message: String) {
        self.warnings.lock().expect("warnings lock").push(message);
    }

    /// The path of an entry.
    pub(crate) fn entry_path(&self, key: &str, kind: EntryKind) -> Option<PathBuf> {
        let dir = self.dir.as_ref()?;
        Some(
            dir.join("entries")
                .join(&key[..2])
                .join(entry_name(key, kind)),
        )
    }

    /// Whether an entry exists (without verifying it).
    pub(crate) fn contains(&self, key: &str, kind: EntryKind) -> bool {
        self.entry_path(key, kind)
            .is_some_and(|path| path.is_file())
    }

    /// Loads an entry; a missing one is `None`, and so is one that fails its checksum
    /// or was written in another format, which is then removed with a warning.
    pub(crate) fn load<T: DeserializeOwned>(&self, key: &str, kind: EntryKind) -> Option<T> {
        let path = self.entry_path(key, kind)?;
        let file = fs::File::open(&path).ok()?;
        let problem = match decode(file, key, kind) {
            Decoded::Value(value) => return Some(value),
            Decoded::Damaged => "failed its integrity check (its bytes do not match its name)",
            Decoded::OtherFormat => {
                "could not be decoded: it was written in another format (by another build of stet)"
            }
        };
        self.warn(format!(
            "cache entry {} {problem}; recomputing it",
            path.display()
        ));
        let _ = fs::remove_file(&path);
        None
    }

    /// Stores an entry; a failure (read-only or full disk) is a warning, not an error.
    pub(crate) fn store<T: Serialize>(&self, key: &str, kind: EntryKind, value: &T) {
        let Some(path) = self.entry_path(key, kind) else {
            return;
        };
        if let Err(error) =
            crate::cache::atomic::write_with(&path, |file| encode(value, key, kind, file))
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

/// Bytes moved between an entry's file and its value at a time.
const BUFFER: usize = 1 << 16;

/// The checksum's hasher, fed the entry's name before its payload: the checksum then
/// vouches for "this payload under this key and kind", so bytes copied or renamed to
/// another entry's file fail the check instead of answering for another step (issue 12).
fn checksum_hasher(key: &str, kind: EntryKind) -> blake3::Hasher {
    let mut hasher = blake3::Hasher::new();
    hasher.update(MAGIC);
    hasher.update(kind.suffix().as_bytes());
    hasher.update(b"\0");
    hasher.update(key.as_bytes());
    hasher.update(b"\0");
    hasher
}

/// Writes `magic ‖ checksum ‖ payload` as a stream: the payload goes through the
/// hasher into the file, then the checksum is written into the space left for it.
fn encode<T: Serialize>(
    value: &T,
    key: &str,
    kind: EntryKind,
    file: &mut fs::File,
) -> io::Result<()> {
    file.write_all(MAGIC)?;
    file.write_all(&[0; 32])?;
    // Buffered above the hasher, so it hashes large blocks, not each small write.
    let hashing = HashingWriter::new(&mut *file, checksum_hasher(key, kind));
    let mut writer = BufWriter::with_capacity(BUFFER, hashing);
    postcard::to_io(value, &mut writer).map_err(io::Error::other)?;
    let checksum = writer.into_inner().map_err(|e| e.into_error())?.finish();
    file.seek(SeekFrom::Start(MAGIC.len() as u64))?;
    file.write_all(checksum.as_bytes())
}

/// What reading an entry found.
enum Decoded<T> {
    Value(T),
    /// Truncated, altered, or another entry's bytes under this name.
    Damaged,
    /// Intact, but in a layout or value format this build does not read.
    OtherFormat,
}

/// Reads an entry as a stream, hashing it on the way; the value is kept only if every
/// byte after the header matches the checksum. A value that does not decode is read to
/// the end all the same, so that an intact entry of another format is told apart from
/// a damaged one.
fn decode<T: DeserializeOwned>(mut file: fs::File, key: &str, kind: EntryKind) -> Decoded<T> {
    let mut header = [0; HEADER_LEN];
    if file.read_exact(&mut header).is_err() {
        return Decoded::Damaged;
    }
    let (magic, checksum) = header.split_at(MAGIC.len());
    if magic != MAGIC {
        return Decoded::OtherFormat;
    }
    let Some(length) = file
        .metadata()
        .ok()
        .and_then(|m| usize::try_from(m.len()).ok())
    else {
        return Decoded::Damaged;
    };
    // Scratch for decoding text, which postcard needs as long as the longest string;
    // the entry's length bounds that. Its pages stay untouched (and take no memory)
    // beyond the longest string actually read.
    let mut scratch = vec![0; length];
    let hashed = Hashed::continuing(file, checksum_hasher(key, kind));
    let mut reader = BufReader::with_capacity(BUFFER, hashed);
    let value = postcard::from_io::<T, _>((&mut reader, &mut scratch))
        .ok()
        .map(|(value, _)| value);
    // Bytes after the value are covered by the checksum too.
    if io::copy(&mut reader, &mut io::sink()).is_err() {
        return Decoded::Damaged;
    }
    let intact = reader.get_ref().finish().as_bytes() == checksum;
    match (value, intact) {
        (Some(value), true) => Decoded::Value(value),
        (None, true) => Decoded::OtherFormat,
        (_, false) => Decoded::Damaged,
    }
}

/// A writer that hashes every byte it passes on.
struct HashingWriter<W> {
    inner: W,
    hasher: blake3::Hasher,
}

impl<W: Write> HashingWriter<W> {
    fn new(inner: W, hasher: blake3::Hasher) -> Self {
        HashingWriter { inner, hasher }
    }

    fn finish(&self) -> blake3::Hash {
        self.hasher.finalize()
    }
}

impl<W: Write> Write for HashingWriter<W> {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        let n = self.inner.write(buf)?;
        self.hasher.update(&buf[..n]);
        Ok(n)
    }

    fn flush(&mut self) -> io::Result<()> {
        self.inner.flush()
    }
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

    /// The layout the module documents, built in memory: what `store` must write.
    fn layout<T: Serialize>(value: &T, key: &str, kind: EntryKind) -> Vec<u8> {
        let payload = postcard::to_stdvec(value).unwrap();
        let named = [
            MAGIC.as_slice(),
            kind.suffix().as_bytes(),
            b"\0",
            key.as_bytes(),
            b"\0",
            &payload,
        ]
        .concat();
        [MAGIC.as_slice(), blake3::hash(&named).as_bytes(), &payload].concat()
    }

    #[test]
    fn a_streamed_entry_has_the_documented_layout_and_long_text_round_trips() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::at(dir.path().to_path_buf());
        // Longer than the stream buffer, in one string and in many numbers.
        let value = (
            "é".repeat(3 * BUFFER),
            (0..40_000).map(f64::from).collect::<Vec<_>>(),
        );
        cache.store(KEY, EntryKind::Export, &value);
        let path = cache.entry_path(KEY, EntryKind::Export).unwrap();
        assert_eq!(
            fs::read(&path).unwrap(),
            layout(&value, KEY, EntryKind::Export)
        );
        assert_eq!(cache.load(KEY, EntryKind::Export), Some(value));
    }

    #[test]
    fn bytes_after_the_value_fail_the_check() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::at(dir.path().to_path_buf());
        cache.store(KEY, EntryKind::Run, &vec![1.5f64, 2.5]);
        let path = cache.entry_path(KEY, EntryKind::Run).unwrap();
        let mut bytes = fs::read(&path).unwrap();
        bytes.push(0);
        fs::write(&path, bytes).unwrap();
        assert_eq!(cache.load::<Vec<f64>>(KEY, EntryKind::Run), None);
        assert!(!path.exists());
    }

    const OTHER_KEY: &str = "ff0011bb22cc33dd44ee55ff66778899aabbccddeeff00112233445566778899";

    #[test]
    fn an_entry_copied_under_another_key_fails_its_check() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::at(dir.path().to_path_buf());
        cache.store(KEY, EntryKind::Run, &vec![1.5f64, 2.5]);
        cache.store(OTHER_KEY, EntryKind::Run, &vec![3.5f64, 4.5]);
        let path = cache.entry_path(KEY, EntryKind::Run).unwrap();
        let other = cache.entry_path(OTHER_KEY, EntryKind::Run).unwrap();
        fs::copy(&path, &other).unwrap();
        assert_eq!(cache.load::<Vec<f64>>(OTHER_KEY, EntryKind::Run), None);
        assert!(!other.exists());
        let warnings = cache.take_warnings();
        assert!(
            warnings[0].contains("failed its integrity check"),
            "{warnings:?}"
        );
        assert_eq!(
            cache.load::<Vec<f64>>(KEY, EntryKind::Run),
            Some(vec![1.5, 2.5])
        );
    }

    #[test]
    fn an_entry_renamed_to_another_kind_fails_its_check() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::at(dir.path().to_path_buf());
        cache.store(KEY, EntryKind::Predict, &vec![1.5f64]);
        let predict = cache.entry_path(KEY, EntryKind::Predict).unwrap();
        let export = cache.entry_path(KEY, EntryKind::Export).unwrap();
        fs::rename(&predict, &export).unwrap();
        assert_eq!(cache.load::<Vec<f64>>(KEY, EntryKind::Export), None);
        assert!(cache.take_warnings()[0].contains("failed its integrity check"));
    }

    #[test]
    fn an_intact_entry_that_does_not_decode_is_reported_as_another_format() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::at(dir.path().to_path_buf());
        // 200 is no postcard bool (0 or 1): the value format changed, the bytes did not.
        cache.store(KEY, EntryKind::Marker, &200u8);
        assert_eq!(cache.load::<bool>(KEY, EntryKind::Marker), None);
        let warnings = cache.take_warnings();
        assert!(
            warnings[0].contains("written in another format"),
            "{warnings:?}"
        );
        assert!(!warnings[0].contains("integrity"), "{warnings:?}");
    }

    #[test]
    fn an_entry_in_the_previous_layout_is_reported_as_another_format() {
        let dir = tempfile::tempdir().unwrap();
        let cache = Cache::at(dir.path().to_path_buf());
        let path = cache.entry_path(KEY, EntryKind::Marker).unwrap();
        fs::create_dir_all(path.parent().unwrap()).unwrap();
        // The layout before the checksum covered the name: magic `stet\0ent`, then the
        // BLAKE3 of the (here empty) payload.
        let old = [b"stet\0ent".as_slice(), blake3::hash(b"").as_bytes()].concat();
        fs::write(&path, old).unwrap();
        assert_eq!(cache.load::<()>(KEY, EntryKind::Marker), None);
        assert!(cache.take_warnings()[0].contains("written in another format"));
    }
}
