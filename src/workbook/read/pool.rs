//! Reader child processes that read many files each, for `batch` and `watch`.
//!
//! Starting a process costs more than reading a small case workbook, so a [`ReaderPool`] keeps
//! its children (this program started as `exe read-cells-server`) between files and hands each
//! file to an idle one over its standard input; the answer comes back on its standard output.
//! Each file is as isolated as in the one-shot child of [`super::Isolation::Child`]:
//! - it has the one-shot child's address-space and CPU limits on top of what the child holds
//!   from earlier files: before each file the child moves its soft limits to what it has used
//!   so far plus those limits, so no file is blamed for another file's memory or CPU (the hard
//!   limits are the limits plus the recycle margins below);
//! - it has the wall-clock limit; a child that overruns it is killed;
//! - a child whose file failed in any way (an error answer, a death, an overrun, a garbled
//!   answer) is not used again, so the next file starts in a fresh child;
//! - a child is replaced after [`crate::limits::READER_FILES_PER_CHILD`] files, or once it holds more than
//!   [`READER_RECYCLE_CPU_SECS`] of CPU time or [`READER_RECYCLE_ADDRESS_SPACE_BYTES`] more
//!   address space than when it started.
//!
//! A request is the extension's length (one byte), the extension, the file's length (u64) and
//! its bytes; an answer is the payload's length (u64), the child's CPU time so far in
//! nanoseconds (u64), the address space it gained since it started in bytes (u64), and the
//! payload, the one-shot child's answer. Numbers are little-endian.

use std::fmt;
use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::process::Child;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::mpsc::{Receiver, RecvTimeoutError, Sender};
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use super::isolate::{
    RLIMIT_AS, RLIMIT_CORE, RLIMIT_CPU, Spawned, decode, encode, failure, not_a_workbook,
    quiet_child, set_limit, spawn_reader, system_error, wait_until,
};
use super::{ReadError, read_bytes};
use crate::limits::{
    MAX_FILE_BYTES, READER_ADDRESS_SPACE_BYTES, READER_CPU_SECS,
    READER_RECYCLE_ADDRESS_SPACE_BYTES, READER_RECYCLE_CPU_SECS, READER_WALL_SECS,
};
use crate::workbook::raw::RawBook;

/// The hidden subcommand a pooled child runs.
pub const SERVER_COMMAND: &str = "read-cells-server";

/// The most a child keeps of what it writes on standard error (it writes nothing unless it
/// dies).
const STDERR_KEPT: usize = 64 * 1024;

/// Reader children kept between files; cloning shares them. Each file goes to an idle child
/// (or a new one when none is idle), so there are at most as many as files read at once.
/// Idle children end when the last clone is dropped.
#[derive(Clone)]
pub struct ReaderPool {
    inner: Arc<Inner>,
}

struct Inner {
    exe: PathBuf,
    files_per_child: usize,
    idle: Mutex<Vec<Server>>,
    started: AtomicUsize,
}

impl fmt::Debug for ReaderPool {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("ReaderPool")
            .field("exe", &self.inner.exe)
            .field("files_per_child", &self.inner.files_per_child)
            .field("children_started", &self.children_started())
            .finish()
    }
}

/// Two pools are equal when they share their children.
impl PartialEq for ReaderPool {
    fn eq(&self, other: &Self) -> bool {
        Arc::ptr_eq(&self.inner, &other.inner)
    }
}

impl Eq for ReaderPool {}

impl ReaderPool {
    /// A pool of children of the program `exe`, each reading at most `files_per_child` files
    /// (at least 1; the command line uses
    /// [`crate::limits::READER_FILES_PER_CHILD`]).
    pub fn new(exe: impl Into<PathBuf>, files_per_child: usize) -> ReaderPool {
        ReaderPool {
            inner: Arc::new(Inner {
                exe: exe.into(),
                files_per_child: files_per_child.max(1),
                idle: Mutex::new(Vec::new()),
                started: AtomicUsize::new(0),
            }),
        }
    }

    /// How many children this pool has started so far.
    pub fn children_started(&self) -> usize {
        self.inner.started.load(Ordering::Relaxed)
    }

    /// The process ids of the children waiting for a file (for monitoring and tests).
    pub fn idle_children(&self) -> Vec<u32> {
        self.inner
            .idle
            .lock()
            .map(|idle| idle.iter().map(|s| s.child.id()).collect())
            .unwrap_or_default()
    }

