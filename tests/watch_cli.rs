//! `watch` and `batch` through the real binary on a temporary folder: results follow inputs,
//! slow copies are read once complete, ignored names stay ignored, a corrupt workbook is
//! reported after its retries, two watchers share a folder, SIGKILL and SIGTERM leave the
//! folder clean, and batch shards and exit codes behave as `operations.md` says.
//!
//! Every wait polls for a condition against a generous deadline; the only timing assertions
//! are the documented bounds (settle + 5 s for a result, the grace time on SIGTERM) and a
//! lower bound (the back-off before a corrupt file is reported), which load cannot break.

mod support;

use std::fs;
use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::process::{Child, ExitStatus, Stdio};
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;
use std::time::{Duration, Instant, SystemTime};

use calamine::{Data, Reader, open_workbook_auto};
use support::books::{self, V};
use support::{bin, keep_outputs, output_text, run_in, scratch, sha256};

/// Long enough for a loaded 2-core machine; conditions are polled, so a healthy run is fast.
const PATIENCE: Duration = Duration::from_secs(90);

/// How often conditions are looked at.
const POLL: Duration = Duration::from_millis(20);

/// The JSON log's one line per input.
const INPUT_DONE: &str = r#""message":"input done""#;

/// Polls `condition` until it holds; panics with `what` (and `context()`) after `limit`.
/// Returns how long it took.
fn wait_until(
    what: &str,
    limit: Duration,
    mut condition: impl FnMut() -> bool,
    context: impl Fn() -> String,
) -> Duration {
    let start = Instant::now();
    loop {
        if condition() {
            return start.elapsed();
        }
        assert!(
            start.elapsed() < limit,
            "timed out after {limit:?} waiting for {what}\n{}",
            context()
        );
        std::thread::sleep(POLL);
    }
}

/// A `dampfront watch` process with its JSON log collected line by line.
struct Watcher {
    child: Child,
    log: Arc<Mutex<Vec<String>>>,
    reader: Option<JoinHandle<()>>,
}

impl Watcher {
    /// Starts `dampfront --log-json watch DIR ARGS...` at log level info and waits until it
    /// says it is watching.
    fn start(dir: &Path, args: &[&str]) -> Watcher {
        Watcher::start_with_log(dir, args, "info")
    }

