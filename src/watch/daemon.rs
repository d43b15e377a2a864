//! The daemon: a coordinator thread and a pool of workers.
//!
//! The coordinator owns all state (files settling, the queue, what is running) and reacts to
//! one channel of [`WatchEvent`]s: file events and rescans add stale inputs to the settle
//! check, settled inputs are queued and handed to at most `jobs` workers, and workers report
//! back through the same channel. Inputs that answer `NotReady` go back to the settle check
//! with a back-off.
//!
//! Shutdown is a value, not an interruption: the coordinator stops taking work, lets running
//! cases finish for up to the grace period (a second signal cuts it short), then sets the
//! cancel flag, waits [`CANCEL_WAIT`] for processors to notice, and abandons what is still
//! running after removing its locks.

use std::collections::{HashMap, HashSet, VecDeque};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, Receiver, RecvTimeoutError, Sender};
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use super::events::{self, SourceConfig, WatchEvent};
use super::filter::{clash_winner, dir_in_scope, in_scope, scan};
use super::job::{Context, Done, Outcome};
use super::lock::{LockOwner, release_for, remove_old_leftovers};
use super::settle::{self, Ready, Settler, Snapshot, next_attempt};
use super::{Attempt, Processor, Status, WatchError, WatchOptions, is_stale, worker_count};

/// How long cancelled processors get to return before their runs are abandoned.
const CANCEL_WAIT: Duration = Duration::from_secs(2);

/// At most this many queued events are handled before the settle check runs again, so a
/// flood of events cannot starve it.
const EVENT_BURST: usize = 1000;

/// Watches `opts.dir` until SIGINT or SIGTERM, running stale inputs through `processor`.
///
/// Stale inputs are run on start, whenever they change, and whenever the rescan finds them.
/// On a signal the daemon stops taking work, lets running cases finish for up to
/// `opts.grace` (a second signal cancels them at once), removes its own locks and returns
/// `Ok(())`, so the process can exit 0.
pub fn watch(opts: &WatchOptions, processor: Arc<dyn Processor>) -> Result<(), WatchError> {
    run(opts, processor, Arc::new(AtomicBool::new(false)), true)
}

/// Like [`watch`], but without signal handlers: the daemon shuts down (with the same grace
/// period) once `stop` is set. For embedding and tests.
pub fn watch_until(
    opts: &WatchOptions,
    processor: Arc<dyn Processor>,
    stop: Arc<AtomicBool>,
) -> Result<(), WatchError> {
    run(opts, processor, stop, false)
}

/// The folder, checked and made absolute (so event paths and scanned paths compare equal).
pub(crate) fn check_dir(dir: &Path) -> Result<PathBuf, WatchError> {
    match dir.canonicalize() {
        Ok(abs) if abs.is_dir() => Ok(abs),
        _ => Err(WatchError::NotAFolder {
            dir: dir.to_path_buf(),
        }),
    }
}

fn run(
    opts: &WatchOptions,
    processor: Arc<dyn Processor>,
    stop: Arc<AtomicBool>,
    signals: bool,
) -> Result<(), WatchError> {
    let root = check_dir(&opts.dir)?;
    let (tx, rx) = mpsc::channel();
    // Sources first, so nothing changed between the first scan and the first event is lost.
    let sources = events::start(
        &SourceConfig {
            dir: &root,
            recursive: opts.recursive,
            poll: opts.poll,
            settle: opts.settle,
            rescan: opts.rescan,
            signals,
        },
        &tx,
        &stop,
    )?;
    remove_old_leftovers(&root, opts.recursive, opts.stale_lock);
    let initial = scan(&root, opts.recursive).map_err(|source| WatchError::Scan {
        dir: root.clone(),
        source,
    })?;
    let ctx = Context {
        processor,
        owner: LockOwner::new(),
        stale_lock: opts.stale_lock,
        root: root.clone(),
    };
    let pool = Pool::start(worker_count(opts.jobs), &ctx, &tx)?;
    tracing::info!(
        folder = %root.display(),
        jobs = pool.capacity,
        inputs = initial.len(),
        "watching"
    );
    let mut coordinator = Coordinator {
        opts,
        ctx: &ctx,
        root: &root,
        settler: Settler::new(opts.settle),
        queue: VecDeque::new(),
        running: HashMap::new(),
        failed: HashMap::new(),
        clashes: HashSet::new(),
        pool,
        shutdowns: 0,
    };
    let now = Instant::now();
    for path in initial {
        coordinator.consider(path, false, false, now);
    }
    coordinator.serve(&rx, &stop);
    coordinator.shut_down(&rx);
    drop(sources);
    tracing::info!(folder = %root.display(), "stopped watching");
    Ok(())
}

