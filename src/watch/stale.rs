//! Staleness: the only state the watcher keeps is the files themselves.
//!
//! An input needs a run when neither `<stem>.result.xlsx` nor `<stem>.errors.xlsx` was
//! modified after it. "After" is strict: on file systems with coarse time stamps an output
//! written in the same tick as an edit triggers one extra run rather than hiding the edit.

use std::path::Path;
use std::time::SystemTime;

use super::filter::{errors_path, result_path};

/// Whether `input` needs a run: it exists and has no result or errors workbook newer than
/// itself. A missing or unreadable input is not stale (there is nothing to run).
pub fn is_stale(input: &Path) -> bool {
    let Some(input_time) = modified(input) else {
        return false;
    };
    let newer = |output: &Path| modified(output).is_some_and(|t| t > input_time);
    !(newer(&result_path(input)) || newer(&errors_path(input)))
}

fn modified(path: &Path) -> Option<SystemTime> {
    std::fs::metadata(path).and_then(|m| m.modified()).ok()
}
