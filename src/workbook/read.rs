//! Bytes to a [`RawBook`]: spreadsheets through calamine, the sectioned CSV form by our own
//! small reader.
//!
//! A file is read into memory once and parsed from that buffer, so the parse sees one snapshot
//! even while another program is still writing the file, and a truncated copy fails as a clean
//! [`ReadError::NotAWorkbook`] instead of a half-read case. Formula cells count by the value
//! the file cached for them; a formula with no cached value becomes a
//! [`RawValue::Error`] that the parser reports at its cell.

mod csv;
mod isolate;
mod pool;
mod zip_check;

pub use isolate::{CHILD_COMMAND, Isolation, child_main};
pub use pool::{ReaderPool, SERVER_COMMAND, server_main};

use std::fs::File;
use std::io::{Cursor, Read};
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::{Path, PathBuf};

use calamine::{Data, DataRef, Reader, SheetType, Sheets, Xlsx, XlsxError};

use super::raw::{RawBook, RawSheet, RawValue};

/// Largest input file read, in bytes (see [`crate::limits`]).
pub const MAX_FILE_BYTES: u64 = crate::limits::MAX_FILE_BYTES;

/// Largest number of non-empty cells read from one workbook, all sheets together (see
/// [`crate::limits`]).
pub const MAX_CELLS: usize = crate::limits::MAX_CELLS;

/// Text of the [`RawValue::Error`] for a formula cell the file stored no result for.
pub const NO_CACHED_VALUE: &str = "a formula with no cached value";

/// Why a file could not be turned into raw cells.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ReadError {
    /// The file could not be read from disk.
    #[error("{path} could not be read: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// What the system said.
        source: std::io::Error,
    },
    /// The bytes are not a spreadsheet this program can read.
    #[error("the file is not a readable workbook: {detail}")]
    NotAWorkbook {
        /// What was found instead, as a sentence fragment.
        detail: String,
    },
    /// The file name ends in something other than a workbook extension.
    #[error("files ending in \"{extension}\" are not read; use .xlsx, .xlsm, .xls, .ods or .csv")]
    UnsupportedExtension {
        /// The extension as given (without the dot); empty when there is none.
        extension: String,
    },
    /// The CSV text does not follow the sectioned CSV form.
    #[error("line {line} of the CSV file: {detail}")]
    Csv {
        /// 1-based line of the file where the problem was found.
        line: usize,
        /// What is wrong, as a sentence fragment.
        detail: String,
    },
    /// The file is larger than a case workbook can sensibly be.
    #[error("the file is too large to be a case workbook: {detail}")]
    TooLarge {
        /// Which limit was passed.
        detail: String,
    },
    /// The path names a pipe, device or folder, not an ordinary file.
    #[error("{path} is not an ordinary file (a pipe, device or folder); only files are read")]
    NotAFile {
        /// The path.
        path: PathBuf,
    },
}

/// Reads a workbook file: the bytes are read once, then parsed from memory.
///
/// Returns the raw cells and the exact bytes they came from (for hashing the input). The file
/// is only read, never written.
pub fn read_file(path: &Path) -> Result<(RawBook, Vec<u8>), ReadError> {
    read_file_with(path, &Isolation::InProcess)
}

/// Reads a workbook file as [`read_file`] does, with the spreadsheet formats read as
/// `isolation` says (in this process, or in a child process with memory and time limits).
pub fn read_file_with(path: &Path, isolation: &Isolation) -> Result<(RawBook, Vec<u8>), ReadError> {
    let bytes = read_input_bytes(path)?;
    let extension = path
        .extension()
        .map(|e| e.to_string_lossy().into_owned())
        .unwrap_or_default();
    let book = isolation.read_bytes(&bytes, &extension)?;
    Ok((book, bytes))
}

