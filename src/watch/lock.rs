//! `<stem>.lock`: one runner per input across watchers, batch passes and machines.
//!
//! A lock is created with `create_new` (atomic on local file systems and on NFSv3+/SMB) and
//! holds one `key=value` per line:
//!
//! ```text
//! host=kiln-pc-2
//! pid=4711
//! started=1767225600
//! token=kiln-pc-2:4711:1767225600123456789:3
//! ```
//!
//! `started` is when the lock was taken (unix seconds); `token` tells apart several runners in
//! one process, so each removes only its own locks. A lock is taken over when it is older than
//! the stale-lock age *and* its owner is gone: on the same host when `/proc/<pid>` is missing
//! (Linux); for another host, or where a process cannot be checked, by age alone. A lock that
//! cannot be parsed (a runner that died between creating and writing it) is judged by the
//! file's modification time.
//!
//! Takeover renames the stale lock aside first and compares what it moved with what it judged,
//! so two runners taking over the same stale lock cannot both win.

use std::fs::{self, OpenOptions};
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::{Duration, SystemTime, UNIX_EPOCH};

use super::filter::lock_path;

/// Who takes locks: this host and process, plus a token unique to one watcher or batch pass.
#[derive(Debug, Clone)]
pub(crate) struct LockOwner {
    host: String,
    pid: u32,
    token: String,
}

impl LockOwner {
    /// An owner with a fresh token.
    pub(crate) fn new() -> Self {
        static COUNTER: AtomicU64 = AtomicU64::new(0);
        let host = host_name();
        let pid = std::process::id();
        let nanos = SystemTime::now()
            .duration_since(UNIX_EPOCH)
            .map_or(0, |d| d.as_nanos());
        let n = COUNTER.fetch_add(1, Ordering::Relaxed);
        let token = format!("{host}:{pid}:{nanos}:{n}");
        LockOwner { host, pid, token }
    }

    fn contents(&self) -> String {
        format!(
            "host={}\npid={}\nstarted={}\ntoken={}\n",
            self.host,
            self.pid,
            unix_now(),
            self.token
        )
    }
}

/// The host name: the kernel's, else `$HOSTNAME`, else `unknown`.
fn host_name() -> String {
    fs::read_to_string("/proc/sys/kernel/hostname")
        .ok()
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .or_else(|| std::env::var("HOSTNAME").ok().filter(|s| !s.is_empty()))
        .unwrap_or_else(|| "unknown".to_string())
}

fn unix_now() -> u64 {
    SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0, |d| d.as_secs())
}

/// A lock held by us; dropping it removes the file (if it is still ours).
#[derive(Debug)]
pub(crate) struct LockGuard {
    path: PathBuf,
    token: String,
}

impl Drop for LockGuard {
    fn drop(&mut self) {
        remove_if_ours(&self.path, &self.token);
    }
}

/// The answer to [`try_lock`].
#[derive(Debug)]
pub(crate) enum Acquire {
    /// The lock is ours until the guard is dropped.
    Taken(LockGuard),
    /// Someone else runs this input; the text says who.
    Busy(String),
}

/// Removes the lock at `path` if its token is `token`; `true` if it was removed.
pub(crate) fn remove_if_ours(path: &Path, token: &str) -> bool {
    match fs::read_to_string(path) {
        Ok(text) if LockInfo::parse(&text).token.as_deref() == Some(token) => {
            fs::remove_file(path).is_ok()
        }
        _ => false,
    }
}

/// Removes the lock of `input` if `owner` holds it (used when a run is abandoned).
pub(crate) fn release_for(input: &Path, owner: &LockOwner) -> bool {
    remove_if_ours(&lock_path(input), &owner.token)
}

