//! The watched folder and the batch pass over it.
//!
//! Both follow the same rules (see `operations.md`):
//! - [`is_input`] says which files are inputs; [`is_stale`] says which of them need a run
//!   (no `<stem>.result.xlsx` / `<stem>.errors.xlsx` newer than the input). Nothing else is
//!   kept as state.
//! - A file is read only once its size and modification time have stopped changing for the
//!   settle time; a file that still cannot be opened is retried with back-off
//!   ([`Attempt::Retry`]) and only the last try ([`Attempt::Final`]) reports it as a problem.
//! - Before a run an exclusive `<stem>.lock` is created beside the input, so several watchers
//!   (and batch passes) can share one folder; stale locks of vanished owners are taken over.
//!
//! [`watch`] is the daemon: file events, a rescan tick and signals each feed one channel of
//! our own event type, a coordinator settles and queues inputs, and a pool of worker threads
//! runs them through a [`Processor`]. [`batch`] is one pass with the same rules, for cron or a
//! systemd timer, optionally split across machines with a [`Shard`].
//!
//! What happens to one input (reading, solving, writing workbooks) is not decided here: the
//! caller hands in a [`Processor`].

mod batch;
mod daemon;
mod events;
mod filter;
mod job;
mod lock;
mod settle;
mod shard;
mod stale;

use std::fmt;
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use std::time::Duration;

pub use batch::{BatchRow, BatchSummary, SkipReason, Skipped, batch, batch_until};
pub use daemon::{watch, watch_until};
pub use filter::{errors_path, is_input, lock_path, result_path};
pub use shard::{Shard, ShardError};
pub use stale::is_stale;

/// What a processor was asked to do with one input file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Attempt {
    /// The first try after the file settled.
    First,
    /// A later try (1, 2, ...) after the file could not be opened or parsed.
    Retry(u32),
    /// The last try: a file that still cannot be read gets its errors workbook.
    Final,
}

/// Why a processor stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Status {
    /// The case ran and reached its target; `<stem>.result.xlsx` was written.
    Solved,
    /// The case ran to its end time without reaching the target; a result was written.
    TargetNotReached,
    /// The input had problems; `<stem>.errors.xlsx` was written.
    Problems,
    /// The file could not be opened or parsed at all (yet); nothing was written.
    NotReady,
    /// The run failed or was cancelled; nothing was written.
    Failed,
}

/// The outcome of one input.
#[derive(Debug, Clone, PartialEq)]
pub struct Report {
    /// Why the processor stopped.
    pub status: Status,
    /// The drying time in hours, when the case reached its target.
    pub drying_time_h: Option<f64>,
    /// A short human-readable note (first problem, reason for failure, ...).
    pub detail: String,
}

/// Runs one input: reads it, solves it, writes `<stem>.result.xlsx` (and removes a stale
/// `<stem>.errors.xlsx`) or writes `<stem>.errors.xlsx`, both atomically beside the input.
/// Never panics.
///
/// `Status::NotReady` means the file could not be opened or parsed as a workbook at all and
/// `attempt` was not `Final`: nothing was written, try again later with back-off. With
/// `Attempt::Final` such a file gets its errors workbook and `Status::Problems`.
///
/// `cancel` is set on shutdown; a processor checks it between time steps and returns
/// `Status::Failed` without writing anything.
pub trait Processor: Send + Sync {
    /// Runs `input` once; see the trait documentation for the contract.
    fn process(&self, input: &Path, attempt: Attempt, cancel: &AtomicBool) -> Report;
}

impl fmt::Display for Status {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Status::Solved => "solved",
            Status::TargetNotReached => "target not reached",
            Status::Problems => "problems",
            Status::NotReady => "not ready",
            Status::Failed => "failed",
        })
    }
}

impl fmt::Display for Attempt {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Attempt::First => f.write_str("first try"),
            Attempt::Retry(n) => write!(f, "retry {n}"),
            Attempt::Final => f.write_str("final try"),
        }
    }
}

/// Settings of the daemon ([`watch`]).
#[derive(Debug, Clone, PartialEq)]
pub struct WatchOptions {
    /// The watched folder.
    pub dir: PathBuf,
    /// Worker threads; 0 means one per available CPU.
    pub jobs: usize,
    /// How long size and modification time must stay unchanged before a file is read.
    pub settle: Duration,
    /// `Some(interval)`: poll the folder at this interval instead of using native file events
    /// (for network shares, where events from other machines never arrive).
    pub poll: Option<Duration>,
    /// Also watch sub-folders (those whose names do not start with `.` or `~$`).
    pub recursive: bool,
    /// Interval of the full rescan that catches missed events.
    pub rescan: Duration,
    /// Age after which a lock whose owner is gone may be taken over.
    pub stale_lock: Duration,
    /// How long running cases may finish after SIGINT/SIGTERM before they are cancelled.
    pub grace: Duration,
    /// After a run failed (or its answer could not be written), the wait before the same
    /// unchanged input is tried again; it doubles after each further failure, up to an hour.
    /// A change to the input ends the wait.
    pub failure_backoff: Duration,
}