    /// Reads `bytes`, a spreadsheet with extension `ext` (lower case, no dot), in a child.
    pub fn read(&self, bytes: &[u8], ext: &str) -> Result<RawBook, ReadError> {
        let mut server = match self.idle_server() {
            Some(server) => server,
            None => {
                let server = Server::start(&self.inner.exe)?;
                self.inner.started.fetch_add(1, Ordering::Relaxed);
                server
            }
        };
        let (result, reusable) = server.read(&self.inner.exe, bytes, ext);
        if reusable
            && server.files < self.inner.files_per_child
            && let Ok(mut idle) = self.inner.idle.lock()
        {
            idle.push(server);
        }
        // Otherwise the child is dropped here, which ends it.
        result
    }

    /// An idle child that is still running. One that ended while idle (stopped by someone, or
    /// by the system) is dropped here, so the next file is not blamed for its end.
    fn idle_server(&self) -> Option<Server> {
        loop {
            let mut server = self.inner.idle.lock().ok()?.pop()?;
            if matches!(server.child.try_wait(), Ok(None)) {
                return Some(server);
            }
        }
    }
}

/// One running child.
struct Server {
    child: Child,
    /// Requests for the thread that writes to the child's standard input (dropping it closes
    /// that input).
    requests: Option<Sender<Vec<u8>>>,
    answers: Receiver<Answer>,
    threads: Vec<JoinHandle<()>>,
    stderr: Arc<Mutex<Vec<u8>>>,
    /// Files sent to it.
    files: usize,
}

/// One answer of a child.
struct Answer {
    cpu_ns: u64,
    gained_bytes: u64,
    payload: Vec<u8>,
}

impl Server {
    fn start(exe: &Path) -> Result<Server, ReadError> {
        let Spawned {
            child,
            stdin,
            mut stdout,
            mut stderr,
        } = spawn_reader(exe, &[SERVER_COMMAND])?;
        let (tx, answers) = std::sync::mpsc::channel();
        let (requests, to_write) = std::sync::mpsc::channel::<Vec<u8>>();
        let kept = Arc::new(Mutex::new(Vec::new()));
        let kept_by_thread = Arc::clone(&kept);
        let threads = [
            // Requests are written on a thread of their own, so the wall-clock limit holds
            // while writing too: a child that dies or is killed closes its end, and the write
            // ends with an error. One thread for the child's life rather than one per file
            // (starting a thread cost about 1 % of a small workbook's batch time).
            std::thread::Builder::new()
                .name("reader-requests".into())
                .spawn(move || {
                    let mut stdin = stdin;
                    for request in to_write {
                        if stdin
                            .write_all(&request)
                            .and_then(|()| stdin.flush())
                            .is_err()
                        {
                            break;
                        }
                    }
                }),
            std::thread::Builder::new()
                .name("reader-answers".into())
                .spawn(move || {
                    while let Some(answer) = read_answer(&mut stdout) {
                        if tx.send(answer).is_err() {
                            break;
                        }
                    }
                }),
            // Everything is read, so the child never waits on a full pipe; the start is kept.
            std::thread::Builder::new()
                .name("reader-stderr".into())
                .spawn(move || {
                    let mut chunk = [0u8; 4096];
                    while let Ok(n @ 1..) = stderr.read(&mut chunk) {
                        if let Ok(mut kept) = kept_by_thread.lock() {
                            let room = STDERR_KEPT.saturating_sub(kept.len()).min(n);
                            kept.extend_from_slice(&chunk[..room]);
                        }
                    }
                }),
        ];
        let mut server = Server {
            child,
            requests: Some(requests),
            answers,
            threads: Vec::new(),
            stderr: kept,
            files: 0,
        };
        for thread in threads {
            // A thread that could not start: dropping the server ends the child.
            server.threads.push(thread.map_err(|e| {
                system_error(exe, "the reader process's pipes could not be served", e)
            })?);
        }
        Ok(server)
    }

