//! Reading spreadsheets in a child process with memory and CPU limits.
//!
//! The spreadsheet reader is third-party code fed with untrusted bytes. Some files make it ask
//! for far more memory than exists (an xls or ods sheet with one cell far away is read into a
//! dense grid first; a crafted record can ask for hundreds of gigabytes): the allocation
//! failure aborts the process, which no `catch_unwind` can stop. So `watch`, `batch` and
//! `solve` read xlsx, xlsm, xls and ods in a child process, the same binary started with a
//! hidden subcommand, whose address space and CPU time are limited
//! ([`crate::limits::READER_ADDRESS_SPACE_BYTES`], [`crate::limits::READER_CPU_SECS`]). The
//! parent sends the file's bytes on the child's standard input and reads the cells back from
//! its standard output; a child that dies or overruns its time is reported as an input that is
//! too large or malformed, and the parent carries on. `batch` and `watch` keep such children
//! between files ([`super::pool`]). CSV is read by our own bounded reader in the process
//! itself.

use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::process::{Child, ChildStderr, ChildStdin, ChildStdout, Command, Stdio};
use std::sync::mpsc::RecvTimeoutError;
use std::time::{Duration, Instant};

use super::pool::ReaderPool;
use super::{ReadError, read_bytes};
use crate::limits::{
    MAX_FILE_BYTES, READER_ADDRESS_SPACE_BYTES, READER_CPU_SECS, READER_FILES_PER_CHILD,
    READER_WALL_SECS,
};
use crate::workbook::raw::{RawBook, RawSheet, RawValue};

/// The hidden subcommand the child runs.
pub const CHILD_COMMAND: &str = "read-cells-child";

/// How spreadsheet bytes are read.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub enum Isolation {
    /// In this process (tests and library use; a hostile file can end the process).
    #[default]
    InProcess,
    /// In a child process: `exe` is this program, started as `exe read-cells-child EXT`.
    Child {
        /// The program to start.
        exe: PathBuf,
    },
    /// In child processes that stay up between files (`batch`, `watch`), with the same limits
    /// per file as [`Isolation::Child`]; see [`ReaderPool`].
    Pooled(ReaderPool),
}

impl Isolation {
    /// A child of the running program (on Linux through `/proc/self/exe`, which still works
    /// after the binary was replaced on disk).
    pub fn this_program() -> Isolation {
        match this_exe() {
            Some(exe) => Isolation::Child { exe },
            None => Isolation::InProcess,
        }
    }

    /// Children of the running program that each read many files ([`ReaderPool`]), for
    /// commands that read many files.
    pub fn pooled_this_program() -> Isolation {
        match this_exe() {
            Some(exe) => Isolation::Pooled(ReaderPool::new(exe, READER_FILES_PER_CHILD)),
            None => Isolation::InProcess,
        }
    }

    /// Reads `bytes` (a file with extension `extension`) as [`read_bytes`] does.
    pub fn read_bytes(&self, bytes: &[u8], extension: &str) -> Result<RawBook, ReadError> {
        let ext = extension.trim().trim_start_matches('.').to_lowercase();
        let spreadsheet = matches!(ext.as_str(), "xlsx" | "xlsm" | "xls" | "ods");
        match self {
            Isolation::Child { exe } if spreadsheet && !bytes.is_empty() => {
                read_in_child(exe, bytes, &ext)
            }
            Isolation::Pooled(pool) if spreadsheet && !bytes.is_empty() => pool.read(bytes, &ext),
            _ => read_bytes(bytes, extension),
        }
    }
}

/// This program's path for starting it again, if it can be found.
fn this_exe() -> Option<PathBuf> {
    let proc_exe = Path::new("/proc/self/exe");
    if proc_exe.exists() {
        Some(proc_exe.to_path_buf())
    } else {
        std::env::current_exe().ok()
    }
}

/// A reader child: this program started with `args`, its three standard streams piped and
/// taken (shared by the one-shot child and the pool's long-lived ones).
pub(super) struct Spawned {
    pub child: Child,
    pub stdin: ChildStdin,
    pub stdout: ChildStdout,
    pub stderr: ChildStderr,
}

/// Starts `exe` with `args` as a [`Spawned`] reader child.
pub(super) fn spawn_reader(exe: &Path, args: &[&str]) -> Result<Spawned, ReadError> {
    let mut child = Command::new(exe)
        .args(args)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .env("RUST_BACKTRACE", "0")
        .spawn()
        .map_err(|e| system_error(exe, "the reader process could not be started", e))?;
    let (Some(stdin), Some(stdout), Some(stderr)) =
        (child.stdin.take(), child.stdout.take(), child.stderr.take())
    else {
        let _ = child.kill();
        let _ = child.wait();
        return Err(not_a_workbook("the reader process had no pipes"));
    };
    Ok(Spawned {
        child,
        stdin,
        stdout,
        stderr,
    })
}

