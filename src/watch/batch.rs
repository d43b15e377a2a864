//! One pass over a folder with the daemon's rules, for cron, a systemd timer or an array job.
//!
//! The pass lists the inputs, keeps its shard's share, keeps the stale ones (all of them with
//! `force`), and runs them on `jobs` threads: each waits for its file to settle, takes the
//! lock (so a batch and a watcher can share a folder), runs the processor with the same
//! `NotReady` back-off as the daemon, and records a [`BatchRow`]. SIGINT/SIGTERM stop it:
//! files not yet started are skipped, running ones are cancelled, locks are removed, and a
//! second signal ends the process at once (its locks then go stale and are taken over later).

use std::fmt;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant, SystemTime};

use indicatif::{ProgressBar, ProgressStyle};

use super::daemon::check_dir;
use super::filter::{clash_winner, scan};
use super::job::{Context, Outcome};
use super::lock::{LockOwner, remove_old_leftovers};
use super::settle::{Snapshot, next_attempt, sleep_unless, wait_settled};
use super::{Attempt, BatchOptions, Processor, Report, Status, WatchError, is_stale, worker_count};

/// One input that ran.
#[derive(Debug, Clone, PartialEq)]
pub struct BatchRow {
    /// The input, relative to the batch folder.
    pub file: PathBuf,
    /// How its last try ended.
    pub status: Status,
    /// The drying time in hours, when the case reached its target.
    pub drying_time_h: Option<f64>,
    /// Wall-clock seconds from the first try to the answer, waits between tries included.
    pub seconds: f64,
}

/// Why an input that needed a run was not run by this pass.
#[derive(Debug, Clone, PartialEq, Eq)]
#[non_exhaustive]
pub enum SkipReason {
    /// Another runner holds its lock; the text says who.
    Locked(String),
    /// Another runner finished it between the listing and our lock.
    DoneElsewhere,
    /// It disappeared before it could be run.
    Vanished,
    /// The pass was interrupted before it started.
    Interrupted,
    /// Another input beside it has the same stem (so the same result, errors workbook and
    /// lock); that one, the most recently modified, was run instead.
    NameClash(PathBuf),
}

/// An input that needed a run but was not run by this pass.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Skipped {
    /// The input, relative to the batch folder.
    pub file: PathBuf,
    /// Why it was not run.
    pub reason: SkipReason,
}

/// What one pass did.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct BatchSummary {
    /// Inputs that ran, in path order.
    pub rows: Vec<BatchRow>,
    /// Inputs that needed a run but were not run, in path order.
    pub skipped: Vec<Skipped>,
    /// Inputs of this shard that were already up to date (and not forced).
    pub up_to_date: usize,
    /// The pass was stopped (SIGINT/SIGTERM or the stop flag) before it finished.
    pub interrupted: bool,
}

impl BatchSummary {
    /// Inputs this pass did not run because another runner held their lock.
    pub fn locked(&self) -> usize {
        self.skipped
            .iter()
            .filter(|s| matches!(s.reason, SkipReason::Locked(_)))
            .count()
    }

    /// Inputs the pass did not finish because it was interrupted: those not started and
    /// those whose run was cancelled.
    pub fn not_run(&self) -> usize {
        let skipped = self
            .skipped
            .iter()
            .filter(|s| s.reason == SkipReason::Interrupted)
            .count();
        let cancelled = if self.interrupted {
            self.rows
                .iter()
                .filter(|r| r.status == Status::Failed)
                .count()
        } else {
            0
        };
        skipped + cancelled
    }

    /// Whether any input had problems or failed, or two inputs clash in name (the command
    /// then exits with 1).
    pub fn any_problems(&self) -> bool {
        self.rows.iter().any(|r| {
            matches!(
                r.status,
                Status::Problems | Status::Failed | Status::NotReady
            )
        }) || self
            .skipped
            .iter()
            .any(|s| matches!(s.reason, SkipReason::NameClash(_)))
    }
}

impl fmt::Display for SkipReason {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SkipReason::Locked(who) => write!(f, "locked by {who}"),
            SkipReason::DoneElsewhere => f.write_str("just run by another runner"),
            SkipReason::Vanished => f.write_str("disappeared"),
            SkipReason::Interrupted => f.write_str("not started before the interruption"),
            SkipReason::NameClash(other) => write!(
                f,
                "shares its result name with {} (the newer one is run); rename one of them",
                other.display()
            ),
        }
    }
}

