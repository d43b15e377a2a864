//! The batch pass: stale inputs only (unless forced), shards that split a folder exactly,
//! locks shared with other runners, the `NotReady` back-off and the closing table.

#[path = "watch_support.rs"]
mod support;

use std::collections::HashMap;
use std::fs;
use std::sync::Arc;
use std::sync::atomic::AtomicBool;
use std::time::Duration;

use dampfront::watch::{
    Attempt, BatchOptions, BatchRow, BatchSummary, Processor, Shard, SkipReason, Status,
    WatchError, batch_until, lock_path,
};
use support::{Behaviour, Fake, Scratch, dead_pid, host_name, unix_secs_ago};

fn quick_batch(dir: &std::path::Path) -> BatchOptions {
    BatchOptions {
        jobs: 2,
        settle: Duration::from_millis(100),
        ..BatchOptions::new(dir)
    }
}

fn run(opts: &BatchOptions, fake: &Arc<Fake>) -> BatchSummary {
    let processor: Arc<dyn Processor> = fake.clone();
    batch_until(opts, processor, Arc::new(AtomicBool::new(false))).unwrap()
}

fn write_lock(dir: &Scratch, stem: &str, host: &str, pid: u32, started: u64) {
    let text = format!("host={host}\npid={pid}\nstarted={started}\ntoken=someone-else\n");
    fs::write(dir.file(&format!("{stem}.lock")), text).unwrap();
}

#[test]
fn every_stale_input_runs_once_and_outputs_and_other_files_are_left_alone() {
    let dir = Scratch::new();
    for name in ["a.csv", "b.xlsx", "c.ods"] {
        dir.write(name, name);
    }
    dir.write("notes.txt", "not an input");
    dir.write("~$b.xlsx", "owner file");
    let fake = Fake::solving();
    let summary = run(&quick_batch(dir.path()), &fake);
    assert_eq!(summary.rows.len(), 3);
    for name in ["a.csv", "b.xlsx", "c.ods"] {
        assert_eq!(fake.runs_of(name), 1, "{name}");
    }
    assert!(summary.rows.iter().all(|r| r.status == Status::Solved));
    assert!(!summary.any_problems());
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());
    assert!(dir.file("b.result.xlsx").exists());
}

#[test]
fn shards_one_two_and_three_of_three_cover_every_input_exactly_once() {
    let dir = Scratch::new();
    for i in 0..10 {
        dir.write(&format!("case-{i:02}.csv"), "x");
    }
    let fake = Fake::solving();
    let mut per_shard = Vec::new();
    for index in 1..=3 {
        let opts = BatchOptions {
            shard: Some(Shard { index, count: 3 }),
            force: true,
            ..quick_batch(dir.path())
        };
        per_shard.push(run(&opts, &fake).rows.len());
    }
    // 10 inputs over 3 shards: positions 0,3,6,9 / 1,4,7 / 2,5,8.
    assert_eq!(per_shard, vec![4, 3, 3]);
    let mut counts: HashMap<String, usize> = HashMap::new();
    for call in fake.calls() {
        *counts.entry(call.file).or_default() += 1;
    }
    assert_eq!(counts.len(), 10);
    assert!(counts.values().all(|&n| n == 1), "{counts:?}");
}

#[test]
fn shard_one_of_three_takes_positions_zero_three_six_nine_in_path_order() {
    let dir = Scratch::new();
    for i in 0..10 {
        dir.write(&format!("case-{i:02}.csv"), "x");
    }
    let opts = BatchOptions {
        shard: Some(Shard { index: 1, count: 3 }),
        ..quick_batch(dir.path())
    };
    let summary = run(&opts, &Fake::solving());
    let files: Vec<String> = summary
        .rows
        .iter()
        .map(|r| r.file.display().to_string())
        .collect();
    assert_eq!(
        files,
        ["case-00.csv", "case-03.csv", "case-06.csv", "case-09.csv"]
    );
}

