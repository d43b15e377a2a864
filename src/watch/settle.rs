//! Waiting until a file has finished being written, and the back-off for files that still
//! cannot be read.
//!
//! A file is *settled* when its size and modification time have not changed for the settle
//! time. File events alone cannot tell that a copy is complete (a copy is many writes), so
//! the daemon keeps each candidate here and looks at it again every [`tick`] until it is
//! settled.
//!
//! A settled file may still be unreadable (a copy tool that pre-allocates the full size, a
//! network share that flushes late). The processor then answers `NotReady` and the file is
//! tried again after a back-off that starts at half the settle time (at least 50 ms) and
//! doubles: with the default settle of 1 s the retries come 0.5, 1, 2, 4 and 8 s apart and the
//! final try 16 s after the last retry, about 31 s in all, which covers a large copy over a
//! slow share without leaving a broken file unreported for long.

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant, SystemTime};

use super::Attempt;

/// Retries between the first and the final try.
pub(crate) const RETRIES: u32 = 5;

/// What is compared to decide whether a file is still being written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Snapshot {
    len: u64,
    modified: Option<SystemTime>,
}

impl Snapshot {
    /// The current size and modification time of `path`; `None` if it is gone.
    pub(crate) fn of(path: &Path) -> Option<Snapshot> {
        let meta = std::fs::metadata(path).ok()?;
        Some(Snapshot {
            len: meta.len(),
            modified: meta.modified().ok(),
        })
    }
}

/// How often a settling file is looked at: a quarter of the settle time, within 10–100 ms,
/// so the wait overshoots by at most a quarter and an idle daemon stays cheap.
pub(crate) fn tick(settle: Duration) -> Duration {
    (settle / 4).clamp(Duration::from_millis(10), Duration::from_millis(100))
}

/// The try after `attempt` answered `NotReady`, and how long to wait before it; `None` after
/// the final try.
pub(crate) fn next_attempt(attempt: Attempt, settle: Duration) -> Option<(Attempt, Duration)> {
    let base = (settle / 2).max(Duration::from_millis(50));
    match attempt {
        Attempt::First => Some((Attempt::Retry(1), base)),
        Attempt::Retry(n) if n < RETRIES => Some((Attempt::Retry(n + 1), base * 2u32.pow(n))),
        Attempt::Retry(_) => Some((Attempt::Final, base * 2u32.pow(RETRIES))),
        Attempt::Final => None,
    }
}

/// A file waiting to settle (or waiting out a back-off).
#[derive(Debug)]
struct Pending {
    attempt: Attempt,
    force: bool,
    /// Not before this instant (back-off).
    due: Instant,
    /// How long the snapshot must stay unchanged: the settle time at first, nothing after a
    /// back-off (the back-off itself was the wait) unless the file changes again.
    needed: Duration,
    last: Option<Snapshot>,
    stable_since: Instant,
}

/// The daemon's files waiting to settle.
#[derive(Debug)]
pub(crate) struct Settler {
    settle: Duration,
    pending: HashMap<PathBuf, Pending>,
}

/// A settled file, ready to run.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct Ready {
    pub(crate) path: PathBuf,
    pub(crate) attempt: Attempt,
    /// Run even if an output looks newer (the input changed while it was being run).
    pub(crate) force: bool,
}

impl Settler {
    pub(crate) fn new(settle: Duration) -> Self {
        Settler {
            settle,
            pending: HashMap::new(),
        }
    }

    pub(crate) fn contains(&self, path: &Path) -> bool {
        self.pending.contains_key(path)
    }

    #[cfg(test)]
    pub(crate) fn is_empty(&self) -> bool {
        self.pending.is_empty()
    }

    /// Starts settling `path` for a first try; a file already waiting keeps its place (its
    /// next look notices any change), only `force` is added.
    pub(crate) fn add(&mut self, path: PathBuf, force: bool, now: Instant) {
        if let Some(p) = self.pending.get_mut(&path) {
            p.force |= force;
            return;
        }
        let last = Snapshot::of(&path);
        self.pending.insert(
            path,
            Pending {
                attempt: Attempt::First,
                force,
                due: now,
                needed: self.settle,
                last,
                stable_since: now,
            },
        );
    }

