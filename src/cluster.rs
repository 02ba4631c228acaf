//! `stet dispatch`: spread a document's uncached runs over a Slurm job array. stet
//! schedules nothing itself: each array task runs `stet build --shard K/N` against one
//! shared cache, and the content-addressed entries make every run an independent,
//! idempotent job. The job script is kept in the cache folder so it can be read and
//! submitted again.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Duration;

use crate::plan::PlanOptions;

/// Why a dispatch could not submit its job or wait for it to end.
#[derive(Debug, thiserror::Error)]
pub enum DispatchError {
    #[error("{program} is not on PATH: stet dispatch needs Slurm")]
    NotOnPath { program: &'static str },
    #[error("locating the stet binary: {0}")]
    OwnBinary(std::io::Error),
    /// `doing` is the verb: "creating", "writing", "running".
    #[error("{doing} {}: {source}", path.display())]
    Io {
        doing: &'static str,
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("sbatch refused the job: {stderr}")]
    Refused { stderr: String },
    #[error(
        "sbatch printed {printed:?} where a job id was expected; the job may have been submitted, check with squeue"
    )]
    NoJobId { printed: String },
    #[error("squeue failed: {stderr}")]
    QueueFailed { stderr: String },
    #[error("asking squeue about job {job} failed {attempts} times: {last}")]
    QueueUnreachable {
        job: String,
        attempts: u32,
        last: Box<DispatchError>,
    },
    #[error(
        "job {job} is still running after {} (--wait-timeout); its tasks keep filling the cache, so build the document once it ends",
        humantime::format_duration(*timeout)
    )]
    StillRunning { job: String, timeout: Duration },
}

impl DispatchError {
    fn io(doing: &'static str, path: &Path) -> impl FnOnce(std::io::Error) -> DispatchError {
        let path = path.to_path_buf();
        move |source| DispatchError::Io {
            doing,
            path,
            source,
        }
    }
}

/// What to submit.
#[derive(Clone, Debug)]
pub(crate) struct DispatchRequest<'a> {
    /// The document, as an absolute path.
    pub document: &'a Path,
    /// The shared cache folder, as an absolute path.
    pub cache_dir: &'a Path,
    pub tasks: usize,
    /// Extra `sbatch` options (partition, time, CPUs per task, …).
    pub sbatch_options: &'a [String],
    pub plan: &'a PlanOptions,
}

/// The job-array script: task K of N builds share K/N into the shared cache.
pub(crate) fn job_script(request: &DispatchRequest<'_>, stet: &Path, log_dir: &Path) -> String {
    let quote = |path: &Path| shell_quote(&path.display().to_string());
    let mut flags = String::new();
    if request.plan.allow_outside {
        flags.push_str(" --allow-outside");
    }
    let limits = request.plan.limits;
    flags.push_str(&format!(
        " --max-layer-width {} --max-layers {} --max-weights {} --max-sweep-runs {} --max-work {} --max-file-mb {} --max-categories {}",
        limits.max_layer_width,
        limits.max_layers,
        limits.max_weights,
        limits.max_sweep_runs,
        limits.max_work,
        limits.max_file_bytes >> 20,
        limits.max_categories
    ));
    let name = request
        .document
        .file_stem()
        .map_or("stet".into(), |stem| stem.to_string_lossy().into_owned());
    format!(
        "#!/bin/sh\n\
         # Written by stet dispatch: task K of N trains share K/N of the document's runs\n\
         # into the shared cache. Submit again with: sbatch --array=1-{n} THIS-FILE\n\
         #SBATCH --job-name=stet-{name}\n\
         #SBATCH --output={log}/{name}-%A_%a.out\n\
         exec {stet} build {doc} --cache {cache} --shard \"$SLURM_ARRAY_TASK_ID/{n}\" --jobs \"${{SLURM_CPUS_PER_TASK:-1}}\"{flags}\n",
        n = request.tasks,
        log = quote(log_dir),
        stet = quote(stet),
        doc = quote(request.document),
        cache = quote(request.cache_dir),
    )
}

fn shell_quote(text: &str) -> String {
    if text
        .chars()
        .all(|c| c.is_ascii_alphanumeric() || "/._-+=:".contains(c))
    {
        text.to_string()
    } else {
        format!("'{}'", text.replace('\'', "'\\''"))
    }
}

/// The Slurm programs a dispatch runs, found on PATH before anything is written.
#[derive(Clone, Debug)]
pub(crate) struct Slurm {
    pub sbatch: PathBuf,
    /// Needed only to wait for the job.
    pub squeue: Option<PathBuf>,
}