/// Opens without blocking (a FIFO would otherwise wait for a writer for ever) and reads
/// only an ordinary file, at most [`MAX_FILE_BYTES`] of it.
fn read_input_bytes(path: &Path) -> Result<Vec<u8>, ReadError> {
    let io = |source| ReadError::Io {
        path: path.to_path_buf(),
        source,
    };
    let mut options = std::fs::OpenOptions::new();
    options.read(true);
    #[cfg(target_os = "linux")]
    {
        use std::os::unix::fs::OpenOptionsExt;
        /// `O_NONBLOCK` on Linux (asm-generic/fcntl.h); no effect on an ordinary file.
        const O_NONBLOCK: i32 = 0o4000;
        options.custom_flags(O_NONBLOCK);
    }
    let file: File = options.open(path).map_err(io)?;
    if !file.metadata().map_err(io)?.is_file() {
        return Err(ReadError::NotAFile {
            path: path.to_path_buf(),
        });
    }
    let mut bytes = Vec::new();
    // Read at most one byte past the limit, so a huge file is refused without reading it all.
    file.take(MAX_FILE_BYTES + 1)
        .read_to_end(&mut bytes)
        .map_err(io)?;
    if bytes.len() as u64 > MAX_FILE_BYTES {
        return Err(ReadError::TooLarge {
            detail: format!("it is larger than {} MiB", MAX_FILE_BYTES / (1024 * 1024)),
        });
    }
    Ok(bytes)
}

/// Reads a workbook held in memory; `extension` (`xlsx`, `xlsm`, `xls`, `ods` or `csv`,
/// case-insensitive, a leading dot allowed) says which form to expect.
pub fn read_bytes(bytes: &[u8], extension: &str) -> Result<RawBook, ReadError> {
    let ext = extension.trim().trim_start_matches('.').to_lowercase();
    if bytes.len() as u64 > MAX_FILE_BYTES {
        return Err(ReadError::TooLarge {
            detail: format!("it is larger than {} MiB", MAX_FILE_BYTES / (1024 * 1024)),
        });
    }
    match ext.as_str() {
        "csv" => csv::read_csv(bytes),
        "xlsx" | "xlsm" | "xls" | "ods" => read_spreadsheet(bytes),
        _ => Err(ReadError::UnsupportedExtension {
            extension: extension.trim().trim_start_matches('.').to_string(),
        }),
    }
}

/// Any spreadsheet format calamine knows, detected from the bytes (a `.xlsx` that is really an
/// old `.xls` still reads).
fn read_spreadsheet(bytes: &[u8]) -> Result<RawBook, ReadError> {
    if bytes.is_empty() {
        return Err(not_a_workbook("the file is empty (0 bytes)"));
    }
    // A zip container says how large its members are before anything is inflated.
    zip_check::check(bytes)?;
    // calamine is third-party code fed with untrusted bytes: a panic inside it must become a
    // clean error for this one input, not end the program.
    match catch_unwind(AssertUnwindSafe(|| read_spreadsheet_inner(bytes))) {
        Ok(result) => result,
        Err(_) => Err(not_a_workbook(
            "its content is malformed (the spreadsheet reader failed on it)",
        )),
    }
}

fn read_spreadsheet_inner(bytes: &[u8]) -> Result<RawBook, ReadError> {
    let mut sheets = match calamine::open_workbook_auto_from_rs(Cursor::new(bytes)) {
        Ok(s) => s,
        Err(_) => return Err(diagnose(bytes)),
    };
    let metadata: Vec<(String, SheetType)> = sheets
        .sheets_metadata()
        .iter()
        .map(|s| (s.name.clone(), s.typ))
        .collect();
    let mut book = RawBook::default();
    let mut total = 0usize;
    for (name, typ) in metadata {
        // Chart and macro sheets hold no cells.
        if typ != SheetType::WorkSheet {
            continue;
        }
        let sheet = match &mut sheets {
            Sheets::Xlsx(x) => match read_xlsx_sheet(x, &name, total)? {
                Some(s) => s,
                None => continue,
            },
            other => read_dense_sheet(other, &name)?,
        };
        total += sheet.cell_count();
        if total > MAX_CELLS {
            return Err(too_many_cells());
        }
        book.sheets.push(sheet);
    }
    Ok(book)
}

fn not_a_workbook(detail: &str) -> ReadError {
    ReadError::NotAWorkbook {
        detail: detail.to_string(),
    }
}

fn too_many_cells() -> ReadError {
    ReadError::TooLarge {
        detail: format!("it holds more than {MAX_CELLS} non-empty cells"),
    }
}

