//! The command line: argument types (clap) and [`run`], which maps every command to an
//! [`Outcome`] that `main` turns into an exit code (0 all inputs ran, 1 some input had problems,
//! 2 usage or system error).

use std::io::{self, IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::AtomicBool;
use std::time::Duration;

use anyhow::{Context, bail};
use clap::{Parser, Subcommand};

use crate::check;
use crate::pipeline::{Pipeline, problem_line};
use crate::watch::{self, Attempt, BatchOptions, Shard, Status, WatchOptions};
use crate::workbook::template::{self, Kind};

/// Moisture diffusion in drying wood, food and ceramics, from case workbooks to result workbooks.
#[derive(Debug, Parser)]
#[command(name = "dampfront", version, about, long_about = None)]
pub struct Cli {
    /// Log as JSON lines (for log collectors) instead of plain text.
    #[arg(long, global = true)]
    pub log_json: bool,
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Run each case workbook once; results go next to each input unless --out is given.
    Solve {
        /// Case workbooks (.xlsx .xlsm .xls .ods .csv).
        #[arg(required = true)]
        files: Vec<PathBuf>,
        /// Write results into this folder.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Also write <stem>.curves.csv and <stem>.profiles.csv.
        #[arg(long)]
        csv: bool,
        /// Seconds one case may compute before it is stopped with a message.
        #[arg(long, value_name = "SECS", default_value_t = crate::limits::CASE_SECONDS)]
        case_seconds: f64,
        /// Print one JSON object per input (summary keys and values, warnings, problems,
        /// output paths) instead of the plain lines.
        #[arg(long)]
        json: bool,
    },
    /// Watch a folder and answer every new or changed workbook with its result; runs until
    /// SIGINT or SIGTERM.
    Watch {
        /// The folder.
        dir: PathBuf,
        /// Cases run at once, at least 1 (default: available cores).
        #[arg(long, value_parser = jobs_parser())]
        jobs: Option<usize>,
        /// Wait until a file's size and time have been still this long, ms.
        #[arg(long, default_value_t = 1000)]
        settle_ms: u64,
        /// Poll the folder every SECS seconds instead of using file events (network shares).
        #[arg(long, value_name = "SECS")]
        poll: Option<f64>,
        /// Also watch sub-folders.
        #[arg(long)]
        recursive: bool,
        /// Rescan interval, s (events can be missed).
        #[arg(long, default_value_t = 30.0, hide = true)]
        rescan_secs: f64,
        /// Age after which another watcher's abandoned lock is taken over, s.
        #[arg(long, default_value_t = 600.0, hide = true)]
        stale_lock_secs: f64,
        /// How long running cases may finish after SIGINT/SIGTERM, s.
        #[arg(long, default_value_t = 30.0, hide = true)]
        grace_secs: f64,
        /// Seconds one case may compute before it is stopped with a message.
        #[arg(long, value_name = "SECS", default_value_t = crate::limits::FOLDER_CASE_SECONDS)]
        case_seconds: f64,
    },
    /// One pass over a folder with the watcher's rules, then a closing table.
    Batch {
        /// The folder.
        dir: PathBuf,
        /// Cases run at once, at least 1 (default: available cores).
        #[arg(long, value_parser = jobs_parser())]
        jobs: Option<usize>,
        /// Run every input, even those with an up-to-date result.
        #[arg(long)]
        force: bool,
        /// Run only share I of N (inputs whose sorted position modulo N is I-1).
        #[arg(long, value_name = "I/N")]
        shard: Option<Shard>,
        /// Also run sub-folders.
        #[arg(long)]
        recursive: bool,
        /// Print one JSON object per input that ran on standard output (the closing table
        /// goes to standard error).
        #[arg(long)]
        json: bool,
        /// Wait until a file's size and time have been still this long, ms.
        #[arg(long, default_value_t = 1000, hide = true)]
        settle_ms: u64,
        /// Age after which an abandoned lock is taken over, s.
        #[arg(long, default_value_t = 600.0, hide = true)]
        stale_lock_secs: f64,
        /// Seconds one case may compute before it is stopped with a message.
        #[arg(long, value_name = "SECS", default_value_t = crate::limits::FOLDER_CASE_SECONDS)]
        case_seconds: f64,
    },
    /// Write a ready-to-run example workbook: wood, food, clay, blank or lab.
    New {
        /// wood, food, clay, blank or lab.
        kind: String,
        /// The workbook to write (.xlsx, or .csv for the sectioned CSV form).
        file: PathBuf,
    },
    /// Run the built-in analytical checks (series solutions against the engine) and print a table.
    Verify,
    /// Internal: read spreadsheet bytes from standard input in a memory-limited child process.
    #[command(name = "read-cells-child", hide = true)]
    ReadCellsChild {
        /// The extension of the file the bytes came from.
        extension: String,
    },
    /// Internal: read many spreadsheets, one per request on standard input, in a
    /// memory-limited child process of `batch` and `watch`.
    #[command(name = "read-cells-server", hide = true)]
    ReadCellsServer,
}

/// How a command ended, for the exit code.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Everything ran.
    Ok,
    /// Some input had problems (or a check failed).
    Problems,
}

