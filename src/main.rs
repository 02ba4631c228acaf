//! The `stet` command: parse the command line, call the library, print what happened
//! and map it to an exit code (0 all steps succeeded, 1 a step failed, 2 unusable input).

use std::io::IsTerminal;
use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Duration;

use clap::{Parser, Subcommand};
use stet::plan::{Limits, PlanOptions};
use stet::{BuildOptions, CacheChoice, Error, Share, WatchOptions, console};

#[derive(Parser)]
#[command(
    name = "stet",
    version,
    about = "Run a Markdown experiment document and render its report"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

/// What a document may touch; shared by every command that reads documents.
#[derive(clap::Args)]
struct DocumentFlags {
    /// Let the document read and write files outside its project folder.
    #[arg(long)]
    allow_outside: bool,
    /// Widest hidden layer a document may declare.
    #[arg(long, value_name = "UNITS", default_value_t = Limits::default().max_layer_width)]
    max_layer_width: usize,
    /// Most hidden layers a network may have.
    #[arg(long, value_name = "LAYERS", default_value_t = Limits::default().max_layers)]
    max_layers: usize,
    /// Most weights and biases a network may have.
    #[arg(long, value_name = "WEIGHTS", default_value_t = Limits::default().max_weights)]
    max_weights: u64,
    /// Most training runs one sweep may ask for.
    #[arg(long, value_name = "RUNS", default_value_t = Limits::default().max_sweep_runs)]
    max_sweep_runs: usize,
    /// Most row passes (runs × epochs × rows) one train step or sweep may ask for.
    #[arg(long, value_name = "ROW-PASSES", default_value_t = Limits::default().max_work)]
    max_work: u64,
    /// Largest file a step may read, in MiB.
    #[arg(long, value_name = "MIB", default_value_t = Limits::default().max_file_bytes >> 20)]
    max_file_mb: u64,
    /// Most distinct texts a text input (one-hot encoded) or classes a target may have.
    #[arg(long, value_name = "N", default_value_t = Limits::default().max_categories)]
    max_categories: usize,
}

impl DocumentFlags {
    fn options(&self) -> PlanOptions {
        PlanOptions {
            allow_outside: self.allow_outside,
            limits: Limits {
                max_layer_width: self.max_layer_width,
                max_layers: self.max_layers,
                max_weights: self.max_weights,
                max_sweep_runs: self.max_sweep_runs,
                max_work: self.max_work,
                max_file_bytes: self.max_file_mb << 20,
                max_categories: self.max_categories,
            },
        }
    }
}

