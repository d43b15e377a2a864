//! Which files are inputs, and the names of the files written beside them.
//!
//! An input is any `.xlsx .xlsm .xls .ods .csv` file (extension case-insensitive) except
//! office owner files (`~$...`), hidden files (`.` first, which also covers the temporary
//! names outputs are written under), our own outputs (`.result.xlsx`, `.errors.xlsx`), our
//! locks (`.lock`) and partial downloads (`.tmp`, `.part`, `.crdownload`).

use std::ffi::OsString;
use std::io;
use std::path::{Component, Path, PathBuf};

const INPUT_EXTENSIONS: [&str; 5] = ["xlsx", "xlsm", "xls", "ods", "csv"];
const OUTPUT_SUFFIXES: [&str; 2] = [".result.xlsx", ".errors.xlsx"];
/// Partial downloads and our lock files; listed for clarity even though none of them has an
/// input extension, so that a change to the extension list cannot let them in.
const SKIPPED_SUFFIXES: [&str; 4] = [".tmp", ".part", ".crdownload", ".lock"];

/// Whether `path` names an input file, judged by its file name alone.
///
/// ```
/// use std::path::Path;
/// use dampfront::watch::is_input;
/// assert!(is_input(Path::new("inbox/oak-40mm.XLSX")));
/// assert!(!is_input(Path::new("inbox/oak-40mm.result.xlsx")));
/// assert!(!is_input(Path::new("inbox/~$oak-40mm.xlsx")));
/// ```
pub fn is_input(path: &Path) -> bool {
    let Some(name) = path.file_name() else {
        return false;
    };
    let name = name.to_string_lossy().to_lowercase();
    if name.starts_with("~$") || name.starts_with('.') {
        return false;
    }
    if OUTPUT_SUFFIXES.iter().any(|s| name.ends_with(s))
        || SKIPPED_SUFFIXES.iter().any(|s| name.ends_with(s))
    {
        return false;
    }
    match name.rsplit_once('.') {
        Some((stem, ext)) => !stem.is_empty() && INPUT_EXTENSIONS.contains(&ext),
        None => false,
    }
}

/// `<stem>.result.xlsx` beside `input` (stem: the file name without its last extension).
pub fn result_path(input: &Path) -> PathBuf {
    sibling(input, ".result.xlsx")
}

/// `<stem>.errors.xlsx` beside `input`.
pub fn errors_path(input: &Path) -> PathBuf {
    sibling(input, ".errors.xlsx")
}

/// `<stem>.lock` beside `input`, created while a run of `input` is in progress.
pub fn lock_path(input: &Path) -> PathBuf {
    sibling(input, ".lock")
}

fn sibling(input: &Path, suffix: &str) -> PathBuf {
    let mut name: OsString = input.file_stem().map(OsString::from).unwrap_or_default();
    name.push(suffix);
    input.with_file_name(name)
}

/// Whether a folder's name hides it from the watcher (same rule as for files).
fn is_hidden_dir(name: &str) -> bool {
    name.starts_with('.') || name.starts_with("~$")
}

/// Whether `path` (as reported by a file event under `root`) is an input the watcher serves:
/// an input name, directly in `root` or (with `recursive`) in a non-hidden sub-folder.
pub(crate) fn in_scope(root: &Path, path: &Path, recursive: bool) -> bool {
    let Ok(rel) = path.strip_prefix(root) else {
        return false;
    };
    let parts: Vec<Component<'_>> = rel.components().collect();
    let Some((_, dirs)) = parts.split_last() else {
        return false;
    };
    if !recursive && !dirs.is_empty() {
        return false;
    }
    let dirs_ok = dirs.iter().all(|c| match c {
        Component::Normal(name) => !is_hidden_dir(&name.to_string_lossy()),
        _ => false,
    });
    dirs_ok && is_input(path)
}

