//! A file a step reads. The plan hashes it (the hash is part of the step's key)
//! without keeping its bytes; the step reads it again as a stream, hashing on the
//! way, and refuses the result if the bytes are not the ones the key was made from.

use std::fs::File;
use std::io::{self, Read};
use std::path::{Path, PathBuf};

/// A file a step reads, with the hash of its bytes when the build was planned.
#[derive(Clone, Debug)]
pub(crate) struct InputFile {
    /// The path as written in the document.
    pub(crate) written: String,
    pub path: PathBuf,
    pub(crate) hash: blake3::Hash,
    /// Its length when it was hashed: reading stops one byte past it, since more
    /// bytes mean the file changed.
    pub(crate) bytes: u64,
    /// Line breaks in the file when it was hashed: at least the rows a CSV file holds
    /// (a quoted field may hold more), which the plan's work estimate multiplies.
    pub lines: u64,
}

/// Why a step's file could not be hashed.
#[derive(Debug, thiserror::Error)]
pub(crate) enum InputError {
    /// A named pipe, device or folder: reading it could block or never end.
    #[error("it is not a regular file (a named pipe, device or folder)")]
    NotRegular,
    /// More bytes than `--max-file-mb` allows came out of it.
    #[error("it holds more than the limit of {limit} bytes")]
    TooLarge { limit: u64 },
    #[error("{0}")]
    Io(#[from] io::Error),
}

impl InputError {
    /// What the document's author can do about it.
    pub(crate) fn help(&self) -> &'static str {
        match self {
            InputError::NotRegular => "a step reads an ordinary file; save the data into one",
            InputError::TooLarge { .. } => "raise the limit with --max-file-mb",
            InputError::Io(_) => "the path is relative to the document's folder",
        }
    }
}

impl InputFile {
    /// Hashes the file at `path` as a stream, reading at most `limit` bytes.
    pub(crate) fn planned(
        written: &str,
        path: PathBuf,
        limit: u64,
    ) -> Result<InputFile, InputError> {
        let mut sink = HashAndCount::default();
        let bytes = io::copy(&mut open_regular(&path)?.take(limit + 1), &mut sink)?;
        if bytes > limit {
            return Err(InputError::TooLarge { limit });
        }
        Ok(InputFile {
            written: written.to_string(),
            path,
            hash: sink.hasher.finalize(),
            bytes,
            lines: sink.lines,
        })
    }

    /// Reads the file through `parse`. Errors name the file; so does the refusal when
    /// the file changed since the build was planned, since the result would then be
    /// stored under a key made from other bytes.
    pub(crate) fn read<T, E: std::fmt::Display>(
        &self,
        parse: impl FnOnce(&mut Hashed<io::Take<File>>) -> Result<T, E>,
    ) -> Result<T, ReadError> {
        let unreadable = |source| ReadError::Unreadable {
            path: self.path.clone(),
            source,
        };
        let file = open_regular(&self.path).map_err(unreadable)?;
        let mut reader = Hashed::new(file.take(self.bytes + 1));
        let value = parse(&mut reader).map_err(|error| ReadError::Content {
            file: self.written.clone(),
            message: error.to_string(),
        })?;
        // A parser may stop before the end (the CSV reader does not, but the hash
        // must cover every byte whatever the parser).
        io::copy(&mut reader, &mut io::sink()).map_err(|error| unreadable(error.into()))?;
        if reader.finish() != self.hash {
            return Err(ReadError::Changed {
                file: self.written.clone(),
            });
        }
        Ok(value)
    }
}

/// Why a step could not read its input file.
#[derive(Debug, thiserror::Error)]
pub(crate) enum ReadError {
    #[error("cannot read '{}': {source}", path.display())]
    Unreadable { path: PathBuf, source: InputError },
    /// The parser refused the contents; `file` is the path as the document wrote it.
    #[error("{file}: {message}")]
    Content { file: String, message: String },
    #[error(
        "{file}: the file changed while the build was running (its contents differ from \
         when the build started), so nothing was kept from it; build again"
    )]
    Changed { file: String },
}

/// A sink that hashes what is written to it and counts its line breaks.
#[derive(Default)]
struct HashAndCount {
    hasher: blake3::Hasher,
    lines: u64,
}

impl io::Write for HashAndCount {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        self.hasher.update(buf);
        self.lines += buf.iter().filter(|&&byte| byte == b'\n').count() as u64;
        Ok(buf.len())
    }

    fn flush(&mut self) -> io::Result<()> {
        Ok(())
    }
}

/// Reads a whole regular file of at most `limit` bytes: the document itself, which
/// must not block the build (a named pipe) or never end (a device) either.
pub(crate) fn read_regular(path: &Path, limit: u64) -> Result<Vec<u8>, InputError> {
    let mut bytes = Vec::new();
    open_regular(path)?
        .take(limit + 1)
        .read_to_end(&mut bytes)?;
    if bytes.len() as u64 > limit {
        return Err(InputError::TooLarge { limit });
    }
    Ok(bytes)
}

