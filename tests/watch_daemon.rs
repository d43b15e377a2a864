//! The daemon: stale inputs on start and on change, files still being written, the `NotReady`
//! back-off, several watchers on one folder, and shutdown that leaves no locks.

#[path = "watch_support.rs"]
mod support;

use std::collections::HashMap;
use std::fs;
use std::io::Write;
use std::sync::Arc;
use std::time::Duration;

use dampfront::watch::{Attempt, Status, WatchError, WatchOptions, watch_until};
use support::{Behaviour, Daemon, Fake, Scratch, eventually, quick_watch};

#[test]
fn stale_inputs_run_on_start_and_up_to_date_ones_do_not() {
    let dir = Scratch::new();
    dir.write("stale.csv", "x");
    dir.write("done.csv", "x");
    dir.write("done.result.xlsx", "r");
    dir.set_mtime("done.csv", -100);
    let fake = Fake::solving();
    let daemon = Daemon::start(quick_watch(dir.path()), fake.clone());
    assert!(eventually(|| dir.file("stale.result.xlsx").exists()));
    daemon.stop().unwrap();
    assert_eq!(fake.runs_of("stale.csv"), 1);
    assert_eq!(fake.runs_of("done.csv"), 0);
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());
}

#[test]
fn a_new_input_runs_and_an_edit_runs_it_again() {
    let dir = Scratch::new();
    let fake = Fake::solving();
    let daemon = Daemon::start(quick_watch(dir.path()), fake.clone());
    dir.write("oak.csv", "first");
    assert!(eventually(|| fs::read_to_string(
        dir.file("oak.result.xlsx")
    )
    .is_ok_and(|r| r == "first")));
    dir.write("oak.csv", "second");
    assert!(eventually(|| fs::read_to_string(
        dir.file("oak.result.xlsx")
    )
    .is_ok_and(|r| r == "second")));
    daemon.stop().unwrap();
    assert_eq!(fake.runs_of("oak.csv"), 2);
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());
}

#[test]
fn outputs_and_other_files_written_into_the_folder_run_nothing() {
    let dir = Scratch::new();
    let fake = Fake::solving();
    let daemon = Daemon::start(quick_watch(dir.path()), fake.clone());
    dir.write("notes.txt", "x");
    dir.write("~$owner.xlsx", "x");
    dir.write("half.xlsx.part", "x");
    dir.write("other.result.xlsx", "x");
    // A real input last, so there is something to wait for: once it has run, the others
    // had their events long before.
    dir.write("real.csv", "x");
    assert!(eventually(|| dir.file("real.result.xlsx").exists()));
    daemon.stop().unwrap();
    let files: Vec<String> = fake.calls().into_iter().map(|c| c.file).collect();
    assert_eq!(files, ["real.csv"]);
}

#[test]
fn a_file_written_slowly_in_chunks_is_read_once_after_it_is_complete() {
    let dir = Scratch::new();
    let fake = Fake::new(Behaviour {
        complete_suffix: Some("END\n"),
        ..Behaviour::default()
    });
    // Settle well above the gap between chunks, so that only a stalled writer (not the
    // watcher) could make the file look finished early.
    let opts = WatchOptions {
        settle: Duration::from_millis(400),
        ..quick_watch(dir.path())
    };
    let daemon = Daemon::start(opts, fake.clone());
    let path = dir.file("slow.csv");
    let mut file = fs::File::create(&path).unwrap();
    for i in 0..60 {
        writeln!(file, "row {i},0.25,0.75").unwrap();
        file.flush().unwrap();
        std::thread::sleep(Duration::from_millis(50));
    }
    file.write_all(b"END\n").unwrap();
    drop(file);
    assert!(eventually(|| dir.file("slow.result.xlsx").exists()));
    // Give a wrongly repeated run the chance to show up.
    std::thread::sleep(Duration::from_millis(600));
    daemon.stop().unwrap();
    let calls = fake.calls();
    assert!(
        calls.iter().all(|c| !c.incomplete),
        "read before complete: {calls:?}"
    );
    assert_eq!(fake.runs_of("slow.csv"), 1);
    assert!(
        fs::read_to_string(dir.file("slow.result.xlsx"))
            .unwrap()
            .ends_with("END\n")
    );
}

#[test]
fn not_ready_is_retried_with_back_off_then_given_a_final_try() {
    let dir = Scratch::new();
    let fake = Fake::new(Behaviour {
        not_ready_calls: u32::MAX,
        ..Behaviour::default()
    });
    let daemon = Daemon::start(quick_watch(dir.path()), fake.clone());
    dir.write("broken.xlsx", "not a workbook");
    assert!(eventually(|| dir.file("broken.errors.xlsx").exists()));
    daemon.stop().unwrap();
    let mut expected = vec![Attempt::First];
    expected.extend((1..=5).map(Attempt::Retry));
    expected.push(Attempt::Final);
    assert_eq!(fake.attempts_of("broken.xlsx"), expected);
    assert_eq!(
        fake.calls().last().map(|c| c.status),
        Some(Status::Problems)
    );
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());
}

