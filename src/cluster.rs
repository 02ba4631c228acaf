//! `stet dispatch`: spread a document's uncached runs over a Slurm job array. stet
//! schedules nothing itself: each array task runs `stet build --shard K/N` against one
//! shared cache, and the content-addressed entries make every run an independent,
//! idempotent job. The job script is kept in the cache folder so it can be read and
//! submitted again.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Duration;

use crate::plan::PlanOptions;

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
    pub(crate) fn locate(wait: bool) -> Result<Slurm, String> {
        let find = |name: &str| {
            find_on_path(name)
                .ok_or_else(|| format!("{name} is not on PATH: stet dispatch needs Slurm"))
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
) -> Result<(String, PathBuf), String> {
    let folder = request.cache_dir.join("dispatch");
    std::fs::create_dir_all(&folder).map_err(|e| format!("creating {}: {e}", folder.display()))?;
    let stem = request
        .document
        .file_stem()
        .map_or("stet".into(), |stem| stem.to_string_lossy().into_owned());
    let script_path = folder.join(format!("{stem}.sh"));
    let stet = std::env::current_exe().map_err(|e| format!("locating the stet binary: {e}"))?;
    let script = job_script(request, &stet, &folder);
    crate::cache::atomic::write(&script_path, script.as_bytes())
        .map_err(|e| format!("writing {}: {e}", script_path.display()))?;
    let output = Command::new(sbatch)
        .arg("--parsable")
        .arg(format!("--array=1-{}", request.tasks))
        .args(request.sbatch_options)
        .arg(&script_path)
        .current_dir(&folder)
        .output()
        .map_err(|e| format!("running {}: {e}", sbatch.display()))?;
    if !output.status.success() {
        return Err(format!(
            "sbatch refused the job: {}",
            String::from_utf8_lossy(&output.stderr).trim()
        ));
    }
    let job = parse_job_id(&String::from_utf8_lossy(&output.stdout))?;
    Ok((job, script_path))
}

/// The job id in what `sbatch --parsable` printed: one line, "ID" or "ID;CLUSTER",
/// with ID all digits. Anything else is refused rather than waited on.
fn parse_job_id(stdout: &str) -> Result<String, String> {
    let line = stdout.trim();
    let id = line.split(';').next().unwrap_or_default();
    if !line.contains('\n') && !id.is_empty() && id.bytes().all(|b| b.is_ascii_digit()) {
        Ok(id.to_string())
    } else {
        Err(format!(
            "sbatch printed {line:?} where a job id was expected; the job may have been submitted, check with squeue"
        ))
    }
}

/// How long to wait between polls of a running job.
const POLL_EVERY: Duration = Duration::from_secs(2);
/// How often to ask `squeue` again after it fails, and the first pause (doubled each
/// time): about half a minute in all, enough for a controller that is restarting.
const SQUEUE_ATTEMPTS: u32 = 6;
const FIRST_RETRY_AFTER: Duration = Duration::from_secs(1);

/// Waits until no task of the job is queued or running, for at most `timeout`.
pub(crate) fn wait_for(job: &str, squeue: &Path, timeout: Duration) -> Result<(), String> {
    let started = std::time::Instant::now();
    while asked_with_retries(job, squeue)? {
        let waited = started.elapsed();
        if waited >= timeout {
            return Err(format!(
                "job {job} is still running after {} (--wait-timeout); its tasks keep filling the cache, so build the document once it ends",
                humantime::format_duration(timeout)
            ));
        }
        std::thread::sleep(POLL_EVERY.min(timeout - waited));
    }
    Ok(())
}

/// Whether the job is still in the queue, asking again with a growing pause while
/// `squeue` fails: a busy or restarting controller must not end the wait.
fn asked_with_retries(job: &str, squeue: &Path) -> Result<bool, String> {
    let mut pause = FIRST_RETRY_AFTER;
    let mut attempt = 1;
    loop {
        match is_queued(job, squeue) {
            Ok(queued) => return Ok(queued),
            Err(error) if attempt >= SQUEUE_ATTEMPTS => {
                return Err(format!(
                    "asking squeue about job {job} failed {attempt} times: {error}"
                ));
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
fn is_queued(job: &str, squeue: &Path) -> Result<bool, String> {
    let output = Command::new(squeue)
        .args(["-h", "-j", job, "-o", "%i"])
        .output()
        .map_err(|e| format!("running {}: {e}", squeue.display()))?;
    let stderr = String::from_utf8_lossy(&output.stderr);
    queue_answer(output.status.success(), &output.stdout, &stderr)
}

/// Reads squeue's answer. It refuses a job id it no longer knows, which means the job
/// is over; any other failure says nothing about the job.
fn queue_answer(success: bool, stdout: &[u8], stderr: &str) -> Result<bool, String> {
    if success {
        Ok(!stdout.iter().all(u8::is_ascii_whitespace))
    } else if stderr.to_ascii_lowercase().contains("invalid job id") {
        Ok(false)
    } else {
        Err(format!("squeue failed: {}", stderr.trim()))
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
        assert_eq!(parse_job_id("4242\n"), Ok("4242".into()));
        assert_eq!(parse_job_id("4242;cluster\n"), Ok("4242".into()));
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
        assert_eq!(queue_answer(true, b"4242_1\n", ""), Ok(true));
        assert_eq!(queue_answer(true, b"\n", ""), Ok(false));
        // squeue's words for a job it has forgotten (Slurm 23).
        let forgotten = "slurm_load_jobs error: Invalid job id specified";
        assert_eq!(queue_answer(false, b"", forgotten), Ok(false));
        let down = "slurm_load_jobs error: Unable to contact slurm controller";
        assert!(queue_answer(false, b"", down).is_err());
    }

    #[test]
    fn paths_with_spaces_are_quoted() {
        assert_eq!(shell_quote("/a b/c"), "'/a b/c'");
        assert_eq!(shell_quote("/plain/path"), "/plain/path");
    }
}