#[test]
fn an_invalid_shard_is_refused_before_anything_runs() {
    let dir = Scratch::new();
    dir.write("a.csv", "x");
    let fake = Fake::solving();
    let opts = BatchOptions {
        shard: Some(Shard { index: 4, count: 3 }),
        ..quick_batch(dir.path())
    };
    let processor: Arc<dyn Processor> = fake.clone();
    let err = batch_until(&opts, processor, Arc::new(AtomicBool::new(false))).unwrap_err();
    assert!(matches!(err, WatchError::Shard(_)), "{err}");
    assert!(fake.calls().is_empty());
}

#[test]
fn an_input_with_a_newer_result_is_not_run_until_it_is_touched() {
    let dir = Scratch::new();
    dir.write("oak.csv", "x");
    dir.write("oak.result.xlsx", "old result");
    dir.set_mtime("oak.csv", -100);
    let fake = Fake::solving();
    let summary = run(&quick_batch(dir.path()), &fake);
    assert!(summary.rows.is_empty());
    assert_eq!(summary.up_to_date, 1);
    assert_eq!(fake.runs_of("oak.csv"), 0);

    dir.set_mtime("oak.csv", 0);
    let summary = run(&quick_batch(dir.path()), &fake);
    assert_eq!(summary.rows.len(), 1);
    assert_eq!(fake.runs_of("oak.csv"), 1);
}

#[test]
fn force_runs_up_to_date_inputs_too() {
    let dir = Scratch::new();
    dir.write("oak.csv", "x");
    dir.write("oak.result.xlsx", "old result");
    dir.set_mtime("oak.csv", -100);
    let fake = Fake::solving();
    let opts = BatchOptions {
        force: true,
        ..quick_batch(dir.path())
    };
    assert_eq!(run(&opts, &fake).rows.len(), 1);
    assert_eq!(fake.runs_of("oak.csv"), 1);
}

#[test]
fn recursive_finds_inputs_in_sub_folders_but_not_hidden_ones() {
    let dir = Scratch::new();
    dir.write("top.csv", "x");
    dir.write("kiln-2/inner.csv", "x");
    dir.write(".archive/old.csv", "x");
    let fake = Fake::solving();
    assert_eq!(run(&quick_batch(dir.path()), &fake).rows.len(), 1);
    let opts = BatchOptions {
        recursive: true,
        ..quick_batch(dir.path())
    };
    let summary = run(&opts, &fake);
    let files: Vec<String> = summary
        .rows
        .iter()
        .map(|r| r.file.display().to_string())
        .collect();
    assert_eq!(files, ["kiln-2/inner.csv"]);
    assert_eq!(fake.runs_of("old.csv"), 0);
}

#[test]
fn not_ready_is_retried_with_back_off_then_given_a_final_try() {
    let dir = Scratch::new();
    dir.write("broken.xlsx", "not a workbook");
    let fake = Fake::new(Behaviour {
        not_ready_calls: u32::MAX,
        ..Behaviour::default()
    });
    let summary = run(&quick_batch(dir.path()), &fake);
    let mut expected = vec![Attempt::First];
    expected.extend((1..=5).map(Attempt::Retry));
    expected.push(Attempt::Final);
    assert_eq!(fake.attempts_of("broken.xlsx"), expected);
    assert_eq!(summary.rows[0].status, Status::Problems);
    assert!(summary.any_problems());
    assert!(dir.file("broken.errors.xlsx").exists());
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());
}

#[test]
fn a_file_readable_on_the_second_retry_is_solved_without_a_final_try() {
    let dir = Scratch::new();
    dir.write("late.csv", "x");
    let fake = Fake::new(Behaviour {
        not_ready_calls: 2,
        ..Behaviour::default()
    });
    let summary = run(&quick_batch(dir.path()), &fake);
    assert_eq!(
        fake.attempts_of("late.csv"),
        [Attempt::First, Attempt::Retry(1), Attempt::Retry(2)]
    );
    assert_eq!(summary.rows[0].status, Status::Solved);
    assert!(dir.file("late.result.xlsx").exists());
}