#[test]
fn a_file_readable_on_a_retry_is_solved() {
    let dir = Scratch::new();
    let fake = Fake::new(Behaviour {
        not_ready_calls: 1,
        ..Behaviour::default()
    });
    let daemon = Daemon::start(quick_watch(dir.path()), fake.clone());
    dir.write("late.csv", "x");
    assert!(eventually(|| dir.file("late.result.xlsx").exists()));
    daemon.stop().unwrap();
    assert_eq!(
        fake.attempts_of("late.csv"),
        [Attempt::First, Attempt::Retry(1)]
    );
}

#[test]
fn two_watchers_on_one_folder_run_each_input_exactly_once_and_leave_no_lock() {
    let dir = Scratch::new();
    for i in 0..10 {
        dir.write(&format!("before-{i:02}.csv"), "x");
    }
    let fake = Fake::new(Behaviour {
        // Long enough that the two watchers overlap on the same files.
        work: Duration::from_millis(50),
        ..Behaviour::default()
    });
    let opts = WatchOptions {
        rescan: Duration::from_millis(700),
        ..quick_watch(dir.path())
    };
    let first = Daemon::start(opts.clone(), fake.clone());
    let second = Daemon::start(opts, fake.clone());
    for i in 0..10 {
        dir.write(&format!("after-{i:02}.csv"), "x");
    }
    let all_done = || {
        dir.names()
            .iter()
            .filter(|n| n.ends_with(".result.xlsx"))
            .count()
            == 20
    };
    assert!(eventually(all_done));
    // A rescan or two more, in which a second run would show up.
    std::thread::sleep(Duration::from_millis(1500));
    first.stop().unwrap();
    second.stop().unwrap();
    let mut counts: HashMap<String, usize> = HashMap::new();
    for call in fake.calls() {
        *counts.entry(call.file).or_default() += 1;
    }
    assert_eq!(counts.len(), 20);
    assert!(counts.values().all(|&n| n == 1), "{counts:?}");
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());
}

#[test]
fn shutdown_lets_a_running_case_finish_within_the_grace_period() {
    let dir = Scratch::new();
    let fake = Fake::new(Behaviour {
        work: Duration::from_millis(1500),
        ..Behaviour::default()
    });
    let daemon = Daemon::start(quick_watch(dir.path()), fake.clone());
    dir.write("long.csv", "x");
    assert!(eventually(|| fake.busy()));
    daemon.stop().unwrap();
    assert_eq!(fake.calls().last().map(|c| c.status), Some(Status::Solved));
    assert!(dir.file("long.result.xlsx").exists());
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());
}

#[test]
fn shutdown_cancels_a_case_that_outlasts_the_grace_period_and_leaves_no_lock() {
    let dir = Scratch::new();
    let fake = Fake::new(Behaviour {
        work: Duration::from_secs(600),
        ..Behaviour::default()
    });
    let opts = WatchOptions {
        grace: Duration::from_millis(200),
        ..quick_watch(dir.path())
    };
    let daemon = Daemon::start(opts, fake.clone());
    dir.write("endless.csv", "x");
    assert!(eventually(|| fake.busy()));
    daemon.stop().unwrap();
    assert_eq!(fake.calls().last().map(|c| c.status), Some(Status::Failed));
    assert!(!dir.file("endless.result.xlsx").exists());
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());
}

#[test]
fn shutdown_abandons_a_case_that_ignores_cancel_and_still_removes_its_lock() {
    let dir = Scratch::new();
    let fake = Fake::new(Behaviour {
        work: Duration::from_secs(600),
        ignore_cancel: true,
        ..Behaviour::default()
    });
    let opts = WatchOptions {
        grace: Duration::from_millis(200),
        ..quick_watch(dir.path())
    };
    let daemon = Daemon::start(opts, fake.clone());
    dir.write("stubborn.csv", "x");
    assert!(eventually(|| fake.busy()));
    assert!(dir.file("stubborn.lock").exists());
    daemon.stop().unwrap();
    assert!(
        fake.busy(),
        "the processor was expected to be still running"
    );
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());
}

#[test]
fn shutdown_while_idle_returns_promptly() {
    let dir = Scratch::new();
    let daemon = Daemon::start(quick_watch(dir.path()), Fake::solving());
    std::thread::sleep(Duration::from_millis(200));
    assert!(!daemon.is_finished());
    daemon.stop().unwrap();
}

