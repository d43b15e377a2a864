//! Which files the watched folder treats as inputs, the names written beside them, when an
//! input is stale, and how `--shard I/N` is read. The rules are those of operations.md.

#[path = "watch_support.rs"]
mod support;

use std::path::Path;

use dampfront::watch::{Shard, errors_path, is_input, is_stale, lock_path, result_path};
use support::Scratch;

fn does_pass(name: &str) {
    assert!(is_input(Path::new(name)), "{name} should be an input");
}

fn doesnt_pass(name: &str) {
    assert!(!is_input(Path::new(name)), "{name} should not be an input");
}

#[test]
fn workbooks_and_csv_pass_in_any_case() {
    for name in [
        "oak.xlsx",
        "oak.xlsm",
        "oak.xls",
        "oak.ods",
        "oak.csv",
        "OAK.XLSX",
        "Beech 27mm.Csv",
        "inbox/sub/apricot-halves.ods",
        "kiln.v2.xlsx",
        "a.b.c.csv",
    ] {
        does_pass(name);
    }
}

#[test]
fn other_extensions_dont_pass() {
    for name in [
        "oak.txt",
        "oak.xlsb",
        "oak.json",
        "oak",
        "xlsx",
        "oak.xlsx.bak",
        "oak.pdf",
    ] {
        doesnt_pass(name);
    }
}

#[test]
fn office_owner_files_and_hidden_files_dont_pass() {
    for name in [
        "~$oak.xlsx",
        ".oak.xlsx",
        ".~lock.oak.ods#",
        ".oak.result.xlsx.tmp3",
        "inbox/~$clay.xlsm",
    ] {
        doesnt_pass(name);
    }
}

#[test]
fn our_own_outputs_and_locks_dont_pass() {
    for name in [
        "oak.result.xlsx",
        "oak.errors.xlsx",
        "OAK.RESULT.XLSX",
        "oak.Errors.Xlsx",
        "oak.lock",
    ] {
        doesnt_pass(name);
    }
}

#[test]
fn partial_downloads_dont_pass() {
    for name in [
        "oak.xlsx.tmp",
        "oak.xlsx.part",
        "oak.xlsx.crdownload",
        "oak.csv.PART",
        "oak.tmp",
    ] {
        doesnt_pass(name);
    }
}

#[test]
fn a_stem_that_merely_contains_result_passes() {
    does_pass("result.xlsx");
    does_pass("oak.result.csv");
    does_pass("errors.xlsx");
}

#[test]
fn outputs_and_lock_sit_beside_the_input_named_after_its_stem() {
    let input = Path::new("/srv/drying/inbox/oak 40mm.v2.csv");
    assert_eq!(
        result_path(input),
        Path::new("/srv/drying/inbox/oak 40mm.v2.result.xlsx")
    );
    assert_eq!(
        errors_path(input),
        Path::new("/srv/drying/inbox/oak 40mm.v2.errors.xlsx")
    );
    assert_eq!(
        lock_path(input),
        Path::new("/srv/drying/inbox/oak 40mm.v2.lock")
    );
}

#[test]
fn an_input_without_outputs_is_stale() {
    let dir = Scratch::new();
    let input = dir.write("oak.csv", "x");
    assert!(is_stale(&input));
}

#[test]
fn a_newer_result_makes_the_input_up_to_date_and_touching_the_input_makes_it_stale_again() {
    let dir = Scratch::new();
    let input = dir.write("oak.csv", "x");
    dir.write("oak.result.xlsx", "r");
    dir.set_mtime("oak.csv", -100);
    dir.set_mtime("oak.result.xlsx", -50);
    assert!(!is_stale(&input));
    dir.set_mtime("oak.csv", 0);
    assert!(is_stale(&input));
}

#[test]
fn a_newer_errors_workbook_also_makes_the_input_up_to_date() {
    let dir = Scratch::new();
    let input = dir.write("oak.xlsx", "x");
    dir.write("oak.errors.xlsx", "e");
    dir.set_mtime("oak.xlsx", -100);
    assert!(!is_stale(&input));
}

#[test]
fn an_older_result_leaves_the_input_stale() {
    let dir = Scratch::new();
    let input = dir.write("oak.xlsx", "x");
    dir.write("oak.result.xlsx", "r");
    dir.set_mtime("oak.result.xlsx", -100);
    assert!(is_stale(&input));
}

#[test]
fn a_missing_input_is_not_stale() {
    let dir = Scratch::new();
    assert!(!is_stale(&dir.file("gone.csv")));
}

#[test]
fn shards_parse_as_index_over_count() {
    assert_eq!("2/5".parse::<Shard>(), Ok(Shard { index: 2, count: 5 }));
    assert_eq!(" 1 / 1 ".parse::<Shard>(), Ok(Shard { index: 1, count: 1 }));
    assert_eq!(Shard { index: 3, count: 7 }.to_string(), "3/7");
}

#[test]
fn shards_outside_one_to_count_are_refused_with_a_sentence() {
    for text in ["0/3", "4/3", "1/0", "0/0"] {
        let err = text.parse::<Shard>().unwrap_err();
        assert!(err.to_string().contains("1 <= I <= N"), "{text}: {err}");
    }
}

#[test]
fn malformed_shards_are_refused_with_an_example() {
    for text in ["3", "a/b", "1/", "/2", "-1/3", "1/2/3", ""] {
        let err = text.parse::<Shard>().unwrap_err();
        assert!(err.to_string().contains("such as 2/5"), "{text}: {err}");
    }
}

#[test]
fn a_shard_takes_every_count_th_position_starting_at_index_minus_one() {
    let shard = Shard { index: 2, count: 3 };
    let taken: Vec<usize> = (0..10).filter(|&i| shard.takes(i)).collect();
    assert_eq!(taken, vec![1, 4, 7]);
}
