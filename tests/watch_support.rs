//! Shared helpers for the watch tests (included by them with `#[path]`): a scratch folder, a
//! fake processor that counts its calls, and polling for conditions instead of fixed sleeps.
//! Compiled on its own it holds no tests.
#![allow(dead_code)]

use std::collections::HashMap;
use std::fs;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;
use std::time::{Duration, Instant, SystemTime};

use dampfront::watch::{
    Attempt, Processor, Report, Status, WatchError, WatchOptions, errors_path, result_path,
    watch_until,
};

/// Long enough for a loaded 2-core machine; conditions are polled, so a healthy run is fast.
pub const PATIENCE: Duration = Duration::from_secs(60);

/// A fresh temporary folder.
pub struct Scratch {
    dir: tempfile::TempDir,
}

impl Default for Scratch {
    fn default() -> Scratch {
        Scratch {
            dir: tempfile::tempdir().unwrap(),
        }
    }
}

impl Scratch {
    pub fn new() -> Scratch {
        Scratch::default()
    }

    pub fn path(&self) -> &Path {
        self.dir.path()
    }

    pub fn file(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    pub fn write(&self, name: &str, contents: &str) -> PathBuf {
        let path = self.file(name);
        if let Some(parent) = path.parent() {
            fs::create_dir_all(parent).unwrap();
        }
        fs::write(&path, contents).unwrap();
        path
    }

    /// Sets the modification time of `name` to `offset` from now (negative = in the past).
    pub fn set_mtime(&self, name: &str, offset_secs: i64) {
        let now = SystemTime::now();
        let delta = Duration::from_secs(offset_secs.unsigned_abs());
        let time = if offset_secs >= 0 {
            now + delta
        } else {
            now - delta
        };
        fs::File::options()
            .write(true)
            .open(self.file(name))
            .unwrap()
            .set_modified(time)
            .unwrap();
    }

    /// All file names in the folder (not below), sorted.
    pub fn names(&self) -> Vec<String> {
        let mut names: Vec<String> = fs::read_dir(self.path())
            .unwrap()
            .flatten()
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        names
    }

    /// Names that are neither inputs written by the test nor final outputs: locks, temporary
    /// files, takeover leftovers.
    pub fn leftovers(&self) -> Vec<String> {
        self.names()
            .into_iter()
            .filter(|n| n.ends_with(".lock") || n.starts_with('.'))
            .collect()
    }
}

/// How the fake processor behaves.
#[derive(Clone, Default)]
pub struct Behaviour {
    /// Answer `NotReady` to this many calls per file before reading it (`u32::MAX`: always).
    pub not_ready_calls: u32,
    /// The input is complete only when it ends with this text; otherwise `NotReady`.
    pub complete_suffix: Option<&'static str>,
    /// Time each run takes, in steps of 10 ms that look at the cancel flag.
    pub work: Duration,
    /// Keep working after cancel (a processor that breaks its contract).
    pub ignore_cancel: bool,
    /// Answer `Problems` (and write the errors workbook) instead of solving.
    pub problems: bool,
    /// Answer `Failed` and write nothing (a run that failed or could not write its answer).
    pub fail: bool,
}

/// One call the fake received.
#[derive(Debug, Clone, PartialEq)]
pub struct Call {
    pub file: String,
    pub attempt: Attempt,
    pub status: Status,
    /// The input was incomplete when read.
    pub incomplete: bool,
}

/// A processor that writes a small `<stem>.result.xlsx` (or errors workbook) atomically and
/// records every call.
pub struct Fake {
    pub behaviour: Behaviour,
    calls: Mutex<Vec<Call>>,
    seen: Mutex<HashMap<PathBuf, u32>>,
    running: AtomicU64,
}

impl Fake {
    pub fn new(behaviour: Behaviour) -> Arc<Fake> {
        Arc::new(Fake {
            behaviour,
            calls: Mutex::new(Vec::new()),
            seen: Mutex::new(HashMap::new()),
            running: AtomicU64::new(0),
        })
    }

    pub fn solving() -> Arc<Fake> {
        Fake::new(Behaviour::default())
    }

    pub fn calls(&self) -> Vec<Call> {
        self.calls.lock().unwrap().clone()
    }

    /// Calls for `file` that read it (not answered `NotReady`).
    pub fn runs_of(&self, file: &str) -> usize {
        self.calls()
            .iter()
            .filter(|c| c.file == file && c.status != Status::NotReady)
            .count()
    }

    pub fn attempts_of(&self, file: &str) -> Vec<Attempt> {
        self.calls()
            .iter()
            .filter(|c| c.file == file)
            .map(|c| c.attempt)
            .collect()
    }

    /// Whether a run is in progress right now.
    pub fn busy(&self) -> bool {
        self.running.load(Ordering::SeqCst) > 0
    }