#[test]
fn a_stale_lock_of_a_dead_process_is_taken_over() {
    let dir = Scratch::new();
    dir.write("oak.csv", "x");
    write_lock(&dir, "oak", &host_name(), dead_pid(), unix_secs_ago(3600));
    let fake = Fake::solving();
    let summary = run(&quick_batch(dir.path()), &fake);
    assert_eq!(fake.runs_of("oak.csv"), 1);
    assert!(summary.skipped.is_empty());
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());
}

#[test]
fn a_fresh_lock_of_a_live_process_is_honoured_and_kept() {
    let dir = Scratch::new();
    dir.write("oak.csv", "x");
    write_lock(
        &dir,
        "oak",
        &host_name(),
        std::process::id(),
        unix_secs_ago(5),
    );
    let fake = Fake::solving();
    let summary = run(&quick_batch(dir.path()), &fake);
    assert_eq!(fake.runs_of("oak.csv"), 0);
    assert!(matches!(summary.skipped[0].reason, SkipReason::Locked(_)));
    assert!(
        fs::read_to_string(lock_path(&dir.file("oak.csv")))
            .unwrap()
            .contains("token=someone-else")
    );
}

#[test]
fn an_old_lock_of_a_live_process_is_honoured() {
    // Old enough to be stale (any age is, with a zero stale time), and its process (this test)
    // was already running when the lock was written: a live owner.
    let dir = Scratch::new();
    dir.write("oak.csv", "x");
    write_lock(
        &dir,
        "oak",
        &host_name(),
        std::process::id(),
        unix_secs_ago(0),
    );
    let fake = Fake::solving();
    let opts = BatchOptions {
        stale_lock: Duration::ZERO,
        ..quick_batch(dir.path())
    };
    run(&opts, &fake);
    assert_eq!(fake.runs_of("oak.csv"), 0);
    assert!(dir.file("oak.lock").exists());
}

#[test]
fn an_old_lock_whose_process_id_now_belongs_to_a_newer_process_is_taken_over() {
    // Before: the id was alive, so the lock was honoured for ever. This test process started
    // long after the lock's hour-old start time: it cannot be the owner.
    let dir = Scratch::new();
    dir.write("oak.csv", "x");
    write_lock(
        &dir,
        "oak",
        &host_name(),
        std::process::id(),
        unix_secs_ago(3600),
    );
    let fake = Fake::solving();
    let summary = run(&quick_batch(dir.path()), &fake);
    assert_eq!(fake.runs_of("oak.csv"), 1, "{summary:?}");
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());
}

#[test]
fn a_dangling_link_in_place_of_a_lock_does_not_block_the_input() {
    // Before: x.lock -> nowhere blocked x for ever.
    let dir = Scratch::new();
    dir.write("oak.csv", "x");
    std::os::unix::fs::symlink("/nonexistent/place", dir.file("oak.lock")).unwrap();
    let fake = Fake::solving();
    run(&quick_batch(dir.path()), &fake);
    assert_eq!(fake.runs_of("oak.csv"), 1);
    assert!(fs::symlink_metadata(dir.file("oak.lock")).is_err());
}

#[test]
fn temporary_files_of_a_killed_run_are_removed_once_old() {
    // Before: never cleaned. A fresh one may belong to a run in progress and stays.
    let dir = Scratch::new();
    dir.write("oak.csv", "x");
    dir.write(".dampfront-abc123.tmp", "half a workbook");
    dir.set_mtime(".dampfront-abc123.tmp", -3600);
    dir.write(".dampfront-fresh.tmp", "being written");
    dir.write(".oak.lock.takeover-host-1-2", "old");
    dir.set_mtime(".oak.lock.takeover-host-1-2", -3600);
    let fake = Fake::solving();
    run(&quick_batch(dir.path()), &fake);
    let names = dir.names();
    assert!(
        !names.contains(&".dampfront-abc123.tmp".to_string()),
        "{names:?}"
    );
    assert!(
        !names.contains(&".oak.lock.takeover-host-1-2".to_string()),
        "{names:?}"
    );
    assert!(
        names.contains(&".dampfront-fresh.tmp".to_string()),
        "{names:?}"
    );
}