    /// Reads one file: the outcome, and whether this child may read another.
    fn read(&mut self, exe: &Path, bytes: &[u8], ext: &str) -> (Result<RawBook, ReadError>, bool) {
        self.files += 1;
        let deadline = Instant::now() + Duration::from_secs(READER_WALL_SECS);
        let sent = match (self.requests.as_ref(), request(ext, bytes)) {
            (Some(requests), Ok(request)) => requests.send(request).is_ok(),
            _ => false,
        };
        if !sent {
            return (
                Err(not_a_workbook("the reader process had no pipes")),
                false,
            );
        }
        let got = self
            .answers
            .recv_timeout(deadline.saturating_duration_since(Instant::now()));
        if matches!(got, Err(RecvTimeoutError::Timeout)) {
            let _ = self.child.kill();
        }
        match got {
            Ok(answer) => {
                let fresh_enough = answer.cpu_ns <= READER_RECYCLE_CPU_SECS * 1_000_000_000
                    && answer.gained_bytes <= READER_RECYCLE_ADDRESS_SPACE_BYTES;
                match decode(&answer.payload) {
                    Some(Ok(book)) => (Ok(book), fresh_enough),
                    Some(Err(e)) => (Err(e), false),
                    None => (
                        Err(not_a_workbook("the reader process answered garbage")),
                        false,
                    ),
                }
            }
            Err(RecvTimeoutError::Timeout) => {
                let _ = self.child.wait();
                (Err(failure(exe, None, &[])), false)
            }
            // The child closed its output: it died, or is dying.
            Err(RecvTimeoutError::Disconnected) => {
                let status = match wait_until(&mut self.child, deadline) {
                    Ok(status) => status,
                    Err(e) => {
                        let e = system_error(exe, "the reader process could not be waited for", e);
                        return (Err(e), false);
                    }
                };
                // Its stderr reaches its end once the child is gone.
                self.join_threads();
                let err = self.stderr.lock().map(|e| e.clone()).unwrap_or_default();
                let outcome = match status {
                    Some(status) if status.success() => {
                        not_a_workbook("the reader process ended without an answer")
                    }
                    status => failure(exe, status, &err),
                };
                (Err(outcome), false)
            }
        }
    }

    fn join_threads(&mut self) {
        // The writer ends once it has no more requests to wait for.
        drop(self.requests.take());
        for thread in self.threads.drain(..) {
            let _ = thread.join();
        }
    }
}

impl Drop for Server {
    fn drop(&mut self) {
        drop(self.requests.take());
        let _ = self.child.kill();
        let _ = self.child.wait();
        self.join_threads();
    }
}

/// The request for one file: the extension's length, the extension, the file's length and its
/// bytes.
fn request(ext: &str, bytes: &[u8]) -> std::io::Result<Vec<u8>> {
    let ext = ext.as_bytes();
    let ext_len = u8::try_from(ext.len()).map_err(std::io::Error::other)?;
    let mut request = Vec::with_capacity(1 + ext.len() + 8 + bytes.len());
    request.push(ext_len);
    request.extend_from_slice(ext);
    request.extend_from_slice(&(bytes.len() as u64).to_le_bytes());
    request.extend_from_slice(bytes);
    Ok(request)
}

/// The next answer on a child's standard output; `None` at its end or on a cut-off answer.
fn read_answer(from: &mut impl Read) -> Option<Answer> {
    let mut head = [0u8; 24];
    from.read_exact(&mut head).ok()?;
    let word = |i: usize| {
        let mut w = [0u8; 8];
        w.copy_from_slice(&head[8 * i..8 * i + 8]);
        u64::from_le_bytes(w)
    };
    let (len, cpu_ns, gained_bytes) = (word(0), word(1), word(2));
    // Grown as it arrives, so a garbled length cannot make us allocate it up front.
    let mut payload = Vec::new();
    from.take(len).read_to_end(&mut payload).ok()?;
    (payload.len() as u64 == len).then_some(Answer {
        cpu_ns,
        gained_bytes,
        payload,
    })
}