/// The longest time any option takes, s (about 31 years): larger values would overflow the
/// clock arithmetic.
const MAX_OPTION_SECS: f64 = 1e9;

fn secs(v: f64, what: &str) -> anyhow::Result<Duration> {
    if !(0.0..=MAX_OPTION_SECS).contains(&v) {
        bail!("{what} must be a number of seconds from 0 to {MAX_OPTION_SECS:e}, found {v}");
    }
    Duration::try_from_secs_f64(v)
        .with_context(|| format!("{what} must be a number of seconds >= 0"))
}

/// The shortest polling interval, s: below it polling would keep a core busy.
const MIN_POLL_SECS: f64 = 0.1;

/// `--jobs` takes a whole number of at least 1 (0 would run nothing).
fn jobs_parser() -> clap::builder::RangedU64ValueParser<usize> {
    clap::builder::RangedU64ValueParser::<usize>::new().range(1..)
}

fn jobs(j: Option<usize>) -> usize {
    j.unwrap_or(0)
}

/// Writes to stdout; a closed pipe (e.g. `| head`) is not an error.
fn print(text: &str) -> anyhow::Result<()> {
    let mut out = io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Err(e) if e.kind() != io::ErrorKind::BrokenPipe => Err(e.into()),
        _ => Ok(()),
    }
}

/// Runs a parsed command line.
pub fn run(cli: Cli) -> anyhow::Result<Outcome> {
    match cli.command {
        Command::Solve {
            files,
            out,
            csv,
            case_seconds,
            json,
        } => {
            // One file keeps the one-shot reader child; several share a pooled one.
            let base = pipeline(case_seconds)?;
            let base = if files.len() > 1 {
                base.reading_many()
            } else {
                base
            };
            solve(&files, out, csv, json, base)
        }
        Command::Watch {
            dir,
            jobs: j,
            settle_ms,
            poll,
            recursive,
            rescan_secs,
            stale_lock_secs,
            grace_secs,
            case_seconds,
        } => {
            let mut opts = WatchOptions::new(dir);
            opts.jobs = jobs(j);
            opts.settle = Duration::from_millis(settle_ms);
            if let Some(p) = poll
                && p < MIN_POLL_SECS
            {
                bail!("--poll must be at least {MIN_POLL_SECS} s, found {p}");
            }
            opts.poll = poll.map(|p| secs(p, "--poll")).transpose()?;
            opts.recursive = recursive;
            opts.rescan = secs(rescan_secs, "--rescan-secs")?;
            opts.stale_lock = secs(stale_lock_secs, "--stale-lock-secs")?;
            opts.grace = secs(grace_secs, "--grace-secs")?;
            watch::watch(
                &opts,
                Arc::new(pipeline(case_seconds)?.with_jobs(opts.jobs).reading_many()),
            )?;
            Ok(Outcome::Ok)
        }
        Command::Batch {
            dir,
            jobs: j,
            force,
            shard,
            recursive,
            json,
            settle_ms,
            stale_lock_secs,
            case_seconds,
        } => {
            let mut opts = BatchOptions::new(dir);
            opts.jobs = jobs(j);
            opts.force = force;
            opts.shard = shard;
            opts.recursive = recursive;
            opts.settle = Duration::from_millis(settle_ms);
            opts.stale_lock = secs(stale_lock_secs, "--stale-lock-secs")?;
            opts.progress = io::stderr().is_terminal();
            let pipeline = Pipeline {
                json_lines: json,
                ..pipeline(case_seconds)?.with_jobs(opts.jobs).reading_many()
            };
            let summary = watch::batch(&opts, Arc::new(pipeline))?;
            if json {
                // Inputs that needed a run but were not run get an object of their own.
                for s in &summary.skipped {
                    crate::pipeline::print_line(
                        &serde_json::json!({
                            "file": opts.dir.join(&s.file).display().to_string(),
                            "status": "skipped",
                            "detail": s.reason.to_string(),
                        })
                        .to_string(),
                    );
                }
                eprint!("{summary}");
            } else {
                print(&summary.to_string())?;
            }
            if summary.interrupted {
                let n = summary.not_run();
                bail!("the pass was interrupted by a signal; {n} input(s) were not run");
            }
            let locked = summary.locked();
            if locked > 0 {
                // Not every input ran: another runner holds them. Exit 2, as for a stop.
                bail!(
                    "{locked} input(s) were locked by another runner and not run by this pass; \
                     run the pass again once that runner has finished"
                );
            }
            Ok(if summary.any_problems() {
                Outcome::Problems
            } else {
                Outcome::Ok
            })
        }
        Command::New { kind, file } => new(&kind, &file),
        Command::Verify => verify(),
        Command::ReadCellsChild { extension } => {
            match crate::workbook::read::child_main(&extension) {
                0 => Ok(Outcome::Ok),
                code => bail!("the reader process failed ({code})"),
            }
        }
        Command::ReadCellsServer => match crate::workbook::read::server_main() {
            0 => Ok(Outcome::Ok),
            code => bail!("the reader process failed ({code})"),
        },
    }
}