/// Tries to take the lock of `input`, taking over a stale one.
pub(crate) fn try_lock(
    input: &Path,
    owner: &LockOwner,
    stale_after: Duration,
) -> io::Result<Acquire> {
    let path = lock_path(input);
    // A few rounds: a lock can vanish or be replaced between our looks.
    for _ in 0..3 {
        match OpenOptions::new().write(true).create_new(true).open(&path) {
            Ok(mut file) => {
                let written = file
                    .write_all(owner.contents().as_bytes())
                    .and_then(|()| file.flush());
                if let Err(e) = written {
                    // A half-written lock has no token to recognise it by later.
                    let _ = fs::remove_file(&path);
                    return Err(e);
                }
                return Ok(Acquire::Taken(LockGuard {
                    path: path.clone(),
                    token: owner.token.clone(),
                }));
            }
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists => {}
            Err(e) => return Err(e),
        }
        // We only ever create plain files: a symbolic link in a lock's place (dangling or not)
        // is no runner's lock, and left alone it would block the input for ever.
        if fs::symlink_metadata(&path).is_ok_and(|m| m.file_type().is_symlink()) {
            tracing::warn!(lock = %path.display(), "a symbolic link stood in place of a lock; removed");
            let _ = fs::remove_file(&path);
            continue;
        }
        let seen = match fs::read_to_string(&path) {
            Ok(text) => text,
            Err(e) if e.kind() == io::ErrorKind::NotFound => continue,
            Err(e) => return Err(e),
        };
        let info = LockInfo::parse(&seen);
        let age = info.age(&path);
        if age < stale_after || !info.owner_gone(&owner.host) {
            return Ok(Acquire::Busy(info.describe()));
        }
        match take_over(&path, &seen, owner)? {
            TakeOver::Done => {
                tracing::info!(lock = %path.display(), previous = %info.describe(), "took over a stale lock");
            }
            TakeOver::Lost => return Ok(Acquire::Busy("another runner that just took it".into())),
        }
    }
    Ok(Acquire::Busy("runners competing for it".into()))
}

enum TakeOver {
    /// The stale lock is gone; try to create ours.
    Done,
    /// Someone else replaced it first.
    Lost,
}

fn take_over(path: &Path, seen: &str, owner: &LockOwner) -> io::Result<TakeOver> {
    let mut aside_name = std::ffi::OsString::from(".");
    aside_name.push(path.file_name().unwrap_or_default());
    aside_name.push(format!(
        ".takeover-{}",
        owner.token.replace([':', '/'], "-")
    ));
    let aside = path.with_file_name(aside_name);
    match fs::rename(path, &aside) {
        Ok(()) => {}
        // Someone removed or moved it first; our next round will see.
        Err(e) if e.kind() == io::ErrorKind::NotFound => return Ok(TakeOver::Done),
        Err(e) => return Err(e),
    }
    let moved = fs::read_to_string(&aside).unwrap_or_default();
    if moved == seen {
        fs::remove_file(&aside)?;
        return Ok(TakeOver::Done);
    }
    // We moved a lock someone took after our look: put it back without clobbering.
    if fs::hard_link(&aside, path).is_err() && !path.exists() {
        fs::rename(&aside, path)?;
        return Ok(TakeOver::Lost);
    }
    let _ = fs::remove_file(&aside);
    Ok(TakeOver::Lost)
}

/// What a lock file says (fields it does not have, or that do not parse, are `None`).
#[derive(Debug, Default, PartialEq, Eq)]
struct LockInfo {
    host: Option<String>,
    pid: Option<u32>,
    started: Option<u64>,
    token: Option<String>,
}

impl LockInfo {
    fn parse(text: &str) -> LockInfo {
        let mut info = LockInfo::default();
        for line in text.lines() {
            let Some((key, value)) = line.split_once('=') else {
                continue;
            };
            let value = value.trim();
            match key.trim() {
                "host" => info.host = Some(value.to_string()),
                "pid" => info.pid = value.parse().ok(),
                "started" => info.started = value.parse().ok(),
                "token" => info.token = Some(value.to_string()),
                _ => {}
            }
        }
        info
    }

    /// Age from `started`, else from the file's modification time; a time in the future
    /// counts as age zero.
    fn age(&self, path: &Path) -> Duration {
        let since = match self.started {
            Some(secs) => Some(UNIX_EPOCH + Duration::from_secs(secs)),
            None => fs::metadata(path).and_then(|m| m.modified()).ok(),
        };
        since
            .and_then(|t| SystemTime::now().duration_since(t).ok())
            .unwrap_or(Duration::ZERO)
    }

    /// Whether the owner is gone, as far as can be told from `our_host`. A live process with
    /// the lock's id that started after the lock was written is another process that got the
    /// id again: the owner is gone.
    fn owner_gone(&self, our_host: &str) -> bool {
        match (&self.host, self.pid) {
            (Some(host), Some(pid)) if host == our_host => {
                !process_alive(pid)
                    || matches!(
                        (process_started(pid), self.started),
                        (Some(proc_start), Some(lock_start)) if proc_start > lock_start + 2
                    )
            }
            // Another host, or an unreadable lock: age alone decides.
            _ => true,
        }
    }

    fn describe(&self) -> String {
        match (&self.host, self.pid) {
            (Some(host), Some(pid)) => format!("process {pid} on {host}"),
            _ => "an unknown runner".to_string(),
        }
    }
}

#[cfg(target_os = "linux")]
fn process_alive(pid: u32) -> bool {
    Path::new("/proc").join(pid.to_string()).exists()
}