fn read_in_child(exe: &Path, bytes: &[u8], ext: &str) -> Result<RawBook, ReadError> {
    let system = |what: &str, e: std::io::Error| system_error(exe, what, e);
    let Spawned {
        mut child,
        mut stdin,
        mut stdout,
        mut stderr,
    } = spawn_reader(exe, &[CHILD_COMMAND, ext])?;
    let input = bytes.to_vec();
    // Writing and reading on threads: a child that fills a pipe while we write the other
    // would otherwise wait on us for ever.
    let writer = std::thread::spawn(move || {
        // A child that died early closes its end; that shows in its exit status.
        let _ = stdin.write_all(&input);
    });
    // The stdout reader says when the child closed its standard output, which it does by
    // ending: the parent waits on that instead of polling the child's status.
    let (closed_tx, closed_rx) = std::sync::mpsc::channel::<()>();
    let out_reader = std::thread::spawn(move || {
        let mut out = Vec::new();
        let _ = stdout.read_to_end(&mut out);
        let _ = closed_tx.send(());
        out
    });
    let err_reader = std::thread::spawn(move || {
        let mut err = Vec::new();
        let _ = (&mut stderr).take(64 * 1024).read_to_end(&mut err);
        err
    });
    let deadline = Instant::now() + Duration::from_secs(READER_WALL_SECS);
    let status = match closed_rx.recv_timeout(deadline.saturating_duration_since(Instant::now())) {
        // Closed (or the reader thread is gone): the child is ending; collect its status.
        Ok(()) | Err(RecvTimeoutError::Disconnected) => wait_until(&mut child, deadline)
            .map_err(|e| system("the reader process could not be waited for", e))?,
        Err(RecvTimeoutError::Timeout) => {
            let _ = child.kill();
            let _ = child.wait();
            None
        }
    };
    let _ = writer.join();
    let out = out_reader.join().unwrap_or_default();
    let err = err_reader.join().unwrap_or_default();
    match status {
        Some(status) if status.success() => decode(&out)
            .unwrap_or_else(|| Err(not_a_workbook("the reader process answered garbage"))),
        status => Err(failure(exe, status, &err)),
    }
}

/// Why a reader child gave no answer: `status` is `None` when it overran the wall-clock limit
/// (and was killed), else how it ended; `err` is what it wrote on standard error.
pub(super) fn failure(
    exe: &Path,
    status: Option<std::process::ExitStatus>,
    err: &[u8],
) -> ReadError {
    let err = String::from_utf8_lossy(err);
    if !err.trim().is_empty() {
        tracing::debug!("reader process said: {}", err.trim());
    }
    let Some(status) = status else {
        return ReadError::TooLarge {
            detail: format!("reading it took longer than {READER_WALL_SECS} s"),
        };
    };
    if err.contains("memory allocation") || err.contains("capacity overflow") {
        return ReadError::TooLarge {
            detail: format!(
                "reading it needs more than {} MiB of memory (a sheet whose cells lie far \
                 apart, or a damaged file)",
                READER_ADDRESS_SPACE_BYTES / (1024 * 1024)
            ),
        };
    }
    #[cfg(unix)]
    {
        use std::os::unix::process::ExitStatusExt;
        /// SIGINT, SIGHUP and SIGTERM (Linux numbering): someone stopped the child; the input
        /// is not to blame.
        const STOP_SIGNALS: [i32; 3] = [1, 2, 15];
        if status.signal().is_some_and(|s| STOP_SIGNALS.contains(&s)) {
            return system_error(
                exe,
                "the reader process was stopped",
                std::io::Error::other("by a signal"),
            );
        }
        /// SIGXCPU (Linux numbering): the CPU limit ended the child.
        const SIGXCPU: i32 = 24;
        if status.signal() == Some(SIGXCPU) {
            return ReadError::TooLarge {
                detail: format!("reading it needs more than {READER_CPU_SECS} s of CPU time"),
            };
        }
        /// SIGKILL: the hard CPU limit, or the system (its out-of-memory killer, an operator).
        const SIGKILL: i32 = 9;
        if status.signal() == Some(SIGKILL) {
            return ReadError::TooLarge {
                detail: format!(
                    "the reader process was killed: reading it needs more than {READER_CPU_SECS} \
                     s of CPU time, or the system ended it (short of memory, or by hand)"
                ),
            };
        }
    }
    ReadError::TooLarge {
        detail: format!(
            "the spreadsheet reader could not read it within {} MiB of memory and {} s of CPU \
             (a damaged or hostile file)",
            READER_ADDRESS_SPACE_BYTES / (1024 * 1024),
            READER_CPU_SECS
        ),
    }
}