/// Opens `path` (following symbolic links) only if it is a regular file: opening a
/// named pipe waits for a writer, and a device may never end. Checked before opening,
/// and again on what was opened in case the path was swapped in between.
fn open_regular(path: &Path) -> Result<File, InputError> {
    if !std::fs::metadata(path)?.is_file() {
        return Err(InputError::NotRegular);
    }
    let file = File::open(path)?;
    if !file.metadata()?.is_file() {
        return Err(InputError::NotRegular);
    }
    Ok(file)
}

/// A reader that hashes every byte it hands out.
pub(crate) struct Hashed<R> {
    inner: R,
    hasher: blake3::Hasher,
}

impl<R: Read> Hashed<R> {
    pub(crate) fn new(inner: R) -> Hashed<R> {
        Hashed::continuing(inner, blake3::Hasher::new())
    }

    /// Hashes the bytes read after whatever `hasher` has already been given.
    pub(crate) fn continuing(inner: R, hasher: blake3::Hasher) -> Hashed<R> {
        Hashed { inner, hasher }
    }

    /// The hash of the bytes read so far.
    pub(crate) fn finish(&self) -> blake3::Hash {
        self.hasher.finalize()
    }
}

impl<R: Read> Read for Hashed<R> {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.hasher.update(&buf[..n]);
        Ok(n)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn input(dir: &Path, bytes: &[u8]) -> InputFile {
        let path = dir.join("rows.csv");
        std::fs::write(&path, bytes).unwrap();
        InputFile::planned("rows.csv", path, 1 << 20).unwrap()
    }

    fn read_all(file: &InputFile) -> Result<Vec<u8>, ReadError> {
        file.read(|reader| {
            let mut bytes = Vec::new();
            reader.read_to_end(&mut bytes).map(|_| bytes)
        })
    }

    #[test]
    fn the_streamed_hash_is_the_hash_of_the_bytes() {
        let dir = tempfile::tempdir().unwrap();
        let bytes: Vec<u8> = (0..200_000u32).map(|i| (i % 251) as u8).collect();
        let file = input(dir.path(), &bytes);
        assert_eq!(file.hash, blake3::hash(&bytes));
        assert_eq!(
            file.lines,
            bytes.iter().filter(|&&b| b == b'\n').count() as u64
        );
        assert_eq!(read_all(&file).unwrap(), bytes);
    }

    #[test]
    fn bytes_a_parser_leaves_are_still_checked() {
        let dir = tempfile::tempdir().unwrap();
        let file = input(dir.path(), b"a,b\n1,2\n");
        std::fs::write(&file.path, b"a,b\n1,3\n").unwrap();
        let first_byte = |reader: &mut Hashed<io::Take<File>>| {
            let mut byte = [0];
            reader.read_exact(&mut byte).map(|_| byte[0])
        };
        let error = file.read(first_byte).unwrap_err();
        assert!(
            matches!(&error, ReadError::Changed { file } if file == "rows.csv"),
            "{error}"
        );
        assert!(
            error
                .to_string()
                .starts_with("rows.csv: the file changed while the build was running"),
            "{error}"
        );
    }

    #[test]
    fn a_file_over_the_limit_stops_being_read_at_the_limit() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("rows.csv");
        std::fs::write(&path, [b'x'; 101]).unwrap();
        let error = InputFile::planned("rows.csv", path.clone(), 100).unwrap_err();
        assert!(
            matches!(error, InputError::TooLarge { limit: 100 }),
            "{error}"
        );
        assert_eq!(
            InputFile::planned("rows.csv", path, 101).unwrap().bytes,
            101
        );
    }

    #[test]
    fn a_folder_is_not_a_regular_file() {
        let dir = tempfile::tempdir().unwrap();
        let error = InputFile::planned("d", dir.path().to_path_buf(), 100).unwrap_err();
        assert!(matches!(error, InputError::NotRegular), "{error}");
    }

    #[test]
    fn a_file_that_grew_since_it_was_planned_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let file = input(dir.path(), b"a,b\n1,2\n");
        std::fs::write(&file.path, b"a,b\n1,2\n3,4\n").unwrap();
        let error = read_all(&file).unwrap_err();
        assert!(matches!(error, ReadError::Changed { .. }), "{error}");
    }

    #[test]
    fn parse_errors_and_missing_files_name_the_file() {
        let dir = tempfile::tempdir().unwrap();
        let file = input(dir.path(), b"x");
        let error = file.read(|_| Err::<(), _>("line 1 is wrong")).unwrap_err();
        assert!(matches!(error, ReadError::Content { .. }), "{error}");
        assert_eq!(error.to_string(), "rows.csv: line 1 is wrong");
        std::fs::remove_file(&file.path).unwrap();
        let error = read_all(&file).unwrap_err();
        assert!(
            matches!(&error, ReadError::Unreadable { path, .. } if path.ends_with("rows.csv")),
            "{error}"
        );
        assert!(error.to_string().starts_with("cannot read '"), "{error}");
    }
}