#[test]
fn a_fresh_lock_of_a_dead_process_is_honoured_until_it_is_old() {
    let dir = Scratch::new();
    dir.write("oak.csv", "x");
    write_lock(&dir, "oak", &host_name(), dead_pid(), unix_secs_ago(5));
    let fake = Fake::solving();
    run(&quick_batch(dir.path()), &fake);
    assert_eq!(fake.runs_of("oak.csv"), 0);
    let opts = BatchOptions {
        stale_lock: Duration::from_secs(1),
        ..quick_batch(dir.path())
    };
    run(&opts, &fake);
    assert_eq!(fake.runs_of("oak.csv"), 1);
}

#[test]
fn a_lock_from_another_host_is_judged_by_age_alone() {
    let dir = Scratch::new();
    dir.write("fresh.csv", "x");
    dir.write("old.csv", "x");
    // Our own pid on another host says nothing about that host's process.
    write_lock(
        &dir,
        "fresh",
        "kiln-pc-elsewhere",
        std::process::id(),
        unix_secs_ago(5),
    );
    write_lock(
        &dir,
        "old",
        "kiln-pc-elsewhere",
        std::process::id(),
        unix_secs_ago(3600),
    );
    let fake = Fake::solving();
    run(&quick_batch(dir.path()), &fake);
    assert_eq!(fake.runs_of("fresh.csv"), 0);
    assert_eq!(fake.runs_of("old.csv"), 1);
    assert!(!dir.file("old.lock").exists());
}

#[test]
fn setting_stop_skips_what_has_not_started() {
    let dir = Scratch::new();
    for i in 0..4 {
        dir.write(&format!("c{i}.csv"), "x");
    }
    let fake = Fake::solving();
    let processor: Arc<dyn Processor> = fake.clone();
    let summary = batch_until(
        &quick_batch(dir.path()),
        processor,
        Arc::new(AtomicBool::new(true)),
    )
    .unwrap();
    assert!(fake.calls().is_empty());
    assert_eq!(summary.skipped.len(), 4);
    assert!(
        summary
            .skipped
            .iter()
            .all(|s| s.reason == SkipReason::Interrupted)
    );
    assert!(dir.leftovers().is_empty(), "{:?}", dir.leftovers());
}

#[test]
fn problems_and_failures_count_as_problems_but_target_not_reached_does_not() {
    let row = |status| BatchRow {
        file: "a.csv".into(),
        status,
        drying_time_h: None,
        seconds: 0.0,
    };
    let summary = |status| BatchSummary {
        rows: vec![row(Status::Solved), row(status)],
        ..BatchSummary::default()
    };
    assert!(summary(Status::Problems).any_problems());
    assert!(summary(Status::Failed).any_problems());
    assert!(!summary(Status::TargetNotReached).any_problems());
    assert!(!summary(Status::Solved).any_problems());
}

#[test]
fn the_closing_table_lists_file_status_drying_time_and_seconds() {
    let summary = BatchSummary {
        rows: vec![
            BatchRow {
                file: "beech-27mm.xlsx".into(),
                status: Status::Solved,
                drying_time_h: Some(41.254),
                seconds: 3.21,
            },
            BatchRow {
                file: "clay.csv".into(),
                status: Status::Problems,
                drying_time_h: None,
                seconds: 0.04,
            },
        ],
        skipped: Vec::new(),
        up_to_date: 2,
        ..BatchSummary::default()
    };
    let expected = "\
file             status    drying time h  seconds
beech-27mm.xlsx  solved            41.25      3.2
clay.csv         problems              -      0.0
2 inputs ran (1 solved, 1 problems); 2 already up to date
";
    assert_eq!(summary.to_string(), expected);
}