/// Says what the bytes are, for a file no reader accepted.
fn diagnose(bytes: &[u8]) -> ReadError {
    const OLE: &[u8] = &[0xD0, 0xCF, 0x11, 0xE0, 0xA1, 0xB1, 0x1A, 0xE1];
    if bytes.starts_with(b"PK\x03\x04") || bytes.starts_with(b"PK\x05\x06") {
        if !has_zip_end_record(bytes) {
            return not_a_workbook(
                "the zip archive is incomplete (a truncated or partly copied file?)",
            );
        }
        let detail = match calamine::open_workbook_from_rs::<Xlsx<_>, _>(Cursor::new(bytes)) {
            Ok(_) => String::from("a zip archive the spreadsheet reader could not read"),
            Err(e) => format!("a zip archive, but not a spreadsheet workbook ({e})"),
        };
        return ReadError::NotAWorkbook { detail };
    }
    if bytes.starts_with(OLE) {
        return not_a_workbook(
            "an OLE container (the old .xls form, or a password-protected workbook) that holds no \
             readable workbook",
        );
    }
    let looks_like_text = bytes
        .iter()
        .take(4096)
        .all(|&b| b >= 0x20 || matches!(b, b'\n' | b'\r' | b'\t'));
    if looks_like_text {
        not_a_workbook(
            "it is plain text, not a spreadsheet (a CSV case must have a name ending in .csv)",
        )
    } else {
        not_a_workbook("it is neither a zip archive (xlsx, xlsm, ods) nor an xls file")
    }
}

/// Whether the zip end-of-central-directory record is present in the last 64 KiB + 22 bytes,
/// where the format puts it; a copy cut short lacks it.
fn has_zip_end_record(bytes: &[u8]) -> bool {
    let tail_start = bytes.len().saturating_sub(65_557);
    bytes[tail_start..].windows(4).any(|w| w == b"PK\x05\x06")
}

/// Streams one xlsx worksheet cell by cell (values and formulas together), so a sheet with
/// a far-away stray cell costs nothing; `None` for a part that is not a worksheet.
fn read_xlsx_sheet(
    x: &mut Xlsx<Cursor<&[u8]>>,
    name: &str,
    before: usize,
) -> Result<Option<RawSheet>, ReadError> {
    let fail = |e: XlsxError| ReadError::NotAWorkbook {
        detail: format!("sheet \"{name}\" cannot be read ({e})"),
    };
    let mut reader = match x.worksheet_cells_reader(name) {
        Ok(r) => r,
        Err(XlsxError::NotAWorksheet(_)) => return Ok(None),
        Err(e) => return Err(fail(e)),
    };
    let mut cells = Vec::new();
    while let Some(cell) = reader.next_cell_with_formula().map_err(fail)? {
        let has_formula = cell
            .formula
            .as_deref()
            .is_some_and(|f| !f.trim().is_empty());
        let value = if has_formula && is_empty_ref(&cell.value) {
            RawValue::Error(NO_CACHED_VALUE.to_string())
        } else {
            from_data_ref(&cell.value)
        };
        if value != RawValue::Empty {
            cells.push((cell.pos.0, cell.pos.1, value));
            if before + cells.len() > MAX_CELLS {
                return Err(too_many_cells());
            }
        }
    }
    Ok(Some(RawSheet::from_cells(name, cells)))
}

/// Reads one sheet of an xls or ods file through calamine's ranges.
fn read_dense_sheet(sheets: &mut Sheets<Cursor<&[u8]>>, name: &str) -> Result<RawSheet, ReadError> {
    let range = sheets
        .worksheet_range(name)
        .map_err(|e| ReadError::NotAWorkbook {
            detail: format!("sheet \"{name}\" cannot be read ({e})"),
        })?;
    let (r0, c0) = range.start().unwrap_or((0, 0));
    let mut cells: Vec<(u32, u32, RawValue)> = range
        .used_cells()
        .map(|(r, c, v)| (r0 + r as u32, c0 + c as u32, from_data(v)))
        .filter(|(_, _, v)| *v != RawValue::Empty)
        .collect();
    // A formula whose cell holds no value: the file stored no result for it. Formula ranges
    // are not available in every format; where they are not, cached values are all there is.
    if let Ok(formulas) = sheets.worksheet_formula(name) {
        let (fr0, fc0) = formulas.start().unwrap_or((0, 0));
        for (r, c, f) in formulas.used_cells() {
            if f.trim().is_empty() {
                continue;
            }
            let pos = (fr0 + r as u32, fc0 + c as u32);
            let empty = range.get_value(pos).is_none_or(is_empty_data);
            if empty {
                cells.push((pos.0, pos.1, RawValue::Error(NO_CACHED_VALUE.to_string())));
            }
        }
    }
    Ok(RawSheet::from_cells(name, cells))
}

