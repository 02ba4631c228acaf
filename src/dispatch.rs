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
pub struct DispatchRequest<'a> {
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
pub fn job_script(request: &DispatchRequest<'_>, stet: &Path, log_dir: &Path) -> String {
    let quote = |path: &Path| shell_quote(&path.display().to_string());
    let mut flags = String::new();
    if request.plan.allow_outside {
        flags.push_str(" --allow-outside");
    }
    let limits = request.plan.limits;
    flags.push_str(&format!(
        " --max-layer-width {} --max-layers {} --max-weights {} --max-sweep-runs {} --max-work {} --max-file-mb {}",
        limits.max_layer_width,
        limits.max_layers,
        limits.max_weights,
        limits.max_sweep_runs,
        limits.max_work,
        limits.max_file_bytes >> 20
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

/// Writes the script beside the cache and submits it; returns the job id and the
/// script's path.
pub fn submit(request: &DispatchRequest<'_>) -> Result<(String, PathBuf), String> {
    let folder = request.cache_dir.join("dispatch");
    std::fs::create_dir_all(&folder).map_err(|e| format!("creating {}: {e}", folder.display()))?;
    let stem = request
        .document
        .file_stem()
        .map_or("stet".into(), |stem| stem.to_string_lossy().into_owned());
    let script_path = folder.join(format!("{stem}.sh"));
    let stet = std::env::current_exe().map_err(|e| format!("locating the stet binary: {e}"))?;
    let script = job_script(request, &stet, &folder);
    crate::atomic::write(&script_path, script.as_bytes())
        .map_err(|e| format!("writing {}: {e}", script_path.display()))?;
    let output = Command::new("sbatch")
        .arg("--parsable")
        .arg(format!("--array=1-{}", request.tasks))
        .args(request.sbatch_options)
        .arg(&script_path)
        .current_dir(&folder)
        .output()
        .map_err(|e| format!("running sbatch: {e} (is Slurm installed and on PATH?)"))?;
    if !output.status.success() {
        return Err(format!(
            "sbatch refused the job: {}",
            String::from_utf8_lossy(&output.stderr).trim()
        ));
    }
    let stdout = String::from_utf8_lossy(&output.stdout);
    // --parsable prints "id" or "id;cluster".
    let job = stdout
        .trim()
        .split(';')
        .next()
        .unwrap_or_default()
        .to_string();
    if job.is_empty() {
        return Err("sbatch printed no job id".into());
    }
    Ok((job, script_path))
}

/// Waits until no task of the job is queued or running.
pub fn wait_for(job: &str) -> Result<(), String> {
    loop {
        let output = Command::new("squeue")
            .args(["-h", "-j", job, "-o", "%i"])
            .output()
            .map_err(|e| format!("running squeue: {e}"))?;
        // squeue fails for a job id it no longer knows: the job is over.
        if !output.status.success() || output.stdout.iter().all(u8::is_ascii_whitespace) {
            return Ok(());
        }
        std::thread::sleep(Duration::from_secs(2));
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
    fn paths_with_spaces_are_quoted() {
        assert_eq!(shell_quote("/a b/c"), "'/a b/c'");
        assert_eq!(shell_quote("/plain/path"), "/plain/path");
    }
}