    /// Schedules `attempt` of `path` after `delay`.
    pub(crate) fn add_retry(
        &mut self,
        path: PathBuf,
        attempt: Attempt,
        force: bool,
        delay: Duration,
        now: Instant,
    ) {
        let last = Snapshot::of(&path);
        self.pending.insert(
            path,
            Pending {
                attempt,
                force,
                due: now + delay,
                needed: Duration::ZERO,
                last,
                stable_since: now,
            },
        );
    }

    /// Looks at every file that is due and returns those that have settled, in path order.
    /// Files that have vanished are dropped.
    pub(crate) fn take_ready(&mut self, now: Instant) -> Vec<Ready> {
        let settle = self.settle;
        let mut ready = Vec::new();
        self.pending.retain(|path, p| {
            if now < p.due {
                return true;
            }
            let current = Snapshot::of(path);
            if current.is_none() {
                return false;
            }
            if current != p.last {
                p.last = current;
                p.stable_since = now;
                p.needed = settle;
                return true;
            }
            if now.duration_since(p.stable_since) >= p.needed {
                ready.push(Ready {
                    path: path.clone(),
                    attempt: p.attempt,
                    force: p.force,
                });
                return false;
            }
            true
        });
        ready.sort_by(|a, b| a.path.cmp(&b.path));
        ready
    }
}

/// Blocks until `path` has settled; `false` if it vanished or `stop` was set.
///
/// A file last modified at least `settle` ago (by this machine's clock) counts as settled at
/// once, so a batch pass over a large, quiet folder costs one look per file rather than one
/// settle time. If a share's clock runs behind, a copy in progress can slip through; the
/// `NotReady` back-off and the re-run when the finished copy changes the file cover that.
pub(crate) fn wait_settled(path: &Path, settle: Duration, stop: &AtomicBool) -> bool {
    let Some(mut last) = Snapshot::of(path) else {
        return false;
    };
    let quiet_for = last
        .modified
        .and_then(|m| SystemTime::now().duration_since(m).ok());
    if quiet_for.is_some_and(|age| age >= settle) {
        return true;
    }
    let mut stable_since = Instant::now();
    while Instant::now().duration_since(stable_since) < settle {
        if stop.load(Ordering::Relaxed) {
            return false;
        }
        std::thread::sleep(tick(settle));
        let Some(current) = Snapshot::of(path) else {
            return false;
        };
        if current != last {
            last = current;
            stable_since = Instant::now();
        }
    }
    true
}

/// Sleeps for `delay`, waking early (and returning `false`) when `stop` is set.
pub(crate) fn sleep_unless(delay: Duration, stop: &AtomicBool) -> bool {
    let end = Instant::now() + delay;
    loop {
        if stop.load(Ordering::Relaxed) {
            return false;
        }
        let now = Instant::now();
        if now >= end {
            return true;
        }
        std::thread::sleep((end - now).min(Duration::from_millis(50)));
    }
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    #[test]
    fn back_off_doubles_from_half_the_settle_time_then_ends() {
        let settle = Duration::from_millis(1000);
        let mut attempt = Attempt::First;
        let mut delays = Vec::new();
        while let Some((next, delay)) = next_attempt(attempt, settle) {
            delays.push(delay.as_millis());
            attempt = next;
        }
        assert_eq!(attempt, Attempt::Final);
        assert_eq!(delays, vec![500, 1000, 2000, 4000, 8000, 16000]);
    }

    #[test]
    fn a_file_that_keeps_changing_is_not_ready() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("a.csv");
        std::fs::write(&path, "1").unwrap();
        let mut settler = Settler::new(Duration::from_secs(1));
        let t0 = Instant::now();
        settler.add(path.clone(), false, t0);
        std::fs::write(&path, "12").unwrap();
        // The size changed: the settle time starts again from this look.
        assert!(settler.take_ready(t0 + Duration::from_secs(2)).is_empty());
        assert!(
            settler
                .take_ready(t0 + Duration::from_millis(2500))
                .is_empty()
        );
        let ready = settler.take_ready(t0 + Duration::from_secs(3));
        assert_eq!(ready.len(), 1);
        assert_eq!(ready[0].attempt, Attempt::First);
        assert!(settler.is_empty());
    }

    #[test]
    fn a_vanished_file_is_dropped() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("gone.csv");
        let mut settler = Settler::new(Duration::from_millis(100));
        let t0 = Instant::now();
        settler.add(path, false, t0);
        assert!(settler.take_ready(t0 + Duration::from_secs(1)).is_empty());
        assert!(settler.is_empty());
    }
}
