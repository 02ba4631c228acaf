//! `--jobs` bounds the threads that do arithmetic, on every processor: the training
//! pool never outgrows the cores, and the matrix products of processors without
//! AVX-512 (forced here with `STET_GEMM_PORTABLE`) start no threads of their own.

mod common;

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::Duration;

use common::Workspace;

/// Iris with layers wide enough that every product goes to a packed kernel (over
/// 2¹⁷ multiply–adds), trained long enough for the threads to be counted.
const WIDE: &str = "```yaml data iris\nfile: iris.csv\ntarget: species\n```\n\n```yaml net wide\nhidden: [256, 256]\n```\n\n```yaml train base\ndata: iris\nnet: wide\nbatch: full\nepochs: 30\n```\n";

/// The most threads the stet process had at once while building `WIDE` with
/// `--jobs jobs`, read from /proc/PID/task; `None` where there is no /proc.
fn most_threads(jobs: &str) -> Option<usize> {
    if !Path::new("/proc/self/task").exists() {
        eprintln!("skipped: this system has no /proc/PID/task to count threads in");
        return None;
    }
    let ws = Workspace::new();
    ws.write("doc.md", WIDE);
    let mut child = Command::new(env!("CARGO_BIN_EXE_stet"))
        .args(["build", "doc.md", "--no-cache", "--jobs", jobs])
        .current_dir(ws.dir.path())
        .env_remove("STET_CACHE")
        .env("STET_GEMM_PORTABLE", "1")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("the stet binary runs");
    let tasks = format!("/proc/{}/task", child.id());
    let mut most = 0;
    while child.try_wait().unwrap().is_none() {
        if let Ok(entries) = std::fs::read_dir(&tasks) {
            most = most.max(entries.count());
        }
        std::thread::sleep(Duration::from_millis(2));
    }
    assert!(child.wait().unwrap().success(), "the build failed");
    Some(most)
}

#[test]
fn with_one_job_the_products_without_avx512_add_no_threads() {
    // The main thread and the pool's one.
    if let Some(most) = most_threads("1") {
        assert!(most <= 2, "{most} threads with --jobs 1");
    }
}

#[test]
fn more_jobs_than_cores_start_no_more_threads_than_cores() {
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    if let Some(most) = most_threads("10000") {
        assert!(
            most <= 1 + cores,
            "{most} threads with --jobs 10000 on {cores} cores"
        );
    }
}