/// A system error about the reader process `exe`: `what` happened, the system said `e`.
pub(super) fn system_error(exe: &Path, what: &str, e: std::io::Error) -> ReadError {
    ReadError::Io {
        path: exe.to_path_buf(),
        source: std::io::Error::new(e.kind(), format!("{what}: {e}")),
    }
}

/// The exit status of a child that has closed its output and is ending: `None` (the child
/// killed) if it is still running at `deadline`. The status is normally there at once or
/// within microseconds; the waits between looks start at 20 us and double up to 5 ms.
pub(super) fn wait_until(
    child: &mut std::process::Child,
    deadline: Instant,
) -> std::io::Result<Option<std::process::ExitStatus>> {
    let mut pause = Duration::from_micros(20);
    loop {
        match child.try_wait() {
            Ok(Some(status)) => return Ok(Some(status)),
            Ok(None) if Instant::now() >= deadline => {
                let _ = child.kill();
                let _ = child.wait();
                return Ok(None);
            }
            Ok(None) => {
                std::thread::sleep(pause);
                pause = (pause * 2).min(Duration::from_millis(5));
            }
            Err(e) => {
                let _ = child.kill();
                let _ = child.wait();
                return Err(e);
            }
        }
    }
}

pub(super) fn not_a_workbook(detail: &str) -> ReadError {
    ReadError::NotAWorkbook {
        detail: detail.to_string(),
    }
}

/// The child: limits itself, reads the bytes on standard input as a file with extension
/// `extension`, writes the cells (or the error) to standard output. Returns the exit code.
pub fn child_main(extension: &str) -> i32 {
    set_limit(
        RLIMIT_AS,
        READER_ADDRESS_SPACE_BYTES,
        READER_ADDRESS_SPACE_BYTES,
    );
    set_limit(RLIMIT_CPU, READER_CPU_SECS, READER_CPU_SECS);
    quiet_child();
    let mut bytes = Vec::new();
    if std::io::stdin()
        .take(MAX_FILE_BYTES + 1)
        .read_to_end(&mut bytes)
        .is_err()
    {
        return 3;
    }
    let answer = encode(&read_bytes(&bytes, extension));
    drop(bytes);
    let mut out = std::io::stdout().lock();
    match out.write_all(&answer).and_then(|()| out.flush()) {
        Ok(()) => 0,
        Err(_) => 3,
    }
}

/// What every reader child does before it reads: it ignores the terminal's stop signals and
/// says nothing about panics.
pub(super) fn quiet_child() {
    // Ctrl-C in a terminal reaches the whole process group: the parent decides what a stop
    // means, the child finishes its (short) read.
    for signal in [signal_hook::consts::SIGINT, signal_hook::consts::SIGTERM] {
        let _ = signal_hook::flag::register(
            signal,
            std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false)),
        );
    }
    // A panic inside the reader is caught and answered as an error; say nothing on stderr.
    std::panic::set_hook(Box::new(|_| {}));
}

/// Resource numbers from Linux's asm-generic/resource.h.
pub(super) const RLIMIT_CPU: i32 = 0;
pub(super) const RLIMIT_CORE: i32 = 4;
pub(super) const RLIMIT_AS: i32 = 9;

/// Sets the soft and hard limit of `resource` for this process (Linux; elsewhere nothing).
/// The hard limit can only be lowered; the soft one moves freely below it.
pub(super) fn set_limit(resource: i32, soft: u64, hard: u64) {
    #[cfg(target_os = "linux")]
    {
        #[repr(C)]
        struct RLimit {
            cur: u64,
            max: u64,
        }
        unsafe extern "C" {
            fn setrlimit(resource: i32, rlim: *const RLimit) -> i32;
        }
        let limit = RLimit {
            cur: soft,
            max: hard,
        };
        // SAFETY: setrlimit reads one properly laid out struct rlimit (two rlim_t, 64-bit
        // on Linux) through a pointer valid for the call; it has no other effect on memory.
        let _ = unsafe { setrlimit(resource, &limit) };
    }
    #[cfg(not(target_os = "linux"))]
    let _ = (resource, soft, hard);
}

// The wire form: `K` then a sheet as `S` name, then cells `C` row col value; `E` kind message
// for an error. Strings are a u32 length then UTF-8; numbers little-endian.

fn put_str(out: &mut Vec<u8>, s: &str) {
    out.extend_from_slice(&(s.len() as u32).to_le_bytes());
    out.extend_from_slice(s.as_bytes());
}

