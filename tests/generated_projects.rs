//! Issue 11's generative check, bounded so that every `cargo test` runs it: whole
//! projects (a document and the CSV files it reads) drawn from the grammar in
//! `project_gen/` by a fixed list of seeded byte strings, each built and judged by the
//! oracle there. The `project` fuzz target in `fuzz/` runs the same generator and
//! oracle on libFuzzer's bytes.
//!
//! `STET_GENERATED_PROJECTS=N` runs N projects instead of the default; with
//! `STET_GENERATED_TRACE=1` each project's number goes to standard error before it
//! builds (unbuffered, so it survives an abort), to find the one that took the process
//! down; `STET_GENERATED_SKIP=K` draws and skips the first K, to go on past it.

mod project_gen;

use std::collections::BTreeMap;
use std::io::Write;

use arbitrary::Unstructured;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use project_gen::oracle::{self, Failure};

/// Projects per `cargo test`: about 20 s on one shared core.
const DEFAULT_PROJECTS: usize = 300;
/// Bytes each project is drawn from; more than the grammar reads, so the tail is
/// never cut short by a run of zeros.
const SEED_BYTES: usize = 8 * 1024;
/// The seed of the list of seeds: any fixed number; this one is the year of issue 11.
const LIST_SEED: u64 = 2027;

#[test]
fn every_generated_project_builds_without_a_panic_a_hang_an_unlocated_error_or_a_lost_file() {
    let quiet = oracle::quiet_panics();
    let count = number_from_env("STET_GENERATED_PROJECTS").unwrap_or(DEFAULT_PROJECTS);
    let skip = number_from_env("STET_GENERATED_SKIP").unwrap_or(0);
    let trace = std::env::var_os("STET_GENERATED_TRACE").is_some();
    let mut seeds = ChaCha8Rng::seed_from_u64(LIST_SEED);
    let mut exits = [0usize; 3];
    let mut located = 0;
    // Each class of failure with how often it happened and its shortest project.
    let mut classes: BTreeMap<String, (usize, usize, Failure, String)> = BTreeMap::new();
    for case in 0..count {
        let mut bytes = vec![0u8; SEED_BYTES];
        seeds.fill_bytes(&mut bytes);
        if case < skip {
            continue;
        }
        let project = project_gen::project(&mut Unstructured::new(&bytes))
            .expect("the grammar draws from any bytes");
        if trace {
            let _ = writeln!(std::io::stderr(), "generated project {case}");
        }
        let verdict = oracle::check(&project);
        if let Some(exit) = verdict.exit {
            exits[usize::from(exit)] += 1;
        }
        located += verdict.located;
        for failure in verdict.failures {
            let shown = describe(case, &project, &failure);
            let entry =
                classes
                    .entry(failure.class())
                    .or_insert((0, usize::MAX, failure, String::new()));
            entry.0 += 1;
            if project.document.len() < entry.1 {
                entry.1 = project.document.len();
                entry.3 = shown;
            }
        }
    }
    drop(quiet);
    eprintln!(
        "{} generated projects: exit 0 {}, exit 1 {}, exit 2 {} ({located} problems, each located)",
        count.saturating_sub(skip),
        exits[0],
        exits[1],
        exits[2]
    );
    let report: Vec<String> = classes
        .iter()
        .map(|(class, (times, _, _, shortest))| {
            format!("== {class} ({times} projects); the shortest:\n{shortest}")
        })
        .collect();
    assert!(
        report.is_empty(),
        "{} classes of failure:\n{}",
        report.len(),
        report.join("\n")
    );
}

fn number_from_env(name: &str) -> Option<usize> {
    std::env::var(name).ok().and_then(|n| n.parse().ok())
}

/// A failure with the project that caused it, ready to paste into a test.
fn describe(case: usize, project: &project_gen::Project, failure: &Failure) -> String {
    let mut text = format!(
        "project {case}: {failure}\n--- {}\n{}",
        project_gen::DOCUMENT,
        String::from_utf8_lossy(&project.document)
    );
    for (name, bytes) in &project.files {
        let shown = String::from_utf8_lossy(bytes);
        let head: Vec<&str> = shown.lines().take(4).collect();
        text.push_str(&format!(
            "\n--- {name} (first lines)\n{}\n",
            head.join("\n")
        ));
    }
    text
}
