//! The experiment a report carries, so that a colleague who receives only the report can
//! rebuild it: the document's bytes, the BLAKE3 hash of every file its steps read, those
//! files themselves when they compress under `--embed-data-mb`, and the build's summary
//! (which `stet diff` compares). `unpack` writes it back out; `inputs` checks the files
//! the report could not carry when the unpacked document is built.

mod block;
pub(crate) mod inputs;
pub(crate) mod unpack;

use std::path::{Component, Path, PathBuf};

use serde::{Deserialize, Serialize};
use serde_json::Value;

use crate::plan::Plan;
use crate::plan::input_file::{self, InputFile};
use crate::plan::outputs::absolute_folder;

/// The layout of the payload; a reader refuses any other.
const FORMAT: u32 = 1;

/// Files whose raw total exceeds the limit by more than this factor are left out
/// without being read. Every build renders the report, a no-op rebuild too, so reading
/// and compressing a large file would cost each build its size in memory and seconds of
/// deflate; CSV text rarely shrinks that far (the demo and test files compress 3 to 5
/// to 1 with zlib at level 6, measured).
const MAX_TRIED_RATIO: u64 = 8;

/// Why a file's experiment cannot be read.
#[derive(Debug, thiserror::Error)]
pub enum CarryError {
    #[error("it is not a stet report: it carries no experiment")]
    NotAReport,
    #[error("the experiment it carries is damaged: {0}")]
    Damaged(&'static str),
    #[error("the experiment it carries is in format {0}, which this stet does not read")]
    Format(u32),
}

/// What the payload's first line says: where each part goes and what it hashes to.
#[derive(Serialize, Deserialize)]
pub(crate) struct Manifest {
    format: u32,
    /// The stet version that built the report.
    stet: String,
    pub(crate) document: CarriedFile,
    pub(crate) files: Vec<CarriedFile>,
    /// The build's `--json` summary.
    pub(crate) summary: Value,
}

/// One file of the experiment.
#[derive(Clone, Serialize, Deserialize)]
pub(crate) struct CarriedFile {
    /// Where it goes inside the unpacked folder, `/`-separated: the document and its
    /// files keep their places relative to each other.
    pub(crate) path: String,
    /// The path as the document's steps name it (empty for the document).
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub(crate) written: String,
    pub(crate) blake3: String,
    pub(crate) bytes: u64,
    /// Why its bytes are not in the report; absent when they are.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub(crate) left_out: Option<String>,
}

/// What a build puts into its report.
pub(crate) struct Carrying<'a> {
    pub(crate) document: &'a Path,
    /// The document's bytes as read, whose hash the report's footer shows.
    pub(crate) source: &'a [u8],
    pub(crate) plan: &'a Plan,
    pub(crate) summary: &'a Value,
    /// The most the carried block may take compressed, in bytes; `None` with
    /// `--no-embed-data`.
    pub(crate) embed_limit: Option<u64>,
}

/// The block for the report, and how many files it could not carry.
pub(crate) struct Carried {
    pub(crate) html: String,
    pub(crate) left_out: usize,
}

/// The experiment read back from a report: its manifest and the bytes of each part.
pub(crate) struct Experiment {
    pub(crate) manifest: Manifest,
    pub(crate) document: Vec<u8>,
    /// The files the report carries, with their bytes.
    pub(crate) files: Vec<(CarriedFile, Vec<u8>)>,
}