impl Slurm {
    /// Finds `sbatch`, and `squeue` when the dispatch will wait.
    pub(crate) fn locate(wait: bool) -> Result<Slurm, DispatchError> {
        let find = |program: &'static str| {
            find_on_path(program).ok_or(DispatchError::NotOnPath { program })
        };
        Ok(Slurm {
            sbatch: find("sbatch")?,
            squeue: if wait { Some(find("squeue")?) } else { None },
        })
    }
}

/// The first executable file called `name` in a folder of PATH.
fn find_on_path(name: &str) -> Option<PathBuf> {
    let path = std::env::var_os("PATH")?;
    std::env::split_paths(&path)
        .map(|dir| dir.join(name))
        .find(|candidate| std::fs::metadata(candidate).is_ok_and(|meta| is_executable(&meta)))
}

fn is_executable(metadata: &std::fs::Metadata) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        metadata.is_file() && metadata.permissions().mode() & 0o111 != 0
    }
    #[cfg(not(unix))]
    {
        metadata.is_file()
    }
}

/// Writes the script beside the cache and submits it; returns the job id and the
/// script's path.
pub(crate) fn submit(
    request: &DispatchRequest<'_>,
    sbatch: &Path,
) -> Result<(String, PathBuf), DispatchError> {
    let folder = request.cache_dir.join("dispatch");
    std::fs::create_dir_all(&folder).map_err(DispatchError::io("creating", &folder))?;
    let stem = request
        .document
        .file_stem()
        .map_or("stet".into(), |stem| stem.to_string_lossy().into_owned());
    let script_path = folder.join(format!("{stem}.sh"));
    let stet = std::env::current_exe().map_err(DispatchError::OwnBinary)?;
    let script = job_script(request, &stet, &folder);
    crate::cache::atomic::write(&script_path, script.as_bytes())
        .map_err(DispatchError::io("writing", &script_path))?;
    let output = Command::new(sbatch)
        .arg("--parsable")
        .arg(format!("--array=1-{}", request.tasks))
        .args(request.sbatch_options)
        .arg(&script_path)
        .current_dir(&folder)
        .output()
        .map_err(DispatchError::io("running", sbatch))?;
    if !output.status.success() {
        return Err(DispatchError::Refused {
            stderr: String::from_utf8_lossy(&output.stderr).trim().to_string(),
        });
    }
    let job = parse_job_id(&String::from_utf8_lossy(&output.stdout))?;
    Ok((job, script_path))
}

/// The job id in what `sbatch --parsable` printed: one line, "ID" or "ID;CLUSTER",
/// with ID all digits. Anything else is refused rather than waited on.
fn parse_job_id(stdout: &str) -> Result<String, DispatchError> {
    let line = stdout.trim();
    let id = line.split(';').next().unwrap_or_default();
    if !line.contains('\n') && !id.is_empty() && id.bytes().all(|b| b.is_ascii_digit()) {
        Ok(id.to_string())
    } else {
        Err(DispatchError::NoJobId {
            printed: line.to_string(),
        })
    }
}

/// How long to wait between polls of a running job.
const POLL_EVERY: Duration = Duration::from_secs(2);
/// How often to ask `squeue` again after it fails, and the first pause (doubled each
/// time): about half a minute in all, enough for a controller that is restarting.
const SQUEUE_ATTEMPTS: u32 = 6;
const FIRST_RETRY_AFTER: Duration = Duration::from_secs(1);

/// Waits until no task of the job is queued or running, for at most `timeout`.
pub(crate) fn wait_for(job: &str, squeue: &Path, timeout: Duration) -> Result<(), DispatchError> {
    let started = std::time::Instant::now();
    while asked_with_retries(job, squeue)? {
        let waited = started.elapsed();
        if waited >= timeout {
            return Err(DispatchError::StillRunning {
                job: job.to_string(),
                timeout,
            });
        }
        std::thread::sleep(POLL_EVERY.min(timeout - waited));
    }
    Ok(())
}

/// Whether the job is still in the queue, asking again with a growing pause while
/// `squeue` fails: a busy or restarting controller must not end the wait.
fn asked_with_retries(job: &str, squeue: &Path) -> Result<bool, DispatchError> {
    let mut pause = FIRST_RETRY_AFTER;
    let mut attempt = 1;
    loop {
        match is_queued(job, squeue) {
            Ok(queued) => return Ok(queued),
            Err(error) if attempt >= SQUEUE_ATTEMPTS => {
                return Err(DispatchError::QueueUnreachable {
                    job: job.to_string(),
                    attempts: attempt,
                    last: Box::new(error),
                });
            }
            Err(_) => {
                std::thread::sleep(pause);
                pause *= 2;
                attempt += 1;
            }
        }
    }
}