#[derive(Subcommand)]
enum Command {
    /// Run every step whose result is not cached and render the report.
    Build {
        /// The experiment document (Markdown).
        document: PathBuf,
        /// Where to write the report [default: DOC.html beside DOC.md].
        #[arg(short = 'o', long = "output", value_name = "OUT.html")]
        output: Option<PathBuf>,
        /// Also write a JSON summary of every step.
        #[arg(long, value_name = "SUMMARY.json")]
        json: Option<PathBuf>,
        /// The cache folder [default: $STET_CACHE, else .stet/ beside the document].
        #[arg(long, value_name = "DIR")]
        cache: Option<PathBuf>,
        /// Run everything and write nothing to the cache.
        #[arg(long, conflicts_with = "cache")]
        no_cache: bool,
        /// Training runs at once [default: the number of cores].
        #[arg(long, value_name = "N")]
        jobs: Option<usize>,
        /// Read report templates from this folder instead of the built-in ones.
        #[arg(long, value_name = "DIR")]
        templates: Option<PathBuf>,
        /// Render raw HTML in the document's prose instead of showing it as text.
        #[arg(long)]
        allow_html: bool,
        /// The most the experiment the report carries may take, compressed, with the
        /// data files its steps read; past it the report carries only their hashes.
        #[arg(long, value_name = "MIB", default_value_t = stet::DEFAULT_EMBED_MB)]
        embed_data_mb: u64,
        /// Carry only the document and the hashes of its data files, not the files.
        #[arg(long)]
        no_embed_data: bool,
        /// Train only share K of N of the uncached runs into the cache and render no
        /// report (what each task of `stet dispatch` runs).
        #[arg(long, value_name = "K/N")]
        shard: Option<Share>,
        #[command(flatten)]
        flags: DocumentFlags,
    },
    /// Spread the document's uncached runs over a Slurm job array sharing one cache.
    Dispatch {
        document: PathBuf,
        /// How many array tasks to split the runs into.
        #[arg(long, value_name = "N")]
        tasks: usize,
        /// The shared cache folder [default: $STET_CACHE, else .stet/ beside the document].
        #[arg(long, value_name = "DIR")]
        cache: Option<PathBuf>,
        /// Wait for the job, then build the report.
        #[arg(long)]
        wait: bool,
        /// The longest --wait waits for the job, e.g. 90m or 2days.
        #[arg(long, value_name = "DURATION", default_value = "24h", value_parser = humantime::parse_duration)]
        wait_timeout: Duration,
        #[command(flatten)]
        flags: DocumentFlags,
        /// Options passed to sbatch (after `--`), e.g. -- --partition=short --time=1:00:00 --cpus-per-task=4
        #[arg(last = true, value_name = "SBATCH-OPTIONS")]
        sbatch: Vec<String>,
    },
    /// List each step with its short key and whether a build would reuse or run it.
    Status {
        document: PathBuf,
        /// The cache folder [default: $STET_CACHE, else .stet/ beside the document].
        #[arg(long, value_name = "DIR")]
        cache: Option<PathBuf>,
        #[command(flatten)]
        flags: DocumentFlags,
    },
    /// Remove cache entries that no named document uses (no document: the whole cache).
    Clean {
        documents: Vec<PathBuf>,
        /// The cache folder [default: $STET_CACHE, else .stet/ beside the first document].
        #[arg(long, value_name = "DIR")]
        cache: Option<PathBuf>,
        /// List what would be removed, and its size, and remove nothing.
        #[arg(long)]
        dry_run: bool,
        #[command(flatten)]
        flags: DocumentFlags,
    },
    /// Write out the document and data files a report carries, ready to rebuild.
    Unpack {
        /// The report (HTML) that `stet build` wrote.
        report: PathBuf,
        /// The folder to write into [default: one named after the report, here].
        dir: Option<PathBuf>,
        /// Replace files that already exist.
        #[arg(long)]
        force: bool,
    },
    /// Compare two builds, each a report or a --json summary: settings changed, status,
    /// how each metric moved, steps and sweep combinations added or removed.
    Diff {
        /// The earlier build.
        old: PathBuf,
        /// The later build.
        new: PathBuf,
        /// Write the comparison as a page in the report's look instead of printing it.
        #[arg(long, value_name = "OUT.html")]
        html: Option<PathBuf>,
        /// Write the comparison as JSON for scripts instead of printing it.
        #[arg(long, value_name = "OUT.json")]
        json: Option<PathBuf>,
    },
    /// Build, serve the report on 127.0.0.1, and build again whenever the document or a
    /// file it reads changes; the open page updates itself.
    Watch {
        document: PathBuf,
        /// The port to serve on [default: a free one, printed].
        #[arg(long, value_name = "N")]
        port: Option<u16>,
        /// The cache folder [default: $STET_CACHE, else .stet/ beside the document].
        #[arg(long, value_name = "DIR")]
        cache: Option<PathBuf>,
        /// Training runs at once [default: the number of cores].
        #[arg(long, value_name = "N")]
        jobs: Option<usize>,
        /// Open the page in the system browser, when one is found.
        #[arg(long)]
        open: bool,
        #[command(flatten)]
        flags: DocumentFlags,
    },
    /// Print the JSON Schema of step blocks and front matter, for editors.
    Schema,
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(cli.command) {
        Ok(code) => code,
        Err(error) => {
            console::print(&console::error(&error, console::stderr_decoration()));
            ExitCode::from(2)
        }
    }
}