/// The block a build's report carries.
pub(crate) fn carry(input: &Carrying<'_>) -> Carried {
    let (document, mut files, on_disk) = layout(input.document, input.source, input.plan);
    let mut contents = match input.embed_limit {
        Some(limit) => read_within(&mut files, &on_disk, limit),
        None => leave_out(&mut files, "--no-embed-data"),
    };
    let encoded = loop {
        let manifest = Manifest {
            format: FORMAT,
            stet: env!("CARGO_PKG_VERSION").to_string(),
            document: document.clone(),
            files: files.clone(),
            summary: input.summary.clone(),
        };
        let encoded = block::encode(&payload(&manifest, input.source, &contents));
        match input.embed_limit {
            Some(limit) if encoded.deflated_bytes > limit && !contents.is_empty() => {
                let reason = format!(
                    "with the files the report's experiment would take {} compressed, over --embed-data-mb {}",
                    mebibytes(encoded.deflated_bytes),
                    limit >> 20
                );
                contents = leave_out(&mut files, &reason);
            }
            _ => break encoded,
        }
    };
    Carried {
        html: encoded.html,
        left_out: files.iter().filter(|file| file.left_out.is_some()).count(),
    }
}

/// The experiment a report's bytes carry, every part checked against its hash.
pub(crate) fn read(html: &[u8]) -> Result<Experiment, CarryError> {
    let payload = block::decode(html)?;
    let line_end = payload
        .iter()
        .position(|&byte| byte == b'\n')
        .ok_or(CarryError::Damaged("its manifest has no end"))?;
    let format: FormatOnly = serde_json::from_slice(&payload[..line_end])
        .map_err(|_| CarryError::Damaged("its manifest is not readable"))?;
    if format.format != FORMAT {
        return Err(CarryError::Format(format.format));
    }
    let manifest: Manifest = serde_json::from_slice(&payload[..line_end])
        .map_err(|_| CarryError::Damaged("its manifest is not readable"))?;
    let mut rest = &payload[line_end + 1..];
    let document = take_checked(&mut rest, &manifest.document)?;
    let mut files = Vec::new();
    for file in manifest.files.iter().filter(|file| file.left_out.is_none()) {
        files.push((file.clone(), take_checked(&mut rest, file)?));
    }
    if !rest.is_empty() {
        return Err(CarryError::Damaged(
            "it holds bytes its manifest does not list",
        ));
    }
    Ok(Experiment {
        manifest,
        document,
        files,
    })
}

#[derive(Deserialize)]
struct FormatOnly {
    format: u32,
}

/// The next `file.bytes` bytes of the payload, which must hash to `file.blake3`.
fn take_checked(rest: &mut &[u8], file: &CarriedFile) -> Result<Vec<u8>, CarryError> {
    let length = usize::try_from(file.bytes)
        .ok()
        .filter(|&length| length <= rest.len())
        .ok_or(CarryError::Damaged(
            "a file is shorter than its manifest says",
        ))?;
    let (bytes, after) = rest.split_at(length);
    if blake3::hash(bytes).to_hex().as_str() != file.blake3 {
        return Err(CarryError::Damaged(
            "a file does not match its recorded hash",
        ));
    }
    *rest = after;
    Ok(bytes.to_vec())
}

/// The manifest's line, then the document's bytes, then each carried file's.
fn payload(manifest: &Manifest, source: &[u8], contents: &[Vec<u8>]) -> Vec<u8> {
    let mut payload = serde_json::to_vec(manifest).expect("a manifest serialises");
    payload.push(b'\n');
    payload.extend_from_slice(source);
    for bytes in contents {
        payload.extend_from_slice(bytes);
    }
    payload
}