    fn start_with_log(dir: &Path, args: &[&str], filter: &str) -> Watcher {
        let mut child = bin()
            .arg("--log-json")
            .arg("watch")
            .arg(dir)
            .args(args)
            .env("RUST_LOG", filter)
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(Stdio::piped())
            .spawn()
            .expect("the watcher starts");
        let stderr = child.stderr.take().expect("stderr is piped");
        let log = Arc::new(Mutex::new(Vec::new()));
        let sink = Arc::clone(&log);
        let reader = std::thread::spawn(move || {
            for line in BufReader::new(stderr).lines() {
                let Ok(line) = line else { break };
                sink.lock().expect("log lock").push(line);
            }
        });
        let mut watcher = Watcher {
            child,
            log,
            reader: Some(reader),
        };
        watcher.wait_for("the watcher to start watching", PATIENCE, |w| {
            w.count(&[r#""message":"watching""#]) == 1
        });
        watcher
    }

    fn pid(&self) -> String {
        self.child.id().to_string()
    }

    fn log_text(&self) -> String {
        self.log.lock().expect("log lock").join("\n")
    }

    /// Log lines that contain every one of `needles`.
    fn count(&self, needles: &[&str]) -> usize {
        self.log
            .lock()
            .expect("log lock")
            .iter()
            .filter(|line| needles.iter().all(|n| line.contains(n)))
            .count()
    }

    /// Runs of `file` logged so far (the one line per input with its outcome).
    fn runs(&self, file: &str) -> usize {
        self.count(&[INPUT_DONE, &file_field(file)])
    }

    /// Runs of `file` logged so far that ended with `outcome`.
    fn runs_with(&self, file: &str, outcome: &str) -> usize {
        let outcome = format!(r#""outcome":"{outcome}""#);
        self.count(&[INPUT_DONE, &file_field(file), &outcome])
    }

    /// Log lines that mention `text` anywhere.
    fn mentions(&self, text: &str) -> usize {
        self.count(&[text])
    }

    /// Whether the process is still running.
    fn running(&mut self) -> bool {
        matches!(self.child.try_wait(), Ok(None))
    }

    /// Polls `condition` while the watcher runs; panics (with the log) if it exits or time
    /// runs out.
    fn wait_for(&mut self, what: &str, limit: Duration, condition: impl Fn(&Watcher) -> bool) {
        let start = Instant::now();
        loop {
            if condition(self) {
                return;
            }
            if let Ok(Some(status)) = self.child.try_wait() {
                self.join_reader();
                panic!(
                    "the watcher exited ({status}) while waiting for {what}\nlog:\n{}",
                    self.log_text()
                );
            }
            assert!(
                start.elapsed() < limit,
                "timed out after {limit:?} waiting for {what}\nlog:\n{}",
                self.log_text()
            );
            std::thread::sleep(POLL);
        }
    }

    /// Sends SIGTERM.
    fn sigterm(&self) {
        let status = std::process::Command::new("kill")
            .args(["-TERM", &self.pid()])
            .status()
            .expect("kill runs");
        assert!(status.success(), "kill -TERM failed");
    }

    /// Waits for the process to exit; its status and how long that took.
    fn wait_exit(&mut self, limit: Duration) -> (ExitStatus, Duration) {
        let start = Instant::now();
        loop {
            if let Ok(Some(status)) = self.child.try_wait() {
                self.join_reader();
                return (status, start.elapsed());
            }
            assert!(
                start.elapsed() < limit,
                "the watcher did not exit within {limit:?}\nlog:\n{}",
                self.log_text()
            );
            std::thread::sleep(POLL);
        }
    }

    /// SIGTERM, then the exit, which must be code 0.
    fn stop(&mut self) {
        self.sigterm();
        let (status, _) = self.wait_exit(PATIENCE);
        assert_eq!(status.code(), Some(0), "log:\n{}", self.log_text());
    }

    /// SIGKILL, and the process reaped (so its id no longer names a live process).
    fn kill_hard(&mut self) {
        self.child.kill().expect("SIGKILL sent");
        self.child.wait().expect("reaped");
        self.join_reader();
    }

    /// After the process has exited the pipe closes, so the whole log is in.
    fn join_reader(&mut self) {
        if let Some(reader) = self.reader.take() {
            let _ = reader.join();
        }
    }
}

impl Drop for Watcher {
    fn drop(&mut self) {
        // A failed test must not leave a watcher behind.
        if matches!(self.child.try_wait(), Ok(None)) {
            let _ = self.child.kill();
            let _ = self.child.wait();
        }
        self.join_reader();
    }
}

fn file_field(file: &str) -> String {
    format!(r#""file":"{file}""#)
}

/// Writes `dampfront new KIND <dir>/KIND.xlsx` and returns its path.
fn template(dir: &Path, kind: &str) -> PathBuf {
    let name = format!("{kind}.xlsx");
    let out = run_in(dir, &["new", kind, &name]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    dir.join(name)
}

/// The four example workbooks in `dir`.
fn templates(dir: &Path) -> Vec<PathBuf> {
    ["food", "wood", "clay", "blank"]
        .iter()
        .map(|kind| template(dir, kind))
        .collect()
}

/// File names in `dir`, sorted.
fn names(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = fs::read_dir(dir)
        .expect("listable")
        .flatten()
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    names
}

/// Locks and temporary files: what must never be left in a served folder.
fn leftovers(dir: &Path) -> Vec<String> {
    names(dir)
        .into_iter()
        .filter(|n| n.ends_with(".lock") || n.ends_with(".tmp") || n.starts_with('.'))
        .collect()
}

fn mtime(path: &Path) -> SystemTime {
    fs::metadata(path)
        .and_then(|m| m.modified())
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn text(d: &Data) -> String {
    match d {
        Data::String(s) => s.clone(),
        Data::Empty => String::new(),
        other => other.to_string(),
    }
}

/// Column B of the row whose column A is `key` on the result's `summary` sheet.
fn summary_value(result: &Path, key: &str) -> String {
    let mut wb = open_workbook_auto(result).expect("the result opens");
    let range = wb.worksheet_range("summary").expect("a summary sheet");
    range
        .rows()
        .find(|row| row.first().is_some_and(|c| text(c) == key))
        .and_then(|row| row.get(1))
        .map(text)
        .unwrap_or_else(|| panic!("{}: no {key} on the summary sheet", result.display()))
}

/// All cell texts of the errors workbook's `problems` sheet, joined.
fn problems_text(errors: &Path) -> String {
    let mut wb = open_workbook_auto(errors).expect("the errors workbook opens");
    let range = wb.worksheet_range("problems").expect("a problems sheet");
    range
        .rows()
        .flat_map(|row| row.iter().map(text))
        .collect::<Vec<_>>()
        .join(" | ")
}

/// Copies `from` to `dir/name` and returns the new path.
fn drop_in(from: &Path, dir: &Path, name: &str) -> PathBuf {
    let to = dir.join(name);
    fs::copy(from, &to).expect("copied");
    to
}

/// Bytes that are no spreadsheet (xorshift, fixed seed).
fn noise(len: usize) -> Vec<u8> {
    let mut x: u64 = 0x9e37_79b9_7f4a_7c15;
    (0..len)
        .map(|_| {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            (x >> 24) as u8
        })
        .collect()
}

/// A case of a few seconds (see `books::slow_case`).
fn slow_xlsx(path: &Path) {
    books::write_xlsx(path, &books::slow_case("slow slab", 20000.0, 1e-10));
}

/// A case that takes far longer than any test waits (about half a minute on one idle core).
fn very_slow_xlsx(path: &Path) {
    books::write_xlsx(path, &books::very_slow_case("very slow slab"));
}

#[test]
fn a_copied_workbook_is_answered_by_its_result_rerun_when_saved_and_not_after_a_restart() {
    let src = scratch();
    let food = template(src.path(), "food");
    let wood = template(src.path(), "wood");
    let folder = scratch();
    let dir = folder.path();
    let settle = Duration::from_millis(1000);
    let args = ["--settle-ms", "1000", "--jobs", "1"];
    let mut watcher = Watcher::start(dir, &args);

    let input = drop_in(&food, dir, "tray.xlsx");
    let result = dir.join("tray.result.xlsx");
    let took = wait_until(
        "the first result",
        PATIENCE,
        || result.exists(),
        || watcher.log_text(),
    );
    // operations.md: the result follows once the file has been still for the settle time.
    assert!(
        took <= settle + Duration::from_secs(5),
        "the result took {took:?}\n{}",
        watcher.log_text()
    );
    watcher.wait_for("the first run's log line", PATIENCE, |w| {
        w.runs("tray.xlsx") == 1
    });
    assert_eq!(watcher.runs_with("tray.xlsx", "solved"), 1);
    assert_eq!(summary_value(&result, "input_sha256"), sha256(&input));

    // Saving a changed input (here: another case under the same name) runs it again.
    fs::copy(&wood, &input).expect("saved over");
    let saved = mtime(&input);
    watcher.wait_for("the re-run after saving", PATIENCE, |w| {
        w.runs("tray.xlsx") == 2
    });
    assert!(mtime(&result) > saved, "the result is older than the input");
    assert_eq!(summary_value(&result, "input_sha256"), sha256(&wood));
    watcher.stop();

    // After a restart the unchanged folder is not run again. The sentinel dropped after the
    // start is queued behind anything the start-up scan found, so once it has run, a re-run
    // of tray.xlsx would have shown.
    let before = mtime(&result);
    let mut restarted = Watcher::start(dir, &args);
    drop_in(&food, dir, "sentinel.xlsx");
    restarted.wait_for("the sentinel's run", PATIENCE, |w| {
        w.runs("sentinel.xlsx") == 1
    });
    assert_eq!(restarted.runs("tray.xlsx"), 0, "{}", restarted.log_text());
    assert_eq!(mtime(&result), before, "the result was written again");
    assert_eq!(
        restarted.mentions(r#""inputs":1"#),
        1,
        "{}",
        restarted.log_text()
    );
    restarted.stop();
    assert_eq!(restarted.runs("tray.xlsx"), 0, "{}", restarted.log_text());
    assert!(leftovers(dir).is_empty(), "{:?}", leftovers(dir));
    keep_outputs(dir, "watch_cli_copied");
}

#[test]
fn a_workbook_written_slowly_in_chunks_is_read_once_and_complete() {
    let src = scratch();
    let bytes = fs::read(template(src.path(), "wood")).expect("template");
    let folder = scratch();
    let dir = folder.path();
    let mut watcher = Watcher::start(dir, &["--settle-ms", "1000", "--jobs", "1"]);
    let input = dir.join("board.xlsx");
    let errors = dir.join("board.errors.xlsx");
    let result = dir.join("board.result.xlsx");
    let mut saw_errors = false;

    let mut file = fs::File::create(&input).expect("created");
    for piece in bytes.chunks(bytes.len().div_ceil(10)) {
        file.write_all(piece).expect("written");
        file.flush().expect("flushed");
        // Paces the writer (ten pieces over about 3 s); it checks nothing by itself.
        let next = Instant::now() + Duration::from_millis(330);
        while Instant::now() < next {
            saw_errors |= errors.exists();
            std::thread::sleep(POLL);
        }
    }
    drop(file);
    wait_until(
        "the result of the slow copy",
        PATIENCE,
        || {
            saw_errors |= errors.exists();
            result.exists()
        },
        || watcher.log_text(),
    );
    drop_in(&input, dir, "sentinel.xlsx");
    watcher.wait_for("the sentinel's run", PATIENCE, |w| {
        w.runs("sentinel.xlsx") == 1
    });
    saw_errors |= errors.exists();
    watcher.stop();

    assert!(!saw_errors, "an errors workbook appeared for the slow copy");
    assert_eq!(watcher.runs("board.xlsx"), 1, "{}", watcher.log_text());
    assert_eq!(watcher.runs_with("board.xlsx", "solved"), 1);
    // The run saw the whole file: the result names the complete input's hash.
    assert_eq!(summary_value(&result, "input_sha256"), sha256(&input));
    assert!(
        fs::read(&input).expect("input") == bytes,
        "the input was modified"
    );
    keep_outputs(dir, "watch_cli_slow_copy");
}

#[test]
fn lock_hidden_partial_and_output_files_are_ignored() {
    let src = scratch();
    let food = template(src.path(), "food");
    // Real outputs of the program, with no input beside them in the served folder.
    drop_in(&food, src.path(), "orphan.xlsx");
    let out = run_in(src.path(), &["solve", "orphan.xlsx"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    fs::write(src.path().join("broken.csv"), noise(64)).expect("written");
    let out = run_in(src.path(), &["solve", "broken.csv"]);
    assert_eq!(out.status.code(), Some(1), "{}", output_text(&out));

    let folder = scratch();
    let dir = folder.path();
    // Each decoy other than the outputs holds a runnable case, so running it would show.
    let before_start = ["~$tray.xlsx", ".tray.xlsx", "tray.xlsx.tmp"];
    for name in before_start {
        drop_in(&food, dir, name);
    }
    drop_in(
        &src.path().join("orphan.result.xlsx"),
        dir,
        "orphan.result.xlsx",
    );
    let mut watcher = Watcher::start(dir, &["--settle-ms", "200"]);
    assert_eq!(
        watcher.mentions(r#""inputs":0"#),
        1,
        "{}",
        watcher.log_text()
    );
    let after_start = [
        "~$board.xlsx",
        ".board.xlsm",
        "board.xlsx.part",
        "board.xlsx.crdownload",
        "board.ods.tmp",
    ];
    for name in after_start {
        drop_in(&food, dir, name);
    }
    drop_in(
        &src.path().join("broken.errors.xlsx"),
        dir,
        "broken.errors.xlsx",
    );
    // Changing a decoy raises events for it too.
    drop_in(&food, dir, "~$tray.xlsx");
    drop_in(&food, dir, "sentinel.xlsx");
    watcher.wait_for("the sentinel's run", PATIENCE, |w| {
        w.runs("sentinel.xlsx") == 1
    });
    watcher.stop();

    let mut expected: Vec<String> = before_start
        .iter()
        .chain(after_start.iter())
        .chain(&[
            "orphan.result.xlsx",
            "broken.errors.xlsx",
            "sentinel.xlsx",
            "sentinel.result.xlsx",
        ])
        .map(|s| s.to_string())
        .collect();
    expected.sort();
    assert_eq!(names(dir), expected, "{}", watcher.log_text());
    for name in before_start
        .iter()
        .chain(after_start.iter())
        .chain(&["orphan.result.xlsx", "broken.errors.xlsx"])
    {
        assert_eq!(watcher.mentions(name), 0, "{name}: {}", watcher.log_text());
    }
    assert_eq!(watcher.count(&[INPUT_DONE]), 1, "{}", watcher.log_text());
    keep_outputs(dir, "watch_cli_ignored");
}

#[test]
fn a_corrupt_workbook_gets_its_errors_workbook_after_the_retries_and_the_watcher_goes_on() {
    let src = scratch();
    let food = template(src.path(), "food");
    let folder = scratch();
    let dir = folder.path();
    // Debug level for dampfront shows each retry.
    let mut watcher = Watcher::start_with_log(dir, &["--settle-ms", "200"], "info,dampfront=debug");
    let bad = dir.join("bad.xlsx");
    fs::write(&bad, noise(4096)).expect("written");
    let written = Instant::now();
    let errors = dir.join("bad.errors.xlsx");
    watcher.wait_for("the errors workbook", PATIENCE, |_| errors.exists());
    let waited = written.elapsed();
    // The back-off starts at half the settle time and doubles over five retries before the
    // final try (src/watch/settle.rs): 0.1 + 0.2 + 0.4 + 0.8 + 1.6 + 3.2 = 6.3 s at least.
    assert!(
        waited >= Duration::from_millis(6300),
        "reported after {waited:?}, before the retries were done"
    );
    watcher.wait_for("the corrupt file's log line", PATIENCE, |w| {
        w.runs("bad.xlsx") == 1
    });
    assert_eq!(watcher.runs_with("bad.xlsx", "problems"), 1);
    assert_eq!(
        watcher.count(&["not ready yet", &file_field("bad.xlsx")]),
        6,
        "the first try and five retries answer not ready\n{}",
        watcher.log_text()
    );
    let problems = problems_text(&errors);
    assert!(
        problems.contains("not a readable workbook"),
        "problems: {problems}"
    );
    assert!(!dir.join("bad.result.xlsx").exists());
    assert!(
        watcher.running(),
        "the watcher stopped after a corrupt file"
    );

    drop_in(&food, dir, "good.xlsx");
    watcher.wait_for("the good file's run", PATIENCE, |w| {
        w.runs("good.xlsx") == 1
    });
    assert_eq!(watcher.runs_with("good.xlsx", "solved"), 1);
    assert!(dir.join("good.result.xlsx").exists());
    watcher.stop();
    assert_eq!(watcher.runs("bad.xlsx"), 1, "{}", watcher.log_text());
    assert!(
        fs::read(&bad).expect("input") == noise(4096),
        "the input was modified"
    );
    keep_outputs(dir, "watch_cli_corrupt");
}

#[test]
fn two_watchers_on_one_folder_run_each_of_20_inputs_exactly_once() {
    let src = scratch();
    let kinds = templates(src.path());
    let folder = scratch();
    let dir = folder.path();
    let args = ["--settle-ms", "200", "--jobs", "2"];
    let mut first = Watcher::start(dir, &args);
    let mut second = Watcher::start(dir, &args);
    let files: Vec<String> = (0..20).map(|i| format!("case-{i:02}.xlsx")).collect();
    for (i, name) in files.iter().enumerate() {
        drop_in(&kinds[i % kinds.len()], dir, name);
    }
    wait_until(
        "all 20 results",
        PATIENCE,
        || {
            files
                .iter()
                .all(|f| dir.join(f.replace(".xlsx", ".result.xlsx")).exists())
        },
        || format!("{}\n{}", first.log_text(), second.log_text()),
    );
    let logged = || {
        files
            .iter()
            .map(|f| first.runs(f) + second.runs(f))
            .sum::<usize>()
    };
    wait_until(
        "20 log lines",
        PATIENCE,
        || logged() >= 20,
        || format!("{}\n{}", first.log_text(), second.log_text()),
    );
    // Stopping lets any run still in progress finish and log, so the counts are final.
    first.stop();
    second.stop();
    for f in &files {
        assert_eq!(
            first.runs(f) + second.runs(f),
            1,
            "{f}\nfirst:\n{}\nsecond:\n{}",
            first.log_text(),
            second.log_text()
        );
    }
    assert!(leftovers(dir).is_empty(), "{:?}", leftovers(dir));
    assert_eq!(names(dir).len(), 40, "{:?}", names(dir));
    keep_outputs(dir, "watch_cli_two_watchers");
}

#[test]
fn sigkill_mid_run_leaves_only_a_stale_lock_that_the_next_watcher_takes_over() {
    let folder = scratch();
    let dir = folder.path();
    let input = dir.join("slow.xlsx");
    slow_xlsx(&input);
    let lock = dir.join("slow.lock");
    let mut killed = Watcher::start(dir, &["--settle-ms", "200", "--jobs", "1"]);
    // The lock is created and then filled in: wait until its owner line is there.
    killed.wait_for("the run's lock", PATIENCE, |_| {
        fs::read_to_string(&lock).is_ok_and(|held| held.contains("pid="))
    });
    let pid = killed.pid();
    killed.kill_hard();

    assert_eq!(names(dir), ["slow.lock", "slow.xlsx"]);
    let held = fs::read_to_string(&lock).expect("lock readable");
    assert!(
        held.lines().any(|l| l == format!("pid={pid}")),
        "lock: {held}"
    );
    assert_eq!(killed.runs("slow.xlsx"), 0);

    // A small stale time, and frequent rescans so the lock is looked at again once stale.
    let mut next = Watcher::start(
        dir,
        &[
            "--settle-ms",
            "200",
            "--jobs",
            "1",
            "--stale-lock-secs",
            "1",
            "--rescan-secs",
            "1",
        ],
    );
    next.wait_for("the takeover's run", PATIENCE, |w| w.runs("slow.xlsx") == 1);
    assert_eq!(
        next.mentions("took over a stale lock"),
        1,
        "{}",
        next.log_text()
    );
    assert_eq!(
        next.runs_with("slow.xlsx", "solved"),
        1,
        "{}",
        next.log_text()
    );
    next.stop();
    assert_eq!(names(dir), ["slow.result.xlsx", "slow.xlsx"]);
    assert_eq!(
        summary_value(&dir.join("slow.result.xlsx"), "input_sha256"),
        sha256(&input)
    );
    keep_outputs(dir, "watch_cli_sigkill");
}

#[test]
fn sigterm_lets_a_running_case_finish_within_the_grace_time_and_exits_0() {
    let folder = scratch();
    let dir = folder.path();
    slow_xlsx(&dir.join("slow.xlsx"));
    let lock = dir.join("slow.lock");
    let grace = Duration::from_secs(60);
    let mut watcher = Watcher::start(dir, &["--settle-ms", "200", "--grace-secs", "60"]);
    watcher.wait_for("the run's lock", PATIENCE, |_| lock.exists());
    watcher.sigterm();
    let (status, took) = watcher.wait_exit(grace + PATIENCE);
    assert_eq!(status.code(), Some(0), "{}", watcher.log_text());
    assert!(took < grace, "exit took {took:?}");
    assert_eq!(watcher.runs("slow.xlsx"), 1, "{}", watcher.log_text());
    assert!(dir.join("slow.result.xlsx").exists());
    assert_eq!(names(dir), ["slow.result.xlsx", "slow.xlsx"]);
    keep_outputs(dir, "watch_cli_sigterm_finish");
}

#[test]
fn sigterm_abandons_a_case_that_outlasts_the_grace_time_and_exits_0_leaving_nothing() {
    let folder = scratch();
    let dir = folder.path();
    very_slow_xlsx(&dir.join("huge.xlsx"));
    let lock = dir.join("huge.lock");
    let mut watcher = Watcher::start(dir, &["--settle-ms", "200", "--grace-secs", "1"]);
    watcher.wait_for("the run's lock", PATIENCE, |_| lock.exists());
    watcher.sigterm();
    let (status, took) = watcher.wait_exit(PATIENCE);
    assert_eq!(status.code(), Some(0), "{}", watcher.log_text());
    // The grace time of 1 s, then a short wait for the solver to see the cancel flag
    // (CANCEL_WAIT, 2 s); the case itself would need about half a minute.
    assert!(
        took < Duration::from_secs(15),
        "exit took {took:?}\n{}",
        watcher.log_text()
    );
    assert_eq!(names(dir), ["huge.xlsx"], "{}", watcher.log_text());
    assert_eq!(
        watcher.runs_with("huge.xlsx", "failed"),
        1,
        "{}",
        watcher.log_text()
    );
}

/// One row of batch's closing table.
#[derive(Debug, Clone, PartialEq)]
struct TableRow {
    file: String,
    status: String,
    drying_time_h: String,
    seconds: f64,
}

/// The rows of batch's closing table on stdout (between the header and the counts line).
fn table(stdout: &str) -> Vec<TableRow> {
    let mut lines = stdout.lines();
    let Some(header) = lines.by_ref().find(|l| l.starts_with("file")) else {
        return Vec::new();
    };
    let columns: Vec<&str> = header.split("  ").filter(|c| !c.is_empty()).collect();
    let columns: Vec<&str> = columns.iter().map(|c| c.trim()).collect();
    assert_eq!(columns, ["file", "status", "drying time h", "seconds"]);
    lines
        .take_while(|l| !l.contains(" ran"))
        .map(|l| {
            let words: Vec<&str> = l.split_whitespace().collect();
            assert!(words.len() >= 4, "table row: {l}");
            let n = words.len();
            TableRow {
                file: words[0].to_string(),
                status: words[1..n - 2].join(" "),
                drying_time_h: words[n - 2].to_string(),
                seconds: words[n - 1]
                    .parse()
                    .unwrap_or_else(|_| panic!("seconds in: {l}")),
            }
        })
        .collect()
}

/// `dampfront --log-json batch DIR ARGS...` with a short settle, as a started process.
fn start_batch(dir: &Path, args: &[&str]) -> Child {
    bin()
        .arg("--log-json")
        .arg("batch")
        .arg(dir)
        .args(["--settle-ms", "100"])
        .args(args)
        .env("RUST_LOG", "info")
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("batch starts")
}

#[test]
fn batch_shards_one_two_and_three_of_three_together_run_every_input_once() {
    let src = scratch();
    let kinds = templates(src.path());
    let folder = scratch();
    let dir = folder.path();
    let files: Vec<String> = (0..10).map(|i| format!("case-{i:02}.xlsx")).collect();
    for (i, name) in files.iter().enumerate() {
        drop_in(&kinds[i % kinds.len()], dir, name);
    }
    // The three shards at once, as an array job would start them.
    let shards: Vec<Child> = (1..=3)
        .map(|i| start_batch(dir, &["--jobs", "1", "--shard", &format!("{i}/3")]))
        .collect();
    let mut covered = Vec::new();
    let mut logs = String::new();
    for (i, child) in (1..=3).zip(shards) {
        let out = child.wait_with_output().expect("batch ends");
        assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
        let rows: Vec<String> = table(&String::from_utf8_lossy(&out.stdout))
            .into_iter()
            .map(|r| r.file)
            .collect();
        // Sorted position modulo 3 equals I - 1 (operations.md).
        let expected: Vec<String> = files
            .iter()
            .enumerate()
            .filter(|(n, _)| n % 3 == i - 1)
            .map(|(_, f)| f.clone())
            .collect();
        assert_eq!(rows, expected, "shard {i}/3\n{}", output_text(&out));
        covered.extend(rows);
        logs.push_str(&String::from_utf8_lossy(&out.stderr));
    }
    covered.sort();
    assert_eq!(covered, files);
    for f in &files {
        let runs = logs
            .lines()
            .filter(|l| l.contains(INPUT_DONE) && l.contains(&file_field(f)))
            .count();
        assert_eq!(runs, 1, "{f}\n{logs}");
        assert!(dir.join(f.replace(".xlsx", ".result.xlsx")).exists(), "{f}");
    }
    assert!(leftovers(dir).is_empty(), "{:?}", leftovers(dir));
    keep_outputs(dir, "watch_cli_shards");
}

#[test]
fn batch_exits_1_when_an_input_has_problems_and_0_otherwise_with_a_closing_table() {
    let folder = scratch();
    let dir = folder.path();
    for kind in ["food", "wood", "blank"] {
        template(dir, kind);
    }
    let out = start_batch(dir, &[])
        .wait_with_output()
        .expect("batch ends");
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    let rows = table(&String::from_utf8_lossy(&out.stdout));
    let files: Vec<&str> = rows.iter().map(|r| r.file.as_str()).collect();
    assert_eq!(files, ["blank.xlsx", "food.xlsx", "wood.xlsx"]);
    for row in &rows {
        assert_eq!(row.status, "solved", "{row:?}");
        assert!(row.seconds >= 0.0, "{row:?}");
        let result = dir.join(row.file.replace(".xlsx", ".result.xlsx"));
        // The table shows the summary's drying time to two decimals ("-" when there is no
        // target to reach, as in the blank example).
        let summary = summary_value(&result, "drying_time_h");
        let shown = summary
            .parse::<f64>()
            .map_or_else(|_| "-".to_string(), |h| format!("{h:.2}"));
        assert_eq!(row.drying_time_h, shown, "{row:?}");
    }
    assert_ne!(
        rows[1].drying_time_h, "-",
        "the food example reaches its target"
    );

    // A layer of negative thickness: a problem the parser reports at its cell.
    let mut broken = books::series_case("broken slab");
    broken[1].1[1][2] = V::N(-12.0);
    books::write_csv(&dir.join("broken.csv"), &broken);
    let out = start_batch(dir, &[])
        .wait_with_output()
        .expect("batch ends");
    assert_eq!(out.status.code(), Some(1), "{}", output_text(&out));
    let stdout = String::from_utf8_lossy(&out.stdout);
    let rows = table(&stdout);
    assert_eq!(rows.len(), 1, "{stdout}");
    assert_eq!(rows[0].file, "broken.csv");
    assert_eq!(rows[0].status, "problems");
    assert_eq!(rows[0].drying_time_h, "-");
    assert!(stdout.contains("3 already up to date"), "{stdout}");
    let errors = dir.join("broken.errors.xlsx");
    assert!(problems_text(&errors).contains("thickness_mm"));

    // Forced, every input runs again, and the problem still sets the exit code.
    let out = start_batch(dir, &["--force"])
        .wait_with_output()
        .expect("batch ends");
    assert_eq!(out.status.code(), Some(1), "{}", output_text(&out));
    assert_eq!(table(&String::from_utf8_lossy(&out.stdout)).len(), 4);
    assert!(leftovers(dir).is_empty(), "{:?}", leftovers(dir));
    keep_outputs(dir, "watch_cli_batch_exit");
}

#[test]
fn batch_exits_2_when_interrupted_even_with_one_input_and_when_inputs_are_locked() {
    // Before: SIGINT of a one-input pass exited 1 (its cancelled run counted as a problem),
    // and inputs skipped for another runner's lock gave 0.
    let folder = scratch();
    let dir = folder.path();
    very_slow_xlsx(&dir.join("slow.xlsx"));
    let child = start_batch(dir, &[]);
    let lock = dir.join("slow.lock");
    let started = Instant::now();
    while !lock.exists() && started.elapsed() < PATIENCE {
        std::thread::sleep(POLL);
    }
    assert!(lock.exists(), "the run never started");
    let status = std::process::Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(status.success());
    let out = child.wait_with_output().expect("batch ends");
    let shown = output_text(&out);
    assert_eq!(out.status.code(), Some(2), "{shown}");
    assert!(shown.contains("1 input(s) were not run"), "{shown}");
    assert!(leftovers(dir).is_empty(), "{:?}", leftovers(dir));

    // A fresh lock of a live process (this test) on this host: the input is not run.
    let host = fs::read_to_string("/proc/sys/kernel/hostname").unwrap();
    let now = SystemTime::now()
        .duration_since(SystemTime::UNIX_EPOCH)
        .unwrap()
        .as_secs();
    fs::write(
        &lock,
        format!(
            "host={}\npid={}\nstarted={now}\ntoken=other\n",
            host.trim(),
            std::process::id()
        ),
    )
    .unwrap();
    let out = start_batch(dir, &[])
        .wait_with_output()
        .expect("batch ends");
    let shown = output_text(&out);
    assert_eq!(out.status.code(), Some(2), "{shown}");
    assert!(shown.contains("locked by another runner"), "{shown}");
    assert!(!dir.join("slow.result.xlsx").exists());
}

#[test]
fn out_of_range_times_are_usage_errors_not_panics() {
    // Before: --grace-secs 1.8e19 panicked, --poll 0 kept a core busy.
    let folder = scratch();
    let dir = folder.path().to_str().unwrap();
    for args in [
        vec!["watch", dir, "--grace-secs", "1.8e19"],
        vec!["watch", dir, "--poll", "0"],
        vec!["batch", dir, "--stale-lock-secs", "1e300"],
        vec!["solve", "x.csv", "--case-seconds", "-1"],
    ] {
        let out = run_in(folder.path(), &args);
        let shown = output_text(&out);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {shown}");
        assert!(!shown.contains("panicked"), "{args:?}: {shown}");
        assert!(shown.contains("--"), "{args:?}: {shown}");
    }
}