pub(super) fn encode(result: &Result<RawBook, ReadError>) -> Vec<u8> {
    let mut out = Vec::new();
    match result {
        Ok(book) => {
            out.push(b'K');
            for sheet in &book.sheets {
                out.push(b'S');
                put_str(&mut out, &sheet.name);
                for row in &sheet.rows {
                    for (col, value) in &row.cells {
                        out.push(b'C');
                        out.extend_from_slice(&row.row.to_le_bytes());
                        out.extend_from_slice(&col.to_le_bytes());
                        match value {
                            RawValue::Empty => out.push(b'0'),
                            RawValue::Number(x) => {
                                out.push(b'N');
                                out.extend_from_slice(&x.to_le_bytes());
                            }
                            RawValue::Text(s) => {
                                out.push(b'T');
                                put_str(&mut out, s);
                            }
                            RawValue::Bool(b) => {
                                out.push(b'B');
                                out.push(u8::from(*b));
                            }
                            RawValue::Error(e) => {
                                out.push(b'X');
                                put_str(&mut out, e);
                            }
                        }
                    }
                }
            }
        }
        Err(e) => {
            out.push(b'E');
            let (kind, text) = match e {
                ReadError::TooLarge { detail } => (b'L', detail.clone()),
                ReadError::NotAWorkbook { detail } => (b'W', detail.clone()),
                other => (b'W', other.to_string()),
            };
            out.push(kind);
            put_str(&mut out, &text);
        }
    }
    out
}

struct Input<'a> {
    bytes: &'a [u8],
    at: usize,
}

impl Input<'_> {
    fn take(&mut self, n: usize) -> Option<&[u8]> {
        let s = self.bytes.get(self.at..self.at.checked_add(n)?)?;
        self.at += n;
        Some(s)
    }
    fn byte(&mut self) -> Option<u8> {
        self.take(1).map(|b| b[0])
    }
    fn u32(&mut self) -> Option<u32> {
        let b = self.take(4)?;
        Some(u32::from_le_bytes([b[0], b[1], b[2], b[3]]))
    }
    fn string(&mut self) -> Option<String> {
        let n = usize::try_from(self.u32()?).ok()?;
        String::from_utf8(self.take(n)?.to_vec()).ok()
    }
}

/// A sheet being decoded: its name and (row, column, value) cells.
type Section = (String, Vec<(u32, u32, RawValue)>);

pub(super) fn decode(bytes: &[u8]) -> Option<Result<RawBook, ReadError>> {
    let mut input = Input { bytes, at: 0 };
    match input.byte()? {
        b'E' => {
            let kind = input.byte()?;
            let detail = input.string()?;
            Some(Err(match kind {
                b'L' => ReadError::TooLarge { detail },
                _ => ReadError::NotAWorkbook { detail },
            }))
        }
        b'K' => {
            let mut book = RawBook::default();
            let mut current: Option<Section> = None;
            while let Some(tag) = input.byte() {
                match tag {
                    b'S' => {
                        if let Some((name, cells)) = current.take() {
                            book.sheets.push(RawSheet::from_cells(&name, cells));
                        }
                        current = Some((input.string()?, Vec::new()));
                    }
                    b'C' => {
                        let row = input.u32()?;
                        let col = input.u32()?;
                        let value = match input.byte()? {
                            b'0' => RawValue::Empty,
                            b'N' => {
                                let b = input.take(8)?;
                                let mut a = [0u8; 8];
                                a.copy_from_slice(b);
                                RawValue::Number(f64::from_le_bytes(a))
                            }
                            b'T' => RawValue::Text(input.string()?),
                            b'B' => RawValue::Bool(input.byte()? != 0),
                            b'X' => RawValue::Error(input.string()?),
                            _ => return None,
                        };
                        current.as_mut()?.1.push((row, col, value));
                    }
                    _ => return None,
                }
            }
            if let Some((name, cells)) = current.take() {
                book.sheets.push(RawSheet::from_cells(&name, cells));
            }
            Some(Ok(book))
        }
        _ => None,
    }
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    #[test]
    fn cells_survive_the_wire_form() {
        let book = RawBook {
            sheets: vec![
                RawSheet::from_cells(
                    "case",
                    vec![
                        (0, 0, RawValue::Text("title".into())),
                        (0, 1, RawValue::Text("Köln ✓".into())),
                        (3, 2, RawValue::Number(-1.25e-7)),
                        (4, 0, RawValue::Bool(true)),
                        (70_000, 16_000, RawValue::Error("#DIV/0!".into())),
                    ],
                ),
                RawSheet::from_cells("empty", Vec::new()),
            ],
        };
        let back = decode(&encode(&Ok(book.clone()))).unwrap().unwrap();
        assert_eq!(back, book);
        let e = decode(&encode(&Err(ReadError::TooLarge {
            detail: "big".into(),
        })))
        .unwrap()
        .unwrap_err();
        assert!(matches!(e, ReadError::TooLarge { ref detail } if detail == "big"));
        assert!(decode(b"K S").is_none());
    }
}