impl WatchOptions {
    /// Options for `dir` with the documented defaults: one job per CPU, settle 1 s, native
    /// events, not recursive, rescan every 30 s, stale locks after 10 min, grace 30 s, a failed
    /// input tried again after 1 min, 2 min, 4 min ... up to 1 h unless it changes.
    pub fn new(dir: impl Into<PathBuf>) -> Self {
        WatchOptions {
            dir: dir.into(),
            jobs: 0,
            settle: DEFAULT_SETTLE,
            poll: None,
            recursive: false,
            rescan: Duration::from_secs(30),
            stale_lock: DEFAULT_STALE_LOCK,
            grace: Duration::from_secs(30),
            failure_backoff: Duration::from_secs_f64(crate::limits::FAILURE_BACKOFF_SECS),
        }
    }
}

/// Settings of one pass over a folder ([`batch`]).
#[derive(Debug, Clone, PartialEq)]
pub struct BatchOptions {
    /// The folder to run.
    pub dir: PathBuf,
    /// Worker threads; 0 means one per available CPU.
    pub jobs: usize,
    /// Run every input, stale or not (locks are still honoured).
    pub force: bool,
    /// Run only this share of the inputs.
    pub shard: Option<Shard>,
    /// Also run inputs in sub-folders.
    pub recursive: bool,
    /// How long size and modification time must stay unchanged before a file is read.
    pub settle: Duration,
    /// Age after which a lock whose owner is gone may be taken over.
    pub stale_lock: Duration,
    /// Show a progress bar (on standard error).
    pub progress: bool,
}

impl BatchOptions {
    /// Options for `dir` with the documented defaults: one job per CPU, stale inputs only, no
    /// shard, not recursive, settle 1 s, stale locks after 10 min, no progress bar.
    pub fn new(dir: impl Into<PathBuf>) -> Self {
        BatchOptions {
            dir: dir.into(),
            jobs: 0,
            force: false,
            shard: None,
            recursive: false,
            settle: DEFAULT_SETTLE,
            stale_lock: DEFAULT_STALE_LOCK,
            progress: false,
        }
    }
}

const DEFAULT_SETTLE: Duration = Duration::from_millis(1000);
const DEFAULT_STALE_LOCK: Duration = Duration::from_secs(600);

/// Why watching or a batch pass could not start or go on.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum WatchError {
    /// The folder does not exist or is not a folder.
    #[error("{} is not a folder that can be watched or run", dir.display())]
    NotAFolder {
        /// The folder as given.
        dir: PathBuf,
    },
    /// Listing the folder failed.
    #[error("could not list the folder {}: {source}", dir.display())]
    Scan {
        /// The folder being listed.
        dir: PathBuf,
        /// The underlying error.
        source: std::io::Error,
    },
    /// The operating system's limit on file watches (inotify) was reached.
    #[error(
        "the system's limit on watched folders was reached while watching {}; raise it \
         (for example `sudo sysctl fs.inotify.max_user_watches=524288` and \
         `fs.inotify.max_user_instances=512`, made permanent in /etc/sysctl.d/), watch fewer \
         folders (without --recursive), or use polling with --poll SECS",
        dir.display()
    )]
    WatchLimit {
        /// The folder being watched.
        dir: PathBuf,
    },
    /// Setting up file events failed for another reason.
    #[error("could not watch {}: {message}", dir.display())]
    Notify {
        /// The folder being watched.
        dir: PathBuf,
        /// What the event library reported.
        message: String,
    },
    /// The SIGINT/SIGTERM handlers could not be installed.
    #[error("could not install the SIGINT/SIGTERM handlers: {0}")]
    Signals(std::io::Error),
    /// A worker or event thread could not be started.
    #[error("could not start a thread: {0}")]
    Thread(std::io::Error),
    /// The shard given is not valid.
    #[error(transparent)]
    Shard(#[from] ShardError),
}

/// Worker count for `jobs` (0 = one per CPU).
pub(crate) fn worker_count(jobs: usize) -> usize {
    if jobs > 0 {
        jobs
    } else {
        std::thread::available_parallelism().map_or(1, |n| n.get())
    }
}
