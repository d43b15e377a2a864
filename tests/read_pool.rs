//! Reader children that stay up between files (`batch`, `watch`): the same cells as the
//! one-shot child, a hostile file fails alone and the next file gets a fresh child, and a
//! child is replaced after its number of files.
#![allow(clippy::unwrap_used)]

mod support;

use std::path::{Path, PathBuf};

use dampfront::workbook::raw::RawBook;
use dampfront::workbook::read::{Isolation, ReadError, ReaderPool};
use support::books::{V, rich_case, series_case, write_ods, write_xlsx};
use support::{run_in, scratch};

const EXE: &str = env!("CARGO_BIN_EXE_dampfront");

/// Valid workbooks of several kinds: the shipped templates, and cases written here as xlsx and
/// as ods.
fn valid_books(dir: &Path) -> Vec<PathBuf> {
    let templates = Path::new(env!("CARGO_MANIFEST_DIR")).join("templates");
    let mut books: Vec<PathBuf> = ["wood", "food", "clay", "blank", "lab"]
        .iter()
        .map(|t| templates.join(format!("{t}.xlsx")))
        .collect();
    for (name, sheets) in [
        ("series.xlsx", series_case("through the pool")),
        ("rich.xlsx", rich_case()),
    ] {
        write_xlsx(&dir.join(name), &sheets);
        books.push(dir.join(name));
    }
    write_ods(&dir.join("series.ods"), &series_case("an ods case"));
    books.push(dir.join("series.ods"));
    books
}

/// An ods workbook with a title in A1 and one number 20,000 rows down and 2,000 columns
/// across: the reader's dense grid for it is 40 million cells, gigabytes, far over the reader
/// child's address-space limit; the file itself is under a megabyte before compression.
fn write_far_cell_ods(path: &Path) {
    let mut rows = vec![vec![V::T("title")]];
    rows.extend(std::iter::repeat_with(Vec::new).take(20_000));
    let mut far = vec![V::E; 2000];
    far.push(V::N(1.0));
    rows.push(far);
    write_ods(path, &[("case", rows)]);
}

fn read_with(isolation: &Isolation, path: &Path) -> Result<RawBook, ReadError> {
    let bytes = std::fs::read(path).unwrap();
    let ext = path.extension().unwrap().to_str().unwrap();
    isolation.read_bytes(&bytes, ext)
}

#[test]
fn many_files_through_one_child_give_the_cells_of_the_one_shot_child() {
    let dir = scratch();
    let books = valid_books(dir.path());
    let one_shot = Isolation::Child { exe: EXE.into() };
    let pool = ReaderPool::new(EXE, 100);
    let pooled = Isolation::Pooled(pool.clone());
    // Twice over, so later files meet a child that has read all the others.
    for path in books.iter().chain(&books) {
        let expected = read_with(&one_shot, path).unwrap();
        assert!(!expected.sheets.is_empty(), "{}", path.display());
        assert_eq!(
            read_with(&pooled, path).unwrap(),
            expected,
            "{}",
            path.display()
        );
    }
    assert_eq!(pool.children_started(), 1);
}

#[test]
fn a_hostile_file_in_the_middle_fails_alone_and_the_next_files_read_in_a_fresh_child() {
    let dir = scratch();
    let books = valid_books(dir.path());
    let far = dir.path().join("far.ods");
    write_far_cell_ods(&far);
    let one_shot = Isolation::Child { exe: EXE.into() };
    let pool = ReaderPool::new(EXE, 100);
    let pooled = Isolation::Pooled(pool.clone());
    let (before, after) = books.split_at(3);
    for path in before {
        assert!(read_with(&pooled, path).is_ok(), "{}", path.display());
    }
    assert_eq!(pool.children_started(), 1);
    // The same verdict as the one-shot child's: too large for the memory limit.
    let alone = read_with(&one_shot, &far).unwrap_err().to_string();
    let e = read_with(&pooled, &far).unwrap_err();
    assert!(matches!(e, ReadError::TooLarge { .. }), "{e}");
    assert!(e.to_string().contains("of memory"), "{e}");
    assert_eq!(e.to_string(), alone);
    for path in after {
        assert_eq!(
            read_with(&pooled, path).unwrap(),
            read_with(&one_shot, path).unwrap(),
            "{}",
            path.display()
        );
    }
    // The child that met the hostile file was not used again.
    assert_eq!(pool.children_started(), 2);
}