/// One question to `squeue`: is any task of the job queued or running?
fn is_queued(job: &str, squeue: &Path) -> Result<bool, DispatchError> {
    let output = Command::new(squeue)
        .args(["-h", "-j", job, "-o", "%i"])
        .output()
        .map_err(DispatchError::io("running", squeue))?;
    let stderr = String::from_utf8_lossy(&output.stderr);
    queue_answer(output.status.success(), &output.stdout, &stderr)
}

/// Reads squeue's answer. It refuses a job id it no longer knows, which means the job
/// is over; any other failure says nothing about the job.
fn queue_answer(success: bool, stdout: &[u8], stderr: &str) -> Result<bool, DispatchError> {
    if success {
        Ok(!stdout.iter().all(u8::is_ascii_whitespace))
    } else if stderr.to_ascii_lowercase().contains("invalid job id") {
        Ok(false)
    } else {
        Err(DispatchError::QueueFailed {
            stderr: stderr.trim().to_string(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_script_runs_one_share_per_array_task() {
        let options = PlanOptions::default();
        let request = DispatchRequest {
            document: Path::new("/data/exp/hives.md"),
            cache_dir: Path::new("/shared/cache"),
            tasks: 4,
            sbatch_options: &[],
            plan: &options,
        };
        let script = job_script(
            &request,
            Path::new("/opt/stet"),
            Path::new("/shared/cache/dispatch"),
        );
        assert!(script.starts_with("#!/bin/sh\n"));
        assert!(script.contains("#SBATCH --output=/shared/cache/dispatch/hives-%A_%a.out"));
        assert!(script.contains(
            "exec /opt/stet build /data/exp/hives.md --cache /shared/cache --shard \"$SLURM_ARRAY_TASK_ID/4\""
        ));
    }

    #[test]
    fn only_a_numeric_job_id_is_taken_from_sbatch() {
        assert_eq!(parse_job_id("4242\n").ok(), Some("4242".into()));
        assert_eq!(parse_job_id("4242;cluster\n").ok(), Some("4242".into()));
        for bad in [
            "",
            "garbage output",
            "Submitted batch job 4242",
            "42 43",
            "4242\n4243",
        ] {
            assert!(parse_job_id(bad).is_err(), "{bad:?} was taken");
        }
    }

    #[test]
    fn an_unknown_job_is_over_but_other_squeue_failures_are_not() {
        assert_eq!(queue_answer(true, b"4242_1\n", "").ok(), Some(true));
        assert_eq!(queue_answer(true, b"\n", "").ok(), Some(false));
        // squeue's words for a job it has forgotten (Slurm 23).
        let forgotten = "slurm_load_jobs error: Invalid job id specified";
        assert_eq!(queue_answer(false, b"", forgotten).ok(), Some(false));
        let down = "slurm_load_jobs error: Unable to contact slurm controller";
        assert!(queue_answer(false, b"", down).is_err());
    }

    #[test]
    fn a_refused_job_id_keeps_the_text_sbatch_printed() {
        let error = parse_job_id("Submitted batch job 4242\n").unwrap_err();
        assert!(
            matches!(&error, DispatchError::NoJobId { printed } if printed == "Submitted batch job 4242"),
            "{error:?}"
        );
        assert!(error.to_string().starts_with(
            "sbatch printed \"Submitted batch job 4242\" where a job id was expected"
        ));
    }

    #[test]
    fn a_failing_squeue_keeps_its_own_words() {
        // Slurm 23's message when the controller is down.
        let down = "slurm_load_jobs error: Unable to contact slurm controller\n";
        let error = queue_answer(false, b"", down).unwrap_err();
        assert!(
            matches!(&error, DispatchError::QueueFailed { stderr } if stderr == down.trim()),
            "{error:?}"
        );
    }

    #[test]
    fn a_wait_that_runs_out_names_the_job_and_the_timeout() {
        let error = DispatchError::StillRunning {
            job: "4242".into(),
            timeout: Duration::from_secs(90),
        };
        assert!(
            error
                .to_string()
                .starts_with("job 4242 is still running after 1m 30s (--wait-timeout)"),
            "{error}"
        );
    }

    #[test]
    fn paths_with_spaces_are_quoted() {
        assert_eq!(shell_quote("/a b/c"), "'/a b/c'");
        assert_eq!(shell_quote("/plain/path"), "/plain/path");
    }
}
