//! One run of one input, shared by the daemon and the batch pass: lock, look again whether it
//! is still stale, run the processor, unlock.

use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

use super::filter::stays_inside;
use super::lock::{Acquire, LockOwner, try_lock};
use super::settle::Snapshot;
use super::{Attempt, Processor, Report, Status, is_stale};

/// What every run needs.
#[derive(Clone)]
pub(crate) struct Context {
    pub(crate) processor: Arc<dyn Processor>,
    pub(crate) owner: LockOwner,
    pub(crate) stale_lock: Duration,
    /// The folder being served, for shorter file names in logs.
    pub(crate) root: PathBuf,
}

/// How a run ended.
#[derive(Debug)]
pub(crate) enum Outcome {
    /// The processor ran.
    Ran {
        report: Report,
        seconds: f64,
        /// The input changed while it was being run, so the output may describe an older
        /// version even though it is newer than the input.
        changed: bool,
    },
    /// Another runner holds the lock (the text says who).
    Busy(String),
    /// After taking the lock the input was no longer stale: someone has just run it.
    UpToDate,
    /// The input is gone.
    Vanished,
    /// Shutdown began before the run started.
    NotStarted,
}

/// A finished run, as reported to the daemon's coordinator.
#[derive(Debug)]
pub(crate) struct Done {
    pub(crate) path: PathBuf,
    pub(crate) attempt: Attempt,
    pub(crate) force: bool,
    pub(crate) outcome: Outcome,
}

impl Context {
    /// Runs `path` once under its lock. With `force` the input runs even if it looks up to
    /// date (locks are still honoured).
    pub(crate) fn run(
        &self,
        path: &Path,
        attempt: Attempt,
        force: bool,
        cancel: &AtomicBool,
    ) -> Outcome {
        let Some(before) = Snapshot::of(path) else {
            return Outcome::Vanished;
        };
        if !stays_inside(&self.root, path) {
            tracing::warn!(
                file = %path.display(),
                "leads out of the served folder through a symbolic link; not read"
            );
            return Outcome::Vanished;
        }
        let _guard = match try_lock(path, &self.owner, self.stale_lock) {
            Ok(Acquire::Taken(guard)) => guard,
            Ok(Acquire::Busy(who)) => return Outcome::Busy(who),
            Err(e) => {
                let report = Report {
                    status: Status::Failed,
                    drying_time_h: None,
                    detail: format!("could not create the lock file beside the input: {e}"),
                };
                return Outcome::Ran {
                    report,
                    seconds: 0.0,
                    changed: false,
                };
            }
        };
        // Another runner may have finished this input between our look and our lock.
        if !force && !is_stale(path) {
            return Outcome::UpToDate;
        }
        let start = Instant::now();
        let report = catch_unwind(AssertUnwindSafe(|| {
            self.processor.process(path, attempt, cancel)
        }))
        .unwrap_or_else(|_| Report {
            status: Status::Failed,
            drying_time_h: None,
            detail: "the processor panicked".to_string(),
        });
        let seconds = start.elapsed().as_secs_f64();
        let after = Snapshot::of(path);
        Outcome::Ran {
            report,
            seconds,
            changed: after.is_some() && after != Some(before),
        }
    }

    /// The name of `path` for logs and tables: relative to the served folder.
    pub(crate) fn display_name(&self, path: &Path) -> PathBuf {
        path.strip_prefix(&self.root).unwrap_or(path).to_path_buf()
    }

    /// The one log line per input.
    pub(crate) fn log(&self, path: &Path, report: &Report, seconds: f64) {
        let file = self.display_name(path);
        // Rounded for reading; the workbook has the full values.
        let drying_time_h = report.drying_time_h.map(|h| (h * 100.0).round() / 100.0);
        let detail = (!report.detail.is_empty()).then_some(report.detail.as_str());
        tracing::info!(
            file = %file.display(),
            outcome = %report.status,
            seconds = (seconds * 100.0).round() / 100.0,
            drying_time_h,
            detail,
            "input done"
        );
    }
}