fn is_empty_ref(v: &DataRef<'_>) -> bool {
    match v {
        DataRef::Empty => true,
        DataRef::String(s) => s.is_empty(),
        DataRef::SharedString(s) => s.is_empty(),
        _ => false,
    }
}

fn is_empty_data(v: &Data) -> bool {
    match v {
        Data::Empty => true,
        Data::String(s) => s.is_empty(),
        _ => false,
    }
}

const DATE_TIME: &str = "a date or time (format the cell as a plain number or as text)";

fn number(x: f64) -> RawValue {
    if x.is_finite() {
        RawValue::Number(x)
    } else {
        RawValue::Error(String::from("a number that is not finite"))
    }
}

fn text(s: &str) -> RawValue {
    if s.is_empty() {
        RawValue::Empty
    } else {
        checked_text(s)
    }
}

/// Text as a cell value, or an error value for text longer than a cell can hold (it could not
/// be written back into a result or errors workbook).
pub(crate) fn checked_text(s: &str) -> RawValue {
    let limit = crate::limits::MAX_TEXT_CHARS;
    if s.len() > limit && s.chars().count() > limit {
        RawValue::Error(format!(
            "a text of {} characters, longer than the {limit} a spreadsheet cell can hold",
            s.chars().count()
        ))
    } else {
        RawValue::Text(s.to_string())
    }
}

fn from_data_ref(v: &DataRef<'_>) -> RawValue {
    match v {
        DataRef::Int(i) => number(*i as f64),
        DataRef::Float(x) => number(*x),
        DataRef::String(s) => text(s),
        DataRef::SharedString(s) => text(s),
        DataRef::Bool(b) => RawValue::Bool(*b),
        DataRef::DateTime(_) | DataRef::DateTimeIso(_) | DataRef::DurationIso(_) => {
            RawValue::Error(DATE_TIME.to_string())
        }
        DataRef::Error(e) => RawValue::Error(e.to_string()),
        DataRef::Empty => RawValue::Empty,
    }
}

fn from_data(v: &Data) -> RawValue {
    match v {
        Data::Int(i) => number(*i as f64),
        Data::Float(x) => number(*x),
        Data::String(s) => text(s),
        Data::Bool(b) => RawValue::Bool(*b),
        Data::DateTime(_) | Data::DateTimeIso(_) | Data::DurationIso(_) => {
            RawValue::Error(DATE_TIME.to_string())
        }
        Data::Error(e) => RawValue::Error(e.to_string()),
        Data::Empty => RawValue::Empty,
    }
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    #[test]
    fn unknown_extension_is_refused() {
        let e = read_bytes(b"x", "docx").unwrap_err();
        assert!(
            matches!(e, ReadError::UnsupportedExtension { ref extension } if extension == "docx")
        );
        assert!(e.to_string().contains(".xlsx"));
    }

    #[test]
    fn empty_and_text_files_are_not_workbooks() {
        let e = read_bytes(b"", "xlsx").unwrap_err();
        assert!(matches!(e, ReadError::NotAWorkbook { .. }), "{e}");
        assert!(e.to_string().contains("empty"));
        let e = read_bytes(b"hello, world\n", "XLSX").unwrap_err();
        assert!(e.to_string().contains("plain text"), "{e}");
    }

    #[test]
    fn damaged_ole_container_is_not_a_workbook() {
        let mut bytes = vec![0xD0, 0xCF, 0x11, 0xE0, 0xA1, 0xB1, 0x1A, 0xE1];
        bytes.resize(1024, 0);
        let e = read_bytes(&bytes, "xls").unwrap_err();
        assert!(e.to_string().contains("OLE container"), "{e}");
    }

    #[test]
    fn truncated_zip_is_reported_as_incomplete() {
        let e = read_bytes(b"PK\x03\x04\x14\x00\x00\x00", ".xlsx").unwrap_err();
        assert!(e.to_string().contains("incomplete"), "{e}");
    }
}