#[test]
fn polling_finds_new_inputs_without_file_events() {
    let dir = Scratch::new();
    let fake = Fake::solving();
    let opts = WatchOptions {
        poll: Some(Duration::from_millis(200)),
        ..quick_watch(dir.path())
    };
    let daemon = Daemon::start(opts, fake.clone());
    dir.write("polled.csv", "x");
    assert!(eventually(|| dir.file("polled.result.xlsx").exists()));
    daemon.stop().unwrap();
    assert_eq!(fake.runs_of("polled.csv"), 1);
}

#[test]
fn an_input_in_a_new_sub_folder_runs_when_recursive_but_not_in_a_hidden_one() {
    let dir = Scratch::new();
    let fake = Fake::solving();
    let opts = WatchOptions {
        recursive: true,
        ..quick_watch(dir.path())
    };
    let daemon = Daemon::start(opts, fake.clone());
    dir.write("kiln-3/batch-7.csv", "x");
    dir.write(".trash/ignored.csv", "x");
    assert!(eventually(|| dir
        .file("kiln-3/batch-7.result.xlsx")
        .exists()));
    daemon.stop().unwrap();
    let files: Vec<String> = fake.calls().into_iter().map(|c| c.file).collect();
    assert_eq!(files, ["batch-7.csv"]);
}

#[test]
fn a_missing_folder_is_an_error_that_reads_as_a_sentence() {
    let dir = Scratch::new();
    let opts = quick_watch(&dir.file("no-such-folder"));
    let stop = Arc::new(std::sync::atomic::AtomicBool::new(false));
    let err = watch_until(&opts, Fake::solving(), stop).unwrap_err();
    assert!(matches!(err, WatchError::NotAFolder { .. }));
    assert!(err.to_string().contains("is not a folder"), "{err}");
}

#[test]
fn a_failed_input_is_not_run_again_until_it_changes_or_its_wait_is_over() {
    // Before: reading the input raised an event and the still-stale input was run again
    // every second or two for ever (here: at every 100 ms rescan).
    let dir = Scratch::new();
    dir.write("stuck.csv", "x");
    let fake = Fake::new(Behaviour {
        fail: true,
        ..Behaviour::default()
    });
    let opts = WatchOptions {
        rescan: Duration::from_millis(100),
        failure_backoff: Duration::from_secs(600),
        ..quick_watch(dir.path())
    };
    let daemon = Daemon::start(opts, fake.clone());
    assert!(eventually(|| fake.calls().len() == 1));
    // Ten rescans and the events of the read come and go.
    std::thread::sleep(Duration::from_millis(1200));
    assert_eq!(fake.calls().len(), 1, "{:?}", fake.calls());
    // A change ends the wait.
    dir.write("stuck.csv", "edited");
    assert!(eventually(|| fake.calls().len() == 2));
    daemon.stop().unwrap();
}

#[test]
fn a_failed_input_is_tried_again_after_its_wait() {
    let dir = Scratch::new();
    dir.write("stuck.csv", "x");
    let fake = Fake::new(Behaviour {
        fail: true,
        ..Behaviour::default()
    });
    let opts = WatchOptions {
        rescan: Duration::from_millis(100),
        failure_backoff: Duration::from_millis(300),
        ..quick_watch(dir.path())
    };
    let daemon = Daemon::start(opts, fake.clone());
    // 300 ms, then 600 ms, then 1.2 s: three runs come within about two seconds, not twenty.
    assert!(eventually(|| fake.calls().len() >= 3));
    daemon.stop().unwrap();
}

#[test]
fn a_linked_sub_folder_leading_outside_is_not_served() {
    let outside = Scratch::new();
    let dir = Scratch::new();
    let fake = Fake::solving();
    let opts = WatchOptions {
        recursive: true,
        ..quick_watch(dir.path())
    };
    let daemon = Daemon::start(opts, fake.clone());
    std::os::unix::fs::symlink(outside.path(), dir.file("linked")).unwrap();
    outside.write("far.csv", "x");
    dir.write("inner.csv", "x");
    assert!(eventually(|| dir.file("inner.result.xlsx").exists()));
    // Give a followed link every chance to show up.
    std::thread::sleep(Duration::from_millis(800));
    daemon.stop().unwrap();
    assert_eq!(fake.runs_of("far.csv"), 0);
    assert_eq!(outside.names(), ["far.csv"]);
}

#[test]
fn inputs_sharing_a_stem_are_answered_once_for_the_newest() {
    let dir = Scratch::new();
    dir.write("kiln.csv", "x");
    dir.write("kiln.xlsx", "x");
    dir.set_mtime("kiln.csv", -100);
    dir.set_mtime("kiln.xlsx", -10);
    let fake = Fake::solving();
    let daemon = Daemon::start(quick_watch(dir.path()), fake.clone());
    assert!(eventually(|| dir.file("kiln.result.xlsx").exists()));
    std::thread::sleep(Duration::from_millis(500));
    daemon.stop().unwrap();
    let files: Vec<String> = fake.calls().into_iter().map(|c| c.file).collect();
    assert_eq!(files, ["kiln.xlsx"]);
}