    fn record(&self, input: &Path, attempt: Attempt, status: Status, incomplete: bool) -> Report {
        let file = input.file_name().unwrap().to_string_lossy().into_owned();
        self.calls.lock().unwrap().push(Call {
            file,
            attempt,
            status,
            incomplete,
        });
        Report {
            status,
            drying_time_h: (status == Status::Solved).then_some(12.5),
            detail: String::new(),
        }
    }
}

/// Writes `contents` to `path` the way a real processor must: a temporary name in the same
/// folder, then a rename.
pub fn write_atomically(path: &Path, contents: &[u8]) {
    static N: AtomicU64 = AtomicU64::new(0);
    let n = N.fetch_add(1, Ordering::Relaxed);
    let name = path.file_name().unwrap().to_string_lossy();
    let tmp = path.with_file_name(format!(".{name}.tmp{n}"));
    if fs::write(&tmp, contents).is_ok() {
        let _ = fs::rename(&tmp, path);
    }
}

impl Processor for Fake {
    fn process(&self, input: &Path, attempt: Attempt, cancel: &AtomicBool) -> Report {
        let _running = Running::enter(&self.running);
        let calls_so_far = {
            let mut seen = self.seen.lock().unwrap();
            let n = seen.entry(input.to_path_buf()).or_insert(0);
            *n += 1;
            *n - 1
        };
        let contents = fs::read_to_string(input).unwrap_or_default();
        let incomplete = self
            .behaviour
            .complete_suffix
            .is_some_and(|suffix| !contents.ends_with(suffix));
        let unreadable = incomplete || calls_so_far < self.behaviour.not_ready_calls;
        if unreadable && attempt != Attempt::Final {
            return self.record(input, attempt, Status::NotReady, incomplete);
        }
        let start = Instant::now();
        while start.elapsed() < self.behaviour.work {
            if cancel.load(Ordering::SeqCst) && !self.behaviour.ignore_cancel {
                return self.record(input, attempt, Status::Failed, incomplete);
            }
            std::thread::sleep(Duration::from_millis(10));
        }
        if self.behaviour.fail {
            return self.record(input, attempt, Status::Failed, incomplete);
        }
        if unreadable || self.behaviour.problems {
            write_atomically(&errors_path(input), b"errors");
            return self.record(input, attempt, Status::Problems, incomplete);
        }
        write_atomically(&result_path(input), contents.as_bytes());
        let _ = fs::remove_file(errors_path(input));
        self.record(input, attempt, Status::Solved, incomplete)
    }
}

struct Running<'a>(&'a AtomicU64);

impl<'a> Running<'a> {
    fn enter(counter: &'a AtomicU64) -> Running<'a> {
        counter.fetch_add(1, Ordering::SeqCst);
        Running(counter)
    }
}

impl Drop for Running<'_> {
    fn drop(&mut self) {
        self.0.fetch_sub(1, Ordering::SeqCst);
    }
}

/// Polls `condition` every 20 ms until it holds or `PATIENCE` runs out.
pub fn eventually(mut condition: impl FnMut() -> bool) -> bool {
    let start = Instant::now();
    while start.elapsed() < PATIENCE {
        if condition() {
            return true;
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    condition()
}

/// Watch options for tests: short settle, two jobs, a rescan rare enough that file events
/// do the work.
pub fn quick_watch(dir: &Path) -> WatchOptions {
    WatchOptions {
        settle: Duration::from_millis(150),
        jobs: 2,
        rescan: Duration::from_secs(5),
        grace: Duration::from_secs(10),
        ..WatchOptions::new(dir)
    }
}

/// A daemon running in a thread.
pub struct Daemon {
    stop: Arc<AtomicBool>,
    thread: JoinHandle<Result<(), WatchError>>,
}

impl Daemon {
    pub fn start(opts: WatchOptions, processor: Arc<dyn Processor>) -> Daemon {
        let stop = Arc::new(AtomicBool::new(false));
        let flag = Arc::clone(&stop);
        let thread = std::thread::spawn(move || watch_until(&opts, processor, flag));
        Daemon { stop, thread }
    }

    /// Asks for shutdown and waits for `watch_until` to return.
    pub fn stop(self) -> Result<(), WatchError> {
        self.stop.store(true, Ordering::SeqCst);
        self.thread.join().unwrap()
    }

    pub fn is_finished(&self) -> bool {
        self.thread.is_finished()
    }
}

/// This machine's host name, as the lock files record it.
pub fn host_name() -> String {
    fs::read_to_string("/proc/sys/kernel/hostname")
        .ok()
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .or_else(|| std::env::var("HOSTNAME").ok().filter(|s| !s.is_empty()))
        .unwrap_or_else(|| "unknown".to_string())
}

/// The id of a process that has exited (and been reaped).
pub fn dead_pid() -> u32 {
    let mut child = std::process::Command::new("true").spawn().unwrap();
    let pid = child.id();
    child.wait().unwrap();
    pid
}

/// Unix seconds `ago` seconds before now.
pub fn unix_secs_ago(ago: u64) -> u64 {
    SystemTime::now()
        .duration_since(SystemTime::UNIX_EPOCH)
        .unwrap()
        .as_secs()
        - ago
}
