//! Writing a file so that readers see either the old file or the whole new one: the
//! bytes go to a temporary file in the same folder, which is then renamed into place.
//! An interrupted build therefore never leaves a torn report or cache entry.

use std::fs::File;
use std::io::Write;
use std::path::Path;
use std::time::Duration;

/// How every temporary file of ours begins, so leftovers (for `remove_stale` and
/// `stet clean`) can be told from others' files.
pub(crate) const TEMPORARY_PREFIX: &str = ".stet-tmp-";
/// The random part `tempfile` adds to the prefix.
const TEMPORARY_RANDOM_CHARS: usize = 6;
/// A temporary file untouched this long belongs to no live write: writes fill their
/// file in one go, so even a large one is modified far more often than this.
const STALE_AFTER: Duration = Duration::from_secs(60);

/// Writes `bytes` to `path` atomically, creating its folder if needed. The file is
/// readable by others (0644 on Unix), since reports and shared caches are meant to be.
pub(crate) fn write(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    write_with(path, |file| file.write_all(bytes))
}

/// Like [`write`], with the contents written by `fill` into the temporary file, so
/// that a large file need not be assembled in memory first.
pub(crate) fn write_with(
    path: &Path,
    fill: impl FnOnce(&mut File) -> std::io::Result<()>,
) -> std::io::Result<()> {
    let dir = match path.parent() {
        Some(dir) if !dir.as_os_str().is_empty() => dir,
        _ => Path::new("."),
    };
    std::fs::create_dir_all(dir)?;
    let mut builder = tempfile::Builder::new();
    builder
        .prefix(TEMPORARY_PREFIX)
        .rand_bytes(TEMPORARY_RANDOM_CHARS);
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        builder.permissions(std::fs::Permissions::from_mode(0o644));
    }
    let mut file = builder.tempfile_in(dir)?;
    // No fsync: the rename alone is atomic against a killed process, which is the
    // failure that matters here; a torn cache entry after a power cut fails its
    // checksum and is recomputed, and a report can be rebuilt. An fsync per file would
    // cost more than a whole no-op rebuild.
    fill(file.as_file_mut())?;
    file.persist(path).map_err(|error| error.error)?;
    Ok(())
}

/// Removes the temporary files of ours in `dir` that a killed process left: named as
/// [`write`] names them and not modified for [`STALE_AFTER`]. Best effort: a file that
/// cannot be removed is left for the next build.
pub(crate) fn remove_stale(dir: &Path) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    for entry in entries.flatten() {
        let is_ours = entry.file_name().to_str().is_some_and(is_temporary_name);
        let is_stale = entry
            .metadata()
            .ok()
            .filter(|metadata| metadata.is_file())
            .and_then(|metadata| metadata.modified().ok())
            .and_then(|modified| modified.elapsed().ok())
            .is_some_and(|age| age > STALE_AFTER);
        if is_ours && is_stale {
            let _ = std::fs::remove_file(entry.path());
        }
    }
}

/// Whether a file name is one [`write`] gives its temporary files.
fn is_temporary_name(name: &str) -> bool {
    name.strip_prefix(TEMPORARY_PREFIX).is_some_and(|random| {
        random.len() == TEMPORARY_RANDOM_CHARS && random.chars().all(|c| c.is_ascii_alphanumeric())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_our_own_temporary_names_are_taken_for_leftovers() {
        assert!(is_temporary_name(".stet-tmp-a1B2c3"));
        assert!(!is_temporary_name(".stet-tmp-a1B2c3.csv"));
        assert!(!is_temporary_name(".stet-tmp-"));
        assert!(!is_temporary_name("stet-tmp-a1B2c3"));
    }
}