/// The worker threads and the queue they take jobs from.
struct Pool {
    capacity: usize,
    jobs: Option<Sender<Ready>>,
    threads: Vec<JoinHandle<()>>,
    /// Set on shutdown: jobs still in the channel are not started.
    stopping: Arc<AtomicBool>,
    /// Set when the grace period is over: processors stop between time steps.
    cancel: Arc<AtomicBool>,
}

impl Pool {
    fn start(
        capacity: usize,
        ctx: &Context,
        events: &Sender<WatchEvent>,
    ) -> Result<Pool, WatchError> {
        let (jobs, job_rx) = mpsc::channel::<Ready>();
        let job_rx = Arc::new(Mutex::new(job_rx));
        let stopping = Arc::new(AtomicBool::new(false));
        let cancel = Arc::new(AtomicBool::new(false));
        let mut threads = Vec::with_capacity(capacity);
        for i in 0..capacity {
            let job_rx = Arc::clone(&job_rx);
            let events = events.clone();
            let ctx = ctx.clone();
            let stopping = Arc::clone(&stopping);
            let cancel = Arc::clone(&cancel);
            let thread = std::thread::Builder::new()
                .name(format!("watch-worker-{i}"))
                .spawn(move || {
                    loop {
                        // Holding the mutex while waiting is the usual shared-receiver pattern:
                        // one idle worker waits in recv, the others wait for the mutex.
                        let job = match job_rx.lock() {
                            Ok(rx) => rx.recv(),
                            Err(_) => break,
                        };
                        let Ok(job) = job else {
                            break;
                        };
                        let outcome = if stopping.load(Ordering::SeqCst) {
                            Outcome::NotStarted
                        } else {
                            ctx.run(&job.path, job.attempt, job.force, &cancel)
                        };
                        let done = Done {
                            path: job.path,
                            attempt: job.attempt,
                            force: job.force,
                            outcome,
                        };
                        if events.send(WatchEvent::Done(Box::new(done))).is_err() {
                            break;
                        }
                    }
                })
                .map_err(WatchError::Thread)?;
            threads.push(thread);
        }
        Ok(Pool {
            capacity,
            jobs: Some(jobs),
            threads,
            stopping,
            cancel,
        })
    }
}

/// Per running input: whether an event arrived for it while it ran.
#[derive(Debug, Default)]
struct Running {
    dirty: bool,
}

/// An input whose run failed: the version that failed and when to try it again.
#[derive(Debug)]
struct Failure {
    seen: Option<Snapshot>,
    not_before: Instant,
    wait: Duration,
}

struct Coordinator<'a> {
    opts: &'a WatchOptions,
    ctx: &'a Context,
    root: &'a Path,
    settler: Settler,
    queue: VecDeque<Ready>,
    running: HashMap<PathBuf, Running>,
    /// Inputs whose last run failed, remembered until they change or their wait is over.
    failed: HashMap<PathBuf, Failure>,
    /// Inputs whose name clash has been logged (once each).
    clashes: HashSet<PathBuf>,
    pool: Pool,
    /// Shutdown events seen; the second cuts the grace period short.
    shutdowns: usize,
}