impl fmt::Display for BatchSummary {
    /// The closing table: one line per input that ran, then the counts and the skipped.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        const HEADERS: [&str; 4] = ["file", "status", "drying time h", "seconds"];
        let cells: Vec<[String; 4]> = self
            .rows
            .iter()
            .map(|r| {
                [
                    r.file.display().to_string(),
                    r.status.to_string(),
                    r.drying_time_h
                        .map_or_else(|| "-".to_string(), |h| format!("{h:.2}")),
                    format!("{:.1}", r.seconds),
                ]
            })
            .collect();
        let mut widths = HEADERS.map(str::len);
        for row in &cells {
            for (w, cell) in widths.iter_mut().zip(row) {
                *w = (*w).max(cell.chars().count());
            }
        }
        if !cells.is_empty() {
            let [a, b, c, d] = widths;
            writeln!(
                f,
                "{:<a$}  {:<b$}  {:>c$}  {:>d$}",
                HEADERS[0], HEADERS[1], HEADERS[2], HEADERS[3]
            )?;
            for [file, status, hours, secs] in &cells {
                writeln!(f, "{file:<a$}  {status:<b$}  {hours:>c$}  {secs:>d$}")?;
            }
        }
        let mut counts: Vec<(Status, usize)> = Vec::new();
        for row in &self.rows {
            match counts.iter_mut().find(|(s, _)| *s == row.status) {
                Some((_, n)) => *n += 1,
                None => counts.push((row.status, 1)),
            }
        }
        counts.sort();
        let ran = counts
            .iter()
            .map(|(s, n)| format!("{n} {s}"))
            .collect::<Vec<_>>()
            .join(", ");
        let noun = if self.rows.len() == 1 {
            "input"
        } else {
            "inputs"
        };
        write!(f, "{} {noun} ran", self.rows.len())?;
        if !ran.is_empty() {
            write!(f, " ({ran})")?;
        }
        write!(f, "; {} already up to date", self.up_to_date)?;
        if !self.skipped.is_empty() {
            write!(f, "; {} skipped", self.skipped.len())?;
        }
        writeln!(f)?;
        for s in &self.skipped {
            writeln!(f, "skipped {}: {}", s.file.display(), s.reason)?;
        }
        Ok(())
    }
}

/// One pass over `opts.dir`; SIGINT/SIGTERM interrupt it (see the module documentation).
pub fn batch(
    opts: &BatchOptions,
    processor: Arc<dyn Processor>,
) -> Result<BatchSummary, WatchError> {
    use signal_hook::consts::{SIGINT, SIGTERM};
    let stop = Arc::new(AtomicBool::new(false));
    let mut ids = Vec::new();
    for signal in [SIGINT, SIGTERM] {
        // The first signal sets the flag; with the flag already set, the second exits at once
        // with code 2 (a system stop: not every input ran).
        ids.push(
            signal_hook::flag::register_conditional_shutdown(signal, 2, Arc::clone(&stop))
                .map_err(WatchError::Signals)?,
        );
        ids.push(
            signal_hook::flag::register(signal, Arc::clone(&stop)).map_err(WatchError::Signals)?,
        );
    }
    let result = batch_until(opts, processor, stop);
    for id in ids {
        signal_hook::low_level::unregister(id);
    }
    result
}

/// Like [`batch`], without signal handlers: setting `stop` interrupts the pass (files not
/// started are skipped, running processors see it as their cancel flag).
pub fn batch_until(
    opts: &BatchOptions,
    processor: Arc<dyn Processor>,
    stop: Arc<AtomicBool>,
) -> Result<BatchSummary, WatchError> {
    let shard = opts.shard.map(|s| s.check()).transpose()?;
    let root = check_dir(&opts.dir)?;
    remove_old_leftovers(&root, opts.recursive, opts.stale_lock);
    let mut inputs = scan(&root, opts.recursive).map_err(|source| WatchError::Scan {
        dir: root.clone(),
        source,
    })?;
    if let Some(shard) = shard {
        inputs = shard.select(inputs);
    }
    let total = inputs.len();
    let candidates: Vec<PathBuf> = if opts.force {
        inputs
    } else {
        inputs.into_iter().filter(|p| is_stale(p)).collect()
    };
    let mut clashes = Vec::new();
    let mut todo = Vec::with_capacity(candidates.len());
    for path in candidates {
        match clash_winner(&path) {
            Some(winner) => {
                let winner = winner.strip_prefix(&root).unwrap_or(&winner).to_path_buf();
                tracing::warn!(file = %path.display(), other = %winner.display(), "two inputs share one result name; only the newer is run");
                clashes.push(Skipped {
                    file: path.strip_prefix(&root).unwrap_or(&path).to_path_buf(),
                    reason: SkipReason::NameClash(winner),
                });
            }
            None => todo.push(path),
        }
    }
    let ctx = Context {
        processor,
        owner: LockOwner::new(),
        stale_lock: opts.stale_lock,
        root: root.clone(),
    };
    let bar = progress_bar(opts.progress, todo.len());
    let results = Mutex::new(Vec::with_capacity(todo.len()));
    let next = AtomicUsize::new(0);
    let threads = worker_count(opts.jobs).min(todo.len()).max(1);
    let spawned = std::thread::scope(|scope| -> std::io::Result<()> {
        for i in 0..threads {
            std::thread::Builder::new()
                .name(format!("batch-worker-{i}"))
                .spawn_scoped(scope, || {
                    loop {
                        let n = next.fetch_add(1, Ordering::SeqCst);
                        let Some(path) = todo.get(n) else {
                            break;
                        };
                        bar.set_message(ctx.display_name(path).display().to_string());
                        let result = run_input(&ctx, opts, path, &stop, &bar);
                        bar.inc(1);
                        if let Ok(mut all) = results.lock() {
                            all.push(result);
                        }
                    }
                })?;
        }
        Ok(())
    });
    bar.finish_and_clear();
    spawned.map_err(WatchError::Thread)?;
    let mut summary = BatchSummary {
        up_to_date: total - todo.len() - clashes.len(),
        skipped: clashes,
        ..BatchSummary::default()
    };
    for result in results.into_inner().unwrap_or_default() {
        match result {
            Ok(row) => summary.rows.push(row),
            Err(skipped) => summary.skipped.push(skipped),
        }
    }
    summary.interrupted = stop.load(Ordering::SeqCst);
    summary.rows.sort_by(|a, b| a.file.cmp(&b.file));
    summary.skipped.sort_by(|a, b| a.file.cmp(&b.file));
    Ok(summary)
}

