//! Helpers shared by the integration tests: a scratch folder, the built binary, hashes, and
//! copies of produced workbooks for CI's independent reader.
#![allow(dead_code)]

pub mod books;
pub mod result;

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use sha2::{Digest, Sha256};

/// The `dampfront` binary built for these tests.
pub fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_dampfront"))
}

/// Runs the binary with `args` in `dir`.
pub fn run_in(dir: &Path, args: &[&str]) -> Output {
    bin()
        .current_dir(dir)
        .args(args)
        .output()
        .expect("the binary starts")
}

/// A fresh scratch folder.
pub fn scratch() -> tempfile::TempDir {
    tempfile::tempdir().expect("temp dir")
}

/// SHA-256 of a file, hex.
pub fn sha256(path: &Path) -> String {
    let bytes = std::fs::read(path).expect("readable");
    Sha256::digest(&bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// Copies every result and errors workbook in `dir` to `$DAMPFRONT_TEST_OUTPUTS/<label>/`,
/// where CI reads them again with an independent library.
pub fn keep_outputs(dir: &Path, label: &str) {
    let Ok(root) = std::env::var("DAMPFRONT_TEST_OUTPUTS") else {
        return;
    };
    let target = PathBuf::from(root).join(label);
    std::fs::create_dir_all(&target).expect("outputs folder");
    for entry in std::fs::read_dir(dir).expect("listable").flatten() {
        let name = entry.file_name().to_string_lossy().into_owned();
        if name.ends_with(".result.xlsx") || name.ends_with(".errors.xlsx") {
            std::fs::copy(entry.path(), target.join(&name)).expect("copy");
        }
    }
}

/// Text of a process's stdout and stderr, for assertion messages.
pub fn output_text(out: &Output) -> String {
    format!(
        "status {:?}\nstdout:\n{}\nstderr:\n{}",
        out.status.code(),
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    )
}