impl Coordinator<'_> {
    /// Takes `path` into account after an event (`from_event`) or a scan.
    fn consider(&mut self, path: PathBuf, force: bool, from_event: bool, now: Instant) {
        if let Some(running) = self.running.get_mut(&path) {
            running.dirty = true;
            return;
        }
        if let Some(i) = self.queue.iter().position(|r| r.path == path) {
            if !from_event {
                return;
            }
            // It changed while queued: settle again before it is read.
            if let Some(queued) = self.queue.remove(i) {
                self.settler.add(path, force || queued.force, now);
            }
            return;
        }
        if let Some(winner) = clash_winner(&path) {
            if self.clashes.insert(path.clone()) {
                tracing::warn!(
                    file = %self.ctx.display_name(&path).display(),
                    other = %self.ctx.display_name(&winner).display(),
                    "shares its result name with another input; only the newer one is answered \
                     (rename one of them)"
                );
            }
            return;
        }
        if let Some(failure) = self.failed.get(&path) {
            let unchanged = Snapshot::of(&path) == failure.seen;
            if unchanged && now < failure.not_before {
                // Reading a failed input raises events of its own; without this it would be
                // run again every second or two for ever.
                return;
            }
        }
        if force || self.settler.contains(&path) || is_stale(&path) {
            self.settler.add(path, force, now);
        }
    }

    /// Remembers a failed run of `path` (or forgets an earlier failure after a success).
    fn remember(&mut self, path: &Path, status: Status, seen: Option<Snapshot>, now: Instant) {
        if status != Status::Failed || self.shutdowns > 0 {
            self.failed.remove(path);
            return;
        }
        let max = Duration::from_secs_f64(crate::limits::FAILURE_BACKOFF_MAX_SECS);
        let wait = match self.failed.get(path) {
            Some(f) if f.seen == seen => (f.wait * 2).min(max),
            _ => self.opts.failure_backoff.min(max),
        };
        tracing::warn!(
            file = %self.ctx.display_name(path).display(),
            retry_in_s = wait.as_secs(),
            "the run failed; the input is tried again when it changes or after the wait"
        );
        self.failed.insert(
            path.to_path_buf(),
            Failure {
                seen,
                not_before: now + wait,
                wait,
            },
        );
    }

    fn rescan(&mut self, folder: &Path) {
        match scan(folder, self.opts.recursive) {
            Ok(found) => {
                let now = Instant::now();
                for path in found {
                    self.consider(path, false, false, now);
                }
            }
            // A share may be briefly unavailable; the next rescan tries again.
            Err(e) => tracing::warn!(folder = %folder.display(), error = %e, "rescan failed"),
        }
    }

    fn on_changed(&mut self, paths: Vec<PathBuf>) {
        let now = Instant::now();
        for path in paths {
            if in_scope(self.root, &path, self.opts.recursive) {
                self.consider(path, false, true, now);
            } else if self.opts.recursive
                && std::fs::symlink_metadata(&path).is_ok_and(|m| m.is_dir())
                && dir_in_scope(self.root, &path)
            {
                // A folder moved in brings files that raised no events of their own.
                self.rescan(&path);
            }
        }
    }

    fn on_done(&mut self, done: Done) {
        let dirty = self.running.remove(&done.path).is_some_and(|r| r.dirty);
        let file = self.ctx.display_name(&done.path);
        let now = Instant::now();
        match done.outcome {
            Outcome::Ran { report, .. }
                if report.status == Status::NotReady && done.attempt != Attempt::Final =>
            {
                if let Some((next, delay)) = next_attempt(done.attempt, self.opts.settle) {
                    tracing::debug!(
                        file = %file.display(),
                        attempt = %done.attempt,
                        delay_ms = delay.as_millis() as u64,
                        "not ready yet; trying again later"
                    );
                    self.settler
                        .add_retry(done.path, next, done.force, delay, now);
                }
            }
            Outcome::Ran {
                report,
                seconds,
                changed,
            } => {
                self.ctx.log(&done.path, &report, seconds);
                if changed {
                    self.failed.remove(&done.path);
                } else {
                    let seen = Snapshot::of(&done.path);
                    self.remember(&done.path, report.status, seen, now);
                }
                if changed {
                    // The output may describe the older version although it is newer.
                    self.consider(done.path, true, true, now);
                } else if dirty {
                    self.consider(done.path, false, true, now);
                }
            }
            Outcome::Busy(who) => {
                tracing::info!(file = %file.display(), owner = %who, "locked by another runner; skipped");
            }
            Outcome::UpToDate => {
                tracing::debug!(file = %file.display(), "already up to date after locking; skipped");
                if dirty {
                    self.consider(done.path, false, true, now);
                }
            }
            Outcome::Vanished | Outcome::NotStarted => {}
        }
    }

    fn dispatch(&mut self) {
        let Some(jobs) = &self.pool.jobs else {
            return;
        };
        while self.running.len() < self.pool.capacity {
            let Some(job) = self.queue.pop_front() else {
                break;
            };
            self.running.insert(job.path.clone(), Running::default());
            if jobs.send(job).is_err() {
                break;
            }
        }
    }

    /// Handles one event; `false` when it asks for shutdown.
    fn handle(&mut self, event: WatchEvent) -> bool {
        match event {
            WatchEvent::Changed(paths) => self.on_changed(paths),
            WatchEvent::Rescan => {
                let root = self.root.to_path_buf();
                self.rescan(&root);
            }
            WatchEvent::SourceError(message) => {
                tracing::warn!(error = %message, "file events");
            }
            WatchEvent::Shutdown => {
                self.shutdowns += 1;
                return false;
            }
            WatchEvent::Done(done) => self.on_done(*done),
        }
        true
    }

    /// The main loop, until `stop` is set or a shutdown event arrives.
    fn serve(&mut self, rx: &Receiver<WatchEvent>, stop: &AtomicBool) {
        let tick = settle::tick(self.opts.settle);
        'serve: loop {
            if stop.load(Ordering::SeqCst) {
                break;
            }
            match rx.recv_timeout(tick) {
                Ok(event) => {
                    if !self.handle(event) {
                        break;
                    }
                    // Take what else is waiting as one batch before settling.
                    for _ in 0..EVENT_BURST {
                        if stop.load(Ordering::SeqCst) {
                            break 'serve;
                        }
                        match rx.try_recv() {
                            Ok(event) => {
                                if !self.handle(event) {
                                    break 'serve;
                                }
                            }
                            Err(_) => break,
                        }
                    }
                }
                Err(RecvTimeoutError::Timeout) => {}
                Err(RecvTimeoutError::Disconnected) => break,
            }
            for ready in self.settler.take_ready(Instant::now()) {
                if !self.queue.iter().any(|q| q.path == ready.path) {
                    self.queue.push_back(ready);
                }
            }
            self.dispatch();
        }
    }

    /// Waits until nothing runs any more or `deadline` passes (or, when `hurry_on_signal`,
    /// a second signal arrives); `true` if nothing runs any more.
    fn drain(
        &mut self,
        rx: &Receiver<WatchEvent>,
        deadline: Instant,
        hurry_on_signal: bool,
    ) -> bool {
        while !self.running.is_empty() {
            let now = Instant::now();
            if now >= deadline {
                return false;
            }
            match rx.recv_timeout((deadline - now).min(Duration::from_millis(100))) {
                Ok(WatchEvent::Done(done)) => self.on_done(*done),
                Ok(WatchEvent::Shutdown) => {
                    self.shutdowns += 1;
                    if hurry_on_signal && self.shutdowns >= 2 {
                        tracing::info!("second shutdown request: cancelling running inputs now");
                        return false;
                    }
                }
                // Changes and rescans no longer matter: no new work is taken.
                Ok(_) | Err(RecvTimeoutError::Timeout) => {}
                Err(RecvTimeoutError::Disconnected) => return false,
            }
        }
        true
    }

    fn shut_down(&mut self, rx: &Receiver<WatchEvent>) {
        self.pool.stopping.store(true, Ordering::SeqCst);
        self.queue.clear();
        // Workers leave their loop once the job channel is closed and they are idle.
        self.pool.jobs.take();
        if !self.running.is_empty() {
            tracing::info!(
                running = self.running.len(),
                grace_s = self.opts.grace.as_secs_f64(),
                "shutting down: letting running inputs finish"
            );
        }
        let mut finished = self.drain(rx, Instant::now() + self.opts.grace, true);
        if !finished {
            tracing::warn!(running = self.running.len(), "cancelling running inputs");
            self.pool.cancel.store(true, Ordering::SeqCst);
            finished = self.drain(rx, Instant::now() + CANCEL_WAIT, false);
        }
        if finished {
            for thread in self.pool.threads.drain(..) {
                let _ = thread.join();
            }
        } else {
            // Their threads are left behind (detached); only their locks are cleaned up.
            for path in self.running.keys() {
                release_for(path, &self.ctx.owner);
                tracing::warn!(file = %self.ctx.display_name(path).display(), "abandoned a running input");
            }
        }
    }
}