fn run(command: Command) -> Result<ExitCode, Error> {
    match command {
        Command::Build {
            document,
            output,
            json,
            cache,
            no_cache,
            jobs,
            templates,
            allow_html,
            embed_data_mb,
            no_embed_data,
            shard,
            flags,
        } => {
            let options = BuildOptions {
                document,
                output,
                json,
                cache: if no_cache {
                    CacheChoice::Off
                } else {
                    cache_choice(cache)
                },
                jobs: jobs.unwrap_or_else(default_jobs),
                templates,
                allow_html,
                embed_limit: (!no_embed_data).then_some(embed_data_mb << 20),
                plan: flags.options(),
            };
            if let Some(share) = shard {
                let done = stet::build_share(&options, share)?;
                console::print(&console::share(share, &done));
                return Ok(if done.failed.is_empty() {
                    ExitCode::SUCCESS
                } else {
                    ExitCode::from(1)
                });
            }
            let summary = stet::build(&options)?;
            console::print(&console::build(&summary));
            Ok(build_exit_code(&summary))
        }
        Command::Dispatch {
            document,
            tasks,
            cache,
            wait,
            wait_timeout,
            flags,
            sbatch,
        } => {
            let options = BuildOptions {
                document,
                output: None,
                json: None,
                cache: cache_choice(cache),
                jobs: default_jobs(),
                templates: None,
                allow_html: false,
                embed_limit: Some(stet::DEFAULT_EMBED_MB << 20),
                plan: flags.options(),
            };
            let dispatched =
                stet::dispatch(&options, tasks, wait.then_some(wait_timeout), &sbatch)?;
            console::print(&console::dispatched(&dispatched));
            Ok(match &dispatched.finished {
                None => ExitCode::SUCCESS,
                Some(Ok(summary)) => build_exit_code(summary),
                Some(Err(_missing)) => ExitCode::from(1),
            })
        }
        Command::Status {
            document,
            cache,
            flags,
        } => {
            let report = stet::status(&document, &cache_choice(cache), &flags.options())?;
            console::print(&console::status(&report));
            Ok(ExitCode::SUCCESS)
        }
        Command::Clean {
            documents,
            cache,
            dry_run,
            flags,
        } => {
            let cleaning =
                stet::clean(&documents, &cache_choice(cache), &flags.options(), dry_run)?;
            console::print(&console::clean(&cleaning, dry_run));
            Ok(ExitCode::SUCCESS)
        }
        Command::Unpack { report, dir, force } => {
            let unpacked = stet::unpack(&report, dir.as_deref(), force)?;
            console::print(&console::unpacked(&unpacked));
            Ok(ExitCode::SUCCESS)
        }
        Command::Diff {
            old,
            new,
            html,
            json,
        } => {
            // Plain text when piped, or when the reader asked for no colour.
            let colour = std::io::stdout().is_terminal() && std::env::var_os("NO_COLOR").is_none();
            let lines = stet::diff(&old, &new, &stet::DiffOptions { html, json, colour })?;
            for line in lines {
                println!("{line}");
            }
            Ok(ExitCode::SUCCESS)
        }
        Command::Watch {
            document,
            port,
            cache,
            jobs,
            open,
            flags,
        } => {
            let build = BuildOptions {
                document,
                output: None,
                json: None,
                cache: cache_choice(cache),
                jobs: jobs.unwrap_or_else(default_jobs),
                templates: None,
                allow_html: false,
                embed_limit: Some(stet::DEFAULT_EMBED_MB << 20),
                plan: flags.options(),
            };
            stet::watch(WatchOptions {
                build,
                port: port.unwrap_or(0),
                open,
            })?;
            Ok(ExitCode::SUCCESS)
        }
        Command::Schema => {
            print!("{}", stet::schema::steps_json());
            Ok(ExitCode::SUCCESS)
        }
    }
}

/// Exit code 1 when a step failed.
fn build_exit_code(summary: &stet::BuildSummary) -> ExitCode {
    if summary.failed.is_empty() {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    }
}

fn cache_choice(dir: Option<PathBuf>) -> CacheChoice {
    dir.map_or(CacheChoice::Default, CacheChoice::Dir)
}

fn default_jobs() -> usize {
    std::thread::available_parallelism().map_or(1, |n| n.get())
}