/// Removes temporary files that a killed run of this program left in `dir` (and, with
/// `recursive`, its non-hidden sub-folders): `.dampfront-*.tmp` outputs never renamed into
/// place and `.NAME.lock.takeover-*` files, once older than `age` (a live writer finishes
/// within seconds). Returns how many were removed.
pub(crate) fn remove_old_leftovers(dir: &Path, recursive: bool, age: Duration) -> usize {
    let mut removed = 0;
    let mut folders = vec![dir.to_path_buf()];
    while let Some(folder) = folders.pop() {
        let Ok(entries) = fs::read_dir(&folder) else {
            continue;
        };
        for entry in entries.flatten() {
            let Ok(kind) = entry.file_type() else {
                continue;
            };
            let name = entry.file_name().to_string_lossy().into_owned();
            if kind.is_dir() {
                if recursive && !name.starts_with('.') && !name.starts_with("~$") {
                    folders.push(entry.path());
                }
                continue;
            }
            let ours = (name.starts_with(".dampfront-") && name.ends_with(".tmp"))
                || (name.starts_with('.') && name.contains(".lock.takeover-"));
            let old = entry
                .metadata()
                .and_then(|m| m.modified())
                .ok()
                .and_then(|t| SystemTime::now().duration_since(t).ok())
                .is_some_and(|a| a >= age);
            if kind.is_file() && ours && old && fs::remove_file(entry.path()).is_ok() {
                tracing::info!(file = %entry.path().display(), "removed a temporary file left by a stopped run");
                removed += 1;
            }
        }
    }
    removed
}

/// When process `pid` started, in seconds since the Unix epoch: the boot time (`btime` in
/// /proc/stat) plus the start time in clock ticks (field 22 of /proc/PID/stat; proc(5)) at the
/// usual 100 ticks per second.
#[cfg(target_os = "linux")]
fn process_started(pid: u32) -> Option<u64> {
    let stat = fs::read_to_string(format!("/proc/{pid}/stat")).ok()?;
    // The command name (field 2) is in parentheses and may hold spaces: count after it.
    let after = stat.rsplit_once(')')?.1;
    let ticks: u64 = after.split_whitespace().nth(19)?.parse().ok()?;
    let boot: u64 = fs::read_to_string("/proc/stat")
        .ok()?
        .lines()
        .find_map(|l| l.strip_prefix("btime "))?
        .trim()
        .parse()
        .ok()?;
    Some(boot + ticks / 100)
}

#[cfg(not(target_os = "linux"))]
fn process_started(_pid: u32) -> Option<u64> {
    None
}

/// Without `/proc` a process cannot be checked; age alone decides.
#[cfg(not(target_os = "linux"))]
fn process_alive(_pid: u32) -> bool {
    false
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    #[test]
    fn lock_contents_parse_back() {
        let owner = LockOwner::new();
        let info = LockInfo::parse(&owner.contents());
        assert_eq!(info.host.as_deref(), Some(owner.host.as_str()));
        assert_eq!(info.pid, Some(std::process::id()));
        assert_eq!(info.token.as_deref(), Some(owner.token.as_str()));
        assert!(info.started.is_some());
    }

    #[test]
    fn only_the_owner_removes_its_lock() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("a.csv");
        let first = LockOwner::new();
        let second = LockOwner::new();
        let guard = match try_lock(&input, &first, Duration::from_secs(600)).unwrap() {
            Acquire::Taken(g) => g,
            Acquire::Busy(who) => panic!("lock busy: {who}"),
        };
        // Same process, so the owner is alive: the second runner must wait.
        assert!(matches!(
            try_lock(&input, &second, Duration::ZERO).unwrap(),
            Acquire::Busy(_)
        ));
        assert!(!release_for(&input, &second));
        assert!(lock_path(&input).exists());
        drop(guard);
        assert!(!lock_path(&input).exists());
    }

    #[test]
    fn an_unreadable_old_lock_is_taken_over() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("a.csv");
        let lock = lock_path(&input);
        fs::write(&lock, "").unwrap();
        let old = SystemTime::now() - Duration::from_secs(3600);
        fs::File::options()
            .write(true)
            .open(&lock)
            .unwrap()
            .set_modified(old)
            .unwrap();
        let owner = LockOwner::new();
        let acquired = try_lock(&input, &owner, Duration::from_secs(600)).unwrap();
        assert!(matches!(acquired, Acquire::Taken(_)));
        // No takeover leftovers beside the lock.
        let names: Vec<_> = fs::read_dir(dir.path())
            .unwrap()
            .flatten()
            .map(|e| e.file_name())
            .collect();
        assert_eq!(names, vec![std::ffi::OsString::from("a.lock")]);
    }
}