#[test]
fn a_file_that_is_not_a_workbook_gets_its_answer_and_the_next_file_a_fresh_child() {
    let dir = scratch();
    let books = valid_books(dir.path());
    let pool = ReaderPool::new(EXE, 100);
    let pooled = Isolation::Pooled(pool.clone());
    assert!(read_with(&pooled, &books[0]).is_ok());
    let e = pooled
        .read_bytes(b"PK\x03\x04\x14\x00\x00\x00", "xlsx")
        .unwrap_err();
    assert!(e.to_string().contains("incomplete"), "{e}");
    assert!(read_with(&pooled, &books[1]).is_ok());
    assert_eq!(pool.children_started(), 2);
}

#[test]
fn an_idle_child_that_was_stopped_is_replaced_before_the_next_file() {
    let dir = scratch();
    let books = valid_books(dir.path());
    let pool = ReaderPool::new(EXE, 100);
    let pooled = Isolation::Pooled(pool.clone());
    assert!(read_with(&pooled, &books[0]).is_ok());
    let idle = pool.idle_children();
    assert_eq!(idle.len(), 1);
    let killed = std::process::Command::new("kill")
        .args(["-KILL", &idle[0].to_string()])
        .status()
        .unwrap();
    assert!(killed.success());
    // The signal ends it a moment later: wait until it is a zombie (ended, not yet reaped).
    let stat = format!("/proc/{}/stat", idle[0]);
    let ended = || {
        std::fs::read_to_string(&stat)
            .map(|s| {
                s.rsplit_once(')')
                    .is_some_and(|(_, r)| r.trim_start().starts_with('Z'))
            })
            .unwrap_or(true)
    };
    let started = std::time::Instant::now();
    while !ended() && started.elapsed() < std::time::Duration::from_secs(10) {
        std::thread::sleep(std::time::Duration::from_millis(5));
    }
    assert!(ended());
    // Not blamed on the next file: it reads in a fresh child.
    assert_eq!(
        read_with(&pooled, &books[1]).unwrap(),
        read_with(&Isolation::Child { exe: EXE.into() }, &books[1]).unwrap()
    );
    assert_eq!(pool.children_started(), 2);
    assert_ne!(pool.idle_children(), idle);
}

#[test]
fn a_child_is_replaced_after_its_number_of_files() {
    let dir = scratch();
    let books = valid_books(dir.path());
    let pool = ReaderPool::new(EXE, 3);
    let pooled = Isolation::Pooled(pool.clone());
    for path in books.iter().take(7) {
        assert!(read_with(&pooled, path).is_ok(), "{}", path.display());
    }
    // Files 1-3, 4-6 and 7 in three children.
    assert_eq!(pool.children_started(), 3);
}

#[test]
fn batch_answers_every_good_file_around_a_hostile_one() {
    let dir = scratch();
    for (i, name) in ["a.xlsx", "b.xlsx", "d.xlsx", "e.xlsx"].iter().enumerate() {
        let title = ["case a", "case b", "case d", "case e"][i];
        write_xlsx(&dir.path().join(name), &series_case(title));
    }
    write_far_cell_ods(&dir.path().join("c.ods"));
    let folder = dir.path().to_str().unwrap();
    let out = run_in(
        dir.path(),
        &["batch", folder, "--jobs", "1", "--settle-ms", "0"],
    );
    // Exit 1: one input had problems; the others ran.
    assert_eq!(out.status.code(), Some(1), "{out:?}");
    for stem in ["a", "b", "d", "e"] {
        assert!(
            dir.path().join(format!("{stem}.result.xlsx")).exists(),
            "{stem}"
        );
        assert!(
            !dir.path().join(format!("{stem}.errors.xlsx")).exists(),
            "{stem}"
        );
    }
    assert!(dir.path().join("c.errors.xlsx").exists());
    assert!(!dir.path().join("c.result.xlsx").exists());
}