fn progress_bar(show: bool, len: usize) -> ProgressBar {
    if !show {
        return ProgressBar::hidden();
    }
    let bar = ProgressBar::new(len as u64);
    if let Ok(style) =
        ProgressStyle::with_template("{elapsed_precise} [{wide_bar}] {pos}/{len} {msg}")
    {
        bar.set_style(style.progress_chars("=> "));
    }
    bar
}

/// Settles, locks and runs one input, with the back-off for `NotReady`.
fn run_input(
    ctx: &Context,
    opts: &BatchOptions,
    path: &Path,
    stop: &AtomicBool,
    bar: &ProgressBar,
) -> Result<BatchRow, Skipped> {
    let file = ctx.display_name(path);
    let skip = |reason| Skipped {
        file: file.clone(),
        reason,
    };
    let interrupted_or_gone = || {
        if stop.load(Ordering::SeqCst) {
            SkipReason::Interrupted
        } else {
            SkipReason::Vanished
        }
    };
    if stop.load(Ordering::SeqCst) || !wait_settled(path, opts.settle, stop) {
        return Err(skip(interrupted_or_gone()));
    }
    let mut attempt = Attempt::First;
    // The time reported is the wall time from the first try to the answer, back-off included.
    let started = Instant::now();
    let mut unchanged = Unchanged::new(path);
    loop {
        match ctx.run(path, attempt, opts.force, stop) {
            Outcome::Ran { report, .. } => {
                let total_seconds = started.elapsed().as_secs_f64();
                if report.status == Status::NotReady
                    && !stop.load(Ordering::SeqCst)
                    && let Some((next, delay)) = next_attempt(attempt, opts.settle)
                {
                    // A file that cannot be read and is no longer changing is not a copy in
                    // progress: after a few quiet seconds it gets its final try at once.
                    if unchanged.quiet_for(path) >= opts.settle.max(UNREADABLE_STABLE) {
                        attempt = Attempt::Final;
                        continue;
                    }
                    if !sleep_unless(delay, stop) {
                        return Err(skip(SkipReason::Interrupted));
                    }
                    attempt = next;
                    continue;
                }
                bar.suspend(|| ctx.log(path, &report, total_seconds));
                return Ok(row(file, &report, total_seconds));
            }
            Outcome::Busy(who) => return Err(skip(SkipReason::Locked(who))),
            Outcome::UpToDate => return Err(skip(SkipReason::DoneElsewhere)),
            Outcome::Vanished => return Err(skip(interrupted_or_gone())),
            Outcome::NotStarted => return Err(skip(SkipReason::Interrupted)),
        }
    }
}

/// How long an input that cannot be read may stay unchanged before its final try.
const UNREADABLE_STABLE: Duration =
    Duration::from_millis((crate::limits::UNREADABLE_STABLE_SECS * 1000.0) as u64);

/// Tracks since when a file's size and modification time have not changed, counting the
/// time since its last modification (by this machine's clock) when it is older than the
/// first look.
struct Unchanged {
    last: Option<Snapshot>,
    since: Instant,
}

impl Unchanged {
    fn new(path: &Path) -> Unchanged {
        let last = Snapshot::of(path);
        let now = Instant::now();
        let age = std::fs::metadata(path)
            .and_then(|m| m.modified())
            .ok()
            .and_then(|m| SystemTime::now().duration_since(m).ok())
            .unwrap_or_default();
        Unchanged {
            last,
            since: now.checked_sub(age).unwrap_or(now),
        }
    }

    /// How long the file has been unchanged, looking at it now.
    fn quiet_for(&mut self, path: &Path) -> Duration {
        let current = Snapshot::of(path);
        if current != self.last {
            self.last = current;
            self.since = Instant::now();
        }
        self.since.elapsed()
    }
}

fn row(file: PathBuf, report: &Report, seconds: f64) -> BatchRow {
    BatchRow {
        file,
        status: report.status,
        drying_time_h: report.drying_time_h,
        seconds,
    }
}