/// When another input beside `path` has the same stem (`kiln.csv`, `kiln.xlsx`, `kiln.ods`
/// share one result, errors workbook and lock), the one that is answered: the most recently
/// modified, ties going to the name that sorts first. `Some(winner)` when `path` is not it.
pub(crate) fn clash_winner(path: &Path) -> Option<PathBuf> {
    let stem = path.file_stem()?;
    let dir = path.parent()?;
    let key = |p: &Path| {
        let modified = std::fs::metadata(p)
            .and_then(|m| m.modified())
            .unwrap_or(std::time::UNIX_EPOCH);
        (std::cmp::Reverse(modified), p.to_path_buf())
    };
    let mut best = key(path);
    let mut winner = None;
    for ext in INPUT_EXTENSIONS {
        for candidate in [ext.to_string(), ext.to_uppercase()] {
            let mut name = stem.to_os_string();
            name.push(".");
            name.push(&candidate);
            let other = dir.join(name);
            if other == path
                || !is_input(&other)
                || !std::fs::metadata(&other).is_ok_and(|m| m.is_file())
            {
                continue;
            }
            let k = key(&other);
            if k < best {
                best = k;
                winner = Some(other);
            }
        }
    }
    winner
}

/// Whether `path`, with every symbolic link in it resolved, lies inside `root` (itself
/// resolved): a link out of the watched folder is neither read nor answered beside.
pub(crate) fn stays_inside(root: &Path, path: &Path) -> bool {
    path.canonicalize().is_ok_and(|p| p.starts_with(root))
}

/// Whether `dir` (a sub-folder under `root`) is one the recursive watcher serves.
pub(crate) fn dir_in_scope(root: &Path, dir: &Path) -> bool {
    dir.strip_prefix(root).is_ok_and(|rel| {
        rel.components().all(|c| match c {
            Component::Normal(name) => !is_hidden_dir(&name.to_string_lossy()),
            _ => false,
        })
    })
}

/// All inputs in `dir` (and its non-hidden sub-folders with `recursive`), sorted by path.
///
/// Symbolic links to folders are not followed (no loops, and no results written outside the
/// folder); a link to a file is an input only when the file it points to lies inside `dir`.
/// Only ordinary files are inputs (no pipes or devices). A sub-folder that cannot be listed is
/// logged and skipped; only an unreadable `dir` itself is an error.
pub(crate) fn scan(dir: &Path, recursive: bool) -> io::Result<Vec<PathBuf>> {
    let inside = dir.canonicalize()?;
    let mut found = Vec::new();
    let mut folders = vec![dir.to_path_buf()];
    let mut first = true;
    while let Some(folder) = folders.pop() {
        let entries = match std::fs::read_dir(&folder) {
            Ok(entries) => entries,
            Err(e) if first => return Err(e),
            Err(e) => {
                tracing::warn!(folder = %folder.display(), error = %e, "cannot list sub-folder; skipped");
                continue;
            }
        };
        first = false;
        for entry in entries.flatten() {
            let Ok(kind) = entry.file_type() else {
                continue;
            };
            let path = entry.path();
            if kind.is_dir() {
                if recursive && !is_hidden_dir(&entry.file_name().to_string_lossy()) {
                    folders.push(path);
                }
            } else if is_input(&path)
                && std::fs::metadata(&path).is_ok_and(|m| m.is_file())
                && (!kind.is_symlink() || stays_inside(&inside, &path))
            {
                found.push(path);
            }
        }
    }
    found.sort();
    Ok(found)
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    #[test]
    fn scope_follows_the_recursive_flag_and_hidden_folders() {
        let root = Path::new("/srv/in");
        assert!(in_scope(root, Path::new("/srv/in/a.csv"), false));
        assert!(!in_scope(root, Path::new("/srv/in/sub/a.csv"), false));
        assert!(in_scope(root, Path::new("/srv/in/sub/a.csv"), true));
        assert!(!in_scope(root, Path::new("/srv/in/.git/a.csv"), true));
        assert!(!in_scope(root, Path::new("/srv/other/a.csv"), true));
        assert!(!in_scope(root, Path::new("/srv/in"), true));
    }

    #[test]
    fn stem_drops_only_the_last_extension() {
        assert_eq!(
            result_path(Path::new("/x/kiln.v2.xlsx")),
            Path::new("/x/kiln.v2.result.xlsx")
        );
        assert_eq!(lock_path(Path::new("b.csv")), Path::new("b.lock"));
    }
}