/// The pooled child: sets its limits, then answers requests on standard input (see the
/// module documentation) until it ends. Returns the exit code: 0 at the end of the input, 3 on
/// a broken request or a failed write.
pub fn server_main() -> i32 {
    let hard_cpu = READER_CPU_SECS + READER_RECYCLE_CPU_SECS + 1;
    let hard_space = READER_ADDRESS_SPACE_BYTES + READER_RECYCLE_ADDRESS_SPACE_BYTES;
    // A child ended by its CPU limit (SIGXCPU) leaves no core file behind.
    set_limit(RLIMIT_CORE, 0, 0);
    set_limit(RLIMIT_AS, READER_ADDRESS_SPACE_BYTES, hard_space);
    set_limit(RLIMIT_CPU, READER_CPU_SECS, hard_cpu);
    quiet_child();
    let mut input = std::io::stdin().lock();
    let mut output = std::io::stdout().lock();
    let start_space = address_space();
    loop {
        let mut ext_len = [0u8; 1];
        match input.read(&mut ext_len) {
            Ok(0) => return 0,
            Ok(_) => {}
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
            Err(_) => return 3,
        }
        let mut ext = vec![0u8; usize::from(ext_len[0])];
        let mut len = [0u8; 8];
        if input
            .read_exact(&mut ext)
            .and_then(|()| input.read_exact(&mut len))
            .is_err()
        {
            return 3;
        }
        let len = u64::from_le_bytes(len);
        let Ok(ext) = String::from_utf8(ext) else {
            return 3;
        };
        if len > MAX_FILE_BYTES {
            return 3;
        }
        // This file's limits: the one-shot child's, on top of what earlier files used.
        let used_secs = cpu_ns().div_ceil(1_000_000_000);
        set_limit(
            RLIMIT_CPU,
            (used_secs + READER_CPU_SECS).min(hard_cpu),
            hard_cpu,
        );
        let gained = address_space().saturating_sub(start_space);
        set_limit(
            RLIMIT_AS,
            (gained + READER_ADDRESS_SPACE_BYTES).min(hard_space),
            hard_space,
        );
        let mut bytes = Vec::new();
        match (&mut input).take(len).read_to_end(&mut bytes) {
            Ok(n) if n as u64 == len => {}
            _ => return 3,
        }
        let answer = encode(&read_bytes(&bytes, &ext));
        drop(bytes);
        let mut head = [0u8; 24];
        head[..8].copy_from_slice(&(answer.len() as u64).to_le_bytes());
        head[8..16].copy_from_slice(&cpu_ns().to_le_bytes());
        let gained = address_space().saturating_sub(start_space);
        head[16..].copy_from_slice(&gained.to_le_bytes());
        if output
            .write_all(&head)
            .and_then(|()| output.write_all(&answer))
            .and_then(|()| output.flush())
            .is_err()
        {
            return 3;
        }
    }
}

/// CPU time this process has used, in nanoseconds (Linux; elsewhere 0).
fn cpu_ns() -> u64 {
    #[cfg(target_os = "linux")]
    {
        #[repr(C)]
        struct Timespec {
            sec: std::ffi::c_long,
            nsec: std::ffi::c_long,
        }
        unsafe extern "C" {
            fn clock_gettime(clock: i32, tp: *mut Timespec) -> i32;
        }
        /// CLOCK_PROCESS_CPUTIME_ID from Linux's uapi/linux/time.h.
        const CLOCK_PROCESS_CPUTIME_ID: i32 = 2;
        let mut t = Timespec { sec: 0, nsec: 0 };
        // SAFETY: clock_gettime writes one struct timespec (two C longs on Linux) through a
        // pointer valid for the call; it has no other effect on memory.
        if unsafe { clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &mut t) } == 0 {
            let sec = u64::try_from(t.sec).unwrap_or(0);
            let nsec = u64::try_from(t.nsec).unwrap_or(0);
            return sec.saturating_mul(1_000_000_000).saturating_add(nsec);
        }
    }
    0
}

/// This process's address space in bytes (the first field of /proc/self/statm, in pages;
/// elsewhere 0).
fn address_space() -> u64 {
    #[cfg(target_os = "linux")]
    {
        unsafe extern "C" {
            fn sysconf(name: i32) -> std::ffi::c_long;
        }
        /// _SC_PAGESIZE in glibc's and musl's bits/confname.h for Linux.
        const SC_PAGESIZE: i32 = 30;
        // SAFETY: sysconf reads a configuration value; it takes no pointers.
        let page = u64::try_from(unsafe { sysconf(SC_PAGESIZE) }).unwrap_or(4096);
        if let Some(pages) = std::fs::read_to_string("/proc/self/statm")
            .ok()
            .and_then(|s| s.split_whitespace().next()?.parse::<u64>().ok())
        {
            return pages.saturating_mul(page);
        }
    }
    0
}