/// The pipeline of the commands that run cases: spreadsheets read in a child process, each
/// case stopped after `case_seconds` of computing.
fn pipeline(case_seconds: f64) -> anyhow::Result<Pipeline> {
    secs(case_seconds, "--case-seconds")?;
    Ok(Pipeline {
        case_seconds: Some(case_seconds),
        ..Pipeline::isolated()
    })
}

fn solve(
    files: &[PathBuf],
    out: Option<PathBuf>,
    csv: bool,
    json: bool,
    base: Pipeline,
) -> anyhow::Result<Outcome> {
    if let Some(dir) = &out {
        std::fs::create_dir_all(dir)
            .with_context(|| format!("could not create the output folder {}", dir.display()))?;
    }
    let pipeline = Pipeline {
        out_dir: out,
        csv,
        progress: io::stderr().is_terminal(),
        json_lines: false,
        ..base
    };
    let cancel = AtomicBool::new(false);
    let mut outcome = Outcome::Ok;
    let mut system_error = None;
    for file in files {
        let result = pipeline.run_file(file, Attempt::Final, &cancel);
        let mut lines = String::new();
        if json {
            lines.push_str(&result.json_line(file));
            lines.push('\n');
        } else {
            for p in &result.problems {
                lines.push_str(&problem_line(file, p));
                lines.push('\n');
            }
            if let Some(line) = result.plain_line(file) {
                lines.push_str(&line);
                lines.push('\n');
            }
        }
        print(&lines)?;
        tracing::info!(
            file = %file.display(),
            status = %result.report.status,
            seconds = result.seconds,
            "{}",
            result.report.detail
        );
        match result.report.status {
            Status::Solved | Status::TargetNotReached => {}
            Status::Problems | Status::NotReady => outcome = Outcome::Problems,
            Status::Failed => {
                system_error = Some(format!("{}: {}", file.display(), result.report.detail))
            }
        }
    }
    if let Some(e) = system_error {
        bail!(e);
    }
    Ok(outcome)
}

fn new(kind: &str, file: &Path) -> anyhow::Result<Outcome> {
    let Some(kind) = Kind::from_name(kind) else {
        bail!("unknown example kind {kind:?}: choose wood, food, clay, blank or lab");
    };
    if file.exists() {
        bail!(
            "{} already exists; choose another name (nothing was overwritten)",
            file.display()
        );
    }
    let extension = file
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase());
    let is_csv = match extension.as_deref() {
        Some("csv") => true,
        Some("xlsx") => false,
        _ => bail!(
            "{}: examples are written as .xlsx or as sectioned .csv; choose a name ending in \
             .xlsx or .csv (nothing was written)",
            file.display()
        ),
    };
    let sheets = template::sheets(kind);
    let bytes = if is_csv {
        template::to_csv(&sheets).into_bytes()
    } else {
        template::to_xlsx(&sheets)?
    };
    crate::workbook::write::write_atomically(file, &bytes)
        .with_context(|| format!("could not write {}", file.display()))?;
    print(&format!(
        "wrote {} ({} example)\n",
        file.display(),
        kind.name()
    ))?;
    Ok(Outcome::Ok)
}

fn verify() -> anyhow::Result<Outcome> {
    let rows = check::verify();
    let mut text = format!(
        "{:<44} {:>12} {:>10} {:>12} {:>6}\n",
        "case", "max error", "limit", "mass bal.", "pass"
    );
    for r in &rows {
        text.push_str(&format!(
            "{:<44} {:>12.3e} {:>10.0e} {:>12.1e} {:>6}\n",
            r.name,
            r.max_error,
            r.limit,
            r.mass_balance_error,
            if r.passed() { "yes" } else { "NO" }
        ));
    }
    let failed = rows.iter().filter(|r| !r.passed()).count();
    text.push_str(&format!(
        "{} of {} checks passed (series: J. Crank, The Mathematics of Diffusion, 2nd ed., 1975)\n",
        rows.len() - failed,
        rows.len()
    ));
    print(&text)?;
    Ok(if failed == 0 {
        Outcome::Ok
    } else {
        Outcome::Problems
    })
}

/// Whether log lines carry colour: only on a terminal, and never when `NO_COLOR` is set to
/// anything but an empty value (the convention of no-color.org).
pub fn use_colour(is_terminal: bool, no_color: Option<&std::ffi::OsStr>) -> bool {
    is_terminal && no_color.is_none_or(|v| v.is_empty())
}

/// Sets up logging to standard error.
pub fn init_logging(json: bool) {
    let filter = tracing_subscriber::EnvFilter::try_from_default_env()
        .unwrap_or_else(|_| tracing_subscriber::EnvFilter::new("info"));
    let no_color = std::env::var_os("NO_COLOR");
    let builder = tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_writer(io::stderr)
        .with_ansi(use_colour(io::stderr().is_terminal(), no_color.as_deref()))
        .with_target(false);
    if json {
        builder.json().init();
    } else {
        builder.init();
    }
}
