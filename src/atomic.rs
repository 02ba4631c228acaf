//! Writing a file so that readers see either the old file or the whole new one: the
//! bytes go to a temporary file in the same folder, which is then renamed into place.
//! An interrupted build therefore never leaves a torn report or cache entry.

use std::fs::File;
use std::io::Write;
use std::path::Path;

/// How the temporary files start, so that `stet clean` can tell leftovers apart.
pub const TEMPORARY_PREFIX: &str = ".stet-tmp-";

/// Writes `bytes` to `path` atomically, creating its folder if needed. The file is
/// readable by others (0644 on Unix), since reports and shared caches are meant to be.
pub fn write(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    write_with(path, |file| file.write_all(bytes))
}

/// Like [`write`], with the contents written by `fill` into the temporary file, so
/// that a large file need not be assembled in memory first.
pub fn write_with(
    path: &Path,
    fill: impl FnOnce(&mut File) -> std::io::Result<()>,
) -> std::io::Result<()> {
    let dir = match path.parent() {
        Some(dir) if !dir.as_os_str().is_empty() => dir,
        _ => Path::new("."),
    };
    std::fs::create_dir_all(dir)?;
    let mut builder = tempfile::Builder::new();
    builder.prefix(TEMPORARY_PREFIX);
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