/// The document and every file its steps read (each once), placed under the deepest
/// folder that holds them all, so `../data/x.csv` from `experiments/doc.md` unpacks to
/// `data/x.csv` beside `experiments/doc.md`. A file named by an absolute path would
/// not be found at its place after unpacking, so it is left out. Each file comes with
/// where it is read from now.
fn layout(
    document: &Path,
    source: &[u8],
    plan: &Plan,
) -> (CarriedFile, Vec<CarriedFile>, Vec<PathBuf>) {
    let folder = absolute_folder(document.parent().unwrap_or(Path::new("")));
    let mut inputs: Vec<(&InputFile, Option<PathBuf>)> = Vec::new();
    for file in plan.steps.iter().flat_map(|step| &step.files) {
        let place =
            (!Path::new(&file.written).is_absolute()).then(|| lexical(&folder.join(&file.written)));
        let seen = inputs
            .iter()
            .any(|(other, other_place)| match (&place, other_place) {
                (Some(place), Some(other_place)) => place == other_place,
                _ => other.written == file.written,
            });
        if !seen {
            inputs.push((file, place));
        }
    }
    let root = inputs
        .iter()
        .filter_map(|(_, place)| place.as_deref().and_then(Path::parent))
        .fold(folder.clone(), |root, parent| {
            common_ancestor(&root, parent)
        });
    let name = document.file_name().unwrap_or(document.as_os_str());
    let carried_document = CarriedFile {
        path: relative(&folder.join(name), &root),
        written: String::new(),
        blake3: blake3::hash(source).to_hex().to_string(),
        bytes: source.len() as u64,
        left_out: None,
    };
    let on_disk = inputs.iter().map(|(file, _)| file.path.clone()).collect();
    let files = inputs
        .into_iter()
        .map(|(file, place)| CarriedFile {
            path: place
                .as_deref()
                .map_or_else(|| file.written.clone(), |place| relative(place, &root)),
            written: file.written.clone(),
            blake3: file.hash.to_hex().to_string(),
            bytes: file.bytes,
            left_out: place
                .is_none()
                .then(|| "the document names it by an absolute path".to_string()),
        })
        .collect();
    (carried_document, files, on_disk)
}

/// Reads every file still to be carried, unless their raw size already rules them out
/// under `limit`; a file whose bytes no longer match the plan's hash is left out.
fn read_within(files: &mut [CarriedFile], on_disk: &[PathBuf], limit: u64) -> Vec<Vec<u8>> {
    let raw: u64 = files
        .iter()
        .filter(|file| file.left_out.is_none())
        .map(|file| file.bytes)
        .sum();
    if raw / MAX_TRIED_RATIO > limit {
        let reason = format!(
            "the files total {}, more than {MAX_TRIED_RATIO} times --embed-data-mb {}",
            mebibytes(raw),
            limit >> 20
        );
        return leave_out(files, &reason);
    }
    let mut contents = Vec::new();
    for (file, path) in files.iter_mut().zip(on_disk) {
        if file.left_out.is_some() {
            continue;
        }
        match input_file::read_regular(path, file.bytes) {
            Ok(bytes) if blake3::hash(&bytes).to_hex().as_str() == file.blake3 => {
                contents.push(bytes)
            }
            _ => file.left_out = Some("it changed or vanished during the build".into()),
        }
    }
    contents
}

/// Marks every file not yet left out as left out for `reason`; nothing is carried.
fn leave_out(files: &mut [CarriedFile], reason: &str) -> Vec<Vec<u8>> {
    for file in files.iter_mut().filter(|file| file.left_out.is_none()) {
        file.left_out = Some(reason.to_string());
    }
    Vec::new()
}

fn mebibytes(bytes: u64) -> String {
    format!("{:.1} MiB", bytes as f64 / (1 << 20) as f64)
}

/// `path` with `.` dropped and each `..` taking away the folder before it, without
/// asking the file system: the place a relative path names from a folder.
pub(crate) fn lexical(path: &Path) -> PathBuf {
    let mut out = PathBuf::new();
    for component in path.components() {
        match component {
            Component::CurDir => {}
            Component::ParentDir => {
                out.pop();
            }
            other => out.push(other),
        }
    }
    out
}

fn common_ancestor(a: &Path, b: &Path) -> PathBuf {
    a.components()
        .zip(b.components())
        .take_while(|(x, y)| x == y)
        .map(|(x, _)| x)
        .collect()
}

/// `path` below `root`, `/`-separated.
fn relative(path: &Path, root: &Path) -> String {
    let below = path.strip_prefix(root).unwrap_or(path);
    below
        .components()
        .map(|component| component.as_os_str().to_string_lossy())
        .collect::<Vec<_>>()
        .join("/")
}