#[test]
fn an_unreadable_file_that_is_not_changing_gets_its_final_try_at_once() {
    // Before: six back-offs (about 30 s with the default settle time) for a file that was not
    // being copied at all.
    let dir = Scratch::new();
    dir.write("old-broken.xlsx", "not a workbook");
    dir.set_mtime("old-broken.xlsx", -3600);
    let fake = Fake::new(Behaviour {
        not_ready_calls: u32::MAX,
        ..Behaviour::default()
    });
    let summary = run(&quick_batch(dir.path()), &fake);
    assert_eq!(
        fake.attempts_of("old-broken.xlsx"),
        [Attempt::First, Attempt::Final]
    );
    assert_eq!(summary.rows[0].status, Status::Problems);
}

#[test]
fn the_reported_time_includes_the_waits_between_tries() {
    // A fresh unreadable file is retried 50, 100, 200, 400, 800 ms apart (settle 100 ms) and
    // then tried a final time: at least 1.55 s pass. Before, the table showed 0.0 s.
    let dir = Scratch::new();
    dir.write("copying.xlsx", "not yet");
    let fake = Fake::new(Behaviour {
        not_ready_calls: u32::MAX,
        ..Behaviour::default()
    });
    let summary = run(&quick_batch(dir.path()), &fake);
    assert!(fake.attempts_of("copying.xlsx").len() >= 3);
    assert!(
        summary.rows[0].seconds >= 1.5,
        "{}",
        summary.rows[0].seconds
    );
}

#[test]
fn links_out_of_the_folder_are_neither_read_nor_answered_beside() {
    // Before: a symlinked sub-folder was followed and its results written outside; a
    // symlinked input was read from outside.
    let outside = Scratch::new();
    outside.write("far.csv", "x");
    let dir = Scratch::new();
    dir.write("own.csv", "x");
    std::os::unix::fs::symlink(outside.path(), dir.file("linked")).unwrap();
    std::os::unix::fs::symlink(outside.file("far.csv"), dir.file("ext.csv")).unwrap();
    // A link to a file inside the folder stays an input.
    std::os::unix::fs::symlink(dir.file("own.csv"), dir.file("alias.csv")).unwrap();
    let fake = Fake::solving();
    let opts = BatchOptions {
        recursive: true,
        ..quick_batch(dir.path())
    };
    let summary = run(&opts, &fake);
    let mut files: Vec<String> = fake.calls().into_iter().map(|c| c.file).collect();
    files.sort();
    assert_eq!(files, ["alias.csv", "own.csv"], "{summary:?}");
    assert_eq!(outside.names(), ["far.csv"]);
}

#[test]
fn inputs_sharing_a_stem_are_named_and_only_the_newest_is_run() {
    // Before: kiln.csv, kiln.xlsx and kiln.ods shared one result and lock; one was answered
    // and the others silently not.
    let dir = Scratch::new();
    dir.write("kiln.csv", "x");
    dir.write("kiln.xlsx", "x");
    dir.write("kiln.ods", "x");
    dir.set_mtime("kiln.csv", -100);
    dir.set_mtime("kiln.ods", -200);
    dir.set_mtime("kiln.xlsx", -10);
    let fake = Fake::solving();
    let summary = run(&quick_batch(dir.path()), &fake);
    let files: Vec<String> = fake.calls().into_iter().map(|c| c.file).collect();
    assert_eq!(files, ["kiln.xlsx"]);
    let clashes: Vec<(String, String)> = summary
        .skipped
        .iter()
        .map(|s| (s.file.display().to_string(), s.reason.to_string()))
        .collect();
    assert_eq!(clashes.len(), 2, "{clashes:?}");
    assert!(
        clashes
            .iter()
            .all(|(_, why)| why.contains("shares its result name with kiln.xlsx")),
        "{clashes:?}"
    );
    assert!(summary.any_problems());
    assert!(
        summary.to_string().contains("skipped kiln.csv"),
        "{summary}"
    );
}
