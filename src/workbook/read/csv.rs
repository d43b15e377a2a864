//! The sectioned CSV form: one UTF-8 file holding every sheet, each started by a row whose
//! first cell is the sheet's name in brackets, such as `[layers]`.
//!
//! Fields follow RFC 4180: comma-separated; a field that starts with `"` is quoted, may hold
//! commas, line breaks and `""` for one quote; records end in CRLF or LF. A UTF-8 byte order
//! mark is skipped. Every non-empty field becomes [`RawValue::Text`]; the parser accepts
//! numeric text wherever a number is expected.
//!
//! Positions: a cell's row is its record's index in the whole file (0-based), its column the
//! field's index, so `layers!C17` is field C of record 17, where a spreadsheet program that
//! opens the CSV shows it, and, without quoted line breaks, line 17 in a text editor.

use super::ReadError;
use crate::limits::{MAX_CELLS, MAX_CSV_ROWS};
use crate::workbook::raw::{RawBook, RawSheet, RawValue};

/// One record: its 1-based starting line and its fields.
/// Cells of the section being read: its name and (row, column, value) triples.
type Section = (String, Vec<(u32, u32, RawValue)>);

struct Record {
    /// 0-based index of the record in the file (blank records are not kept but counted).
    index: usize,
    line: usize,
    fields: Vec<String>,
}

/// Reads the sectioned CSV form into one [`RawSheet`] per section.
pub(super) fn read_csv(bytes: &[u8]) -> Result<RawBook, ReadError> {
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    let text = std::str::from_utf8(bytes).map_err(|e| {
        let line = 1 + bytes[..e.valid_up_to()]
            .iter()
            .filter(|&&b| b == b'\n')
            .count();
        ReadError::Csv {
            line,
            detail: String::from(
                "the text is not UTF-8 (save the file as \"CSV UTF-8\" in the spreadsheet program)",
            ),
        }
    })?;
    let records = records(text)?;
    let mut book = RawBook::default();
    let mut current: Option<Section> = None;
    for record in &records {
        let row = u32::try_from(record.index).map_err(|_| ReadError::Csv {
            line: record.line,
            detail: String::from("the file has too many rows"),
        })?;
        if let Some(name) = record.fields.first().and_then(|f| section_name(f)) {
            if let Some((n, cells)) = current.take() {
                book.sheets.push(RawSheet::from_cells(&n, cells));
            }
            current = Some((name.to_string(), Vec::new()));
            continue;
        }
        let blank = record.fields.iter().all(|f| f.trim().is_empty());
        match current.as_mut() {
            Some((_, cells)) => {
                for (col, field) in record.fields.iter().enumerate() {
                    if field.is_empty() {
                        continue;
                    }
                    let col = u32::try_from(col).map_err(|_| ReadError::Csv {
                        line: record.line,
                        detail: String::from("the row has too many fields"),
                    })?;
                    cells.push((row, col, super::checked_text(field)));
                }
            }
            None if blank => {}
            None => {
                let hint = if record.fields.len() == 1 && record.fields[0].contains(';') {
                    " (the file seems to use ; between fields; dampfront reads comma-separated CSV)"
                } else {
                    ""
                };
                return Err(ReadError::Csv {
                    line: record.line,
                    detail: format!(
                        "this row comes before the first sheet line such as [case]{hint}"
                    ),
                });
            }
        }
    }
    if let Some((n, cells)) = current.take() {
        book.sheets.push(RawSheet::from_cells(&n, cells));
    }
    if book.sheets.is_empty() {
        return Err(ReadError::Csv {
            line: 1,
            detail: String::from(
                "no sheet line such as [case] or [layers] was found; a CSV case lists its sheets \
                 one after another, each started by its name in brackets",
            ),
        });
    }
    Ok(book)
}

/// `[name]` (white space around it allowed) gives `name`, trimmed.
fn section_name(field: &str) -> Option<&str> {
    let t = field.trim();
    let inner = t.strip_prefix('[')?.strip_suffix(']')?.trim();
    (!inner.is_empty()).then_some(inner)
}

fn too_large(detail: String) -> ReadError {
    ReadError::TooLarge { detail }
}

/// Splits the text into records per RFC 4180. Records whose fields are all empty are counted
/// but not kept; more than [`MAX_CSV_ROWS`] records or [`MAX_CELLS`] non-empty fields are
/// refused before they cost memory.
fn records(text: &str) -> Result<Vec<Record>, ReadError> {
    let mut out: Vec<Record> = Vec::new();
    let mut index = 0usize;
    let mut non_empty = 0usize;
    let mut keep = |out: &mut Vec<Record>, mut record: Record| -> Result<(), ReadError> {
        record.index = index;
        index += 1;
        if index > MAX_CSV_ROWS {
            return Err(too_large(format!("it has more than {MAX_CSV_ROWS} lines")));
        }
        let filled = record.fields.iter().filter(|f| !f.is_empty()).count();
        if filled > 0 {
            non_empty += filled;
            if non_empty > MAX_CELLS {
                return Err(too_large(format!(
                    "it holds more than {MAX_CELLS} non-empty fields"
                )));
            }
            out.push(record);
        }
        Ok(())
    };
    let mut fields = Vec::new();
    let mut field = String::new();
    let mut line = 1usize;
    let mut record_line = 1usize;
    let mut chars = text.chars().peekable();
    // Whether the current field started with a quote, and whether that quote is still open.
    let mut quoted = false;
    let mut in_quotes = false;
    let mut after_quote = false;
    let mut any = false;
    while let Some(ch) = chars.next() {
        any = true;
        if in_quotes {
            match ch {
                '"' if chars.peek() == Some(&'"') => {
                    chars.next();
                    field.push('"');
                }
                '"' => {
                    in_quotes = false;
                    after_quote = true;
                }
                '\n' => {
                    line += 1;
                    field.push('\n');
                }
                _ => field.push(ch),
            }
            continue;
        }
        match ch {
            ',' => {
                fields.push(std::mem::take(&mut field));
                quoted = false;
                after_quote = false;
            }
            '\r' | '\n' => {
                if ch == '\r' && chars.peek() == Some(&'\n') {
                    chars.next();
                }
                fields.push(std::mem::take(&mut field));
                let record = Record {
                    index: 0,
                    line: record_line,
                    fields: std::mem::take(&mut fields),
                };
                keep(&mut out, record)?;
                quoted = false;
                after_quote = false;
                any = false;
                line += 1;
                record_line = line;
            }
            '"' if field.is_empty() && !quoted => {
                quoted = true;
                in_quotes = true;
            }
            _ if after_quote => {
                if !ch.is_whitespace() {
                    return Err(ReadError::Csv {
                        line,
                        detail: String::from(
                            "text follows the closing quote of a quoted field (write \"\" for a \
                             quote inside it)",
                        ),
                    });
                }
            }
            _ => field.push(ch),
        }
    }
    if in_quotes {
        return Err(ReadError::Csv {
            line: record_line,
            detail: String::from("a quoted field is not closed (a \" is missing)"),
        });
    }
    if any {
        fields.push(field);
        let record = Record {
            index: 0,
            line: record_line,
            fields,
        };
        keep(&mut out, record)?;
    }
    Ok(out)
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    fn fields(text: &str) -> Vec<Vec<String>> {
        records(text)
            .unwrap()
            .into_iter()
            .map(|r| r.fields)
            .collect()
    }

    #[test]
    fn rfc4180_quoting() {
        // RFC 4180 section 2, rules 5 to 7: quoted fields may hold commas, line breaks and "".
        let got = fields("a,\"b,c\",\"say \"\"hi\"\"\"\r\n\"two\nlines\",x\n");
        assert_eq!(
            got,
            vec![
                vec!["a".to_string(), "b,c".into(), "say \"hi\"".into()],
                vec!["two\nlines".to_string(), "x".into()],
            ]
        );
    }

    #[test]
    fn last_record_without_line_break_and_empty_fields() {
        // A record of empty fields only is counted (rows keep their numbers) but not kept.
        let got: Vec<(usize, Vec<String>)> = records("a,,b\n,\nc")
            .unwrap()
            .into_iter()
            .map(|r| (r.index, r.fields))
            .collect();
        assert_eq!(
            got,
            vec![
                (0, vec!["a".to_string(), String::new(), "b".into()]),
                (2, vec!["c".to_string()]),
            ]
        );
    }

    #[test]
    fn many_lines_and_many_fields_are_refused_before_they_cost_memory() {
        // One more line than the limit, every one empty: refused although nothing is kept.
        let text = "\n".repeat(MAX_CSV_ROWS + 1);
        let e = read_csv(text.as_bytes()).unwrap_err();
        assert!(matches!(e, ReadError::TooLarge { .. }), "{e}");
        assert!(e.to_string().contains("lines"), "{e}");
        let mut text = String::from("[case]\n");
        text.push_str(&"x,".repeat(MAX_CELLS + 1));
        let e = read_csv(text.as_bytes()).unwrap_err();
        assert!(e.to_string().contains("non-empty fields"), "{e}");
    }

    #[test]
    fn text_longer_than_a_cell_holds_becomes_an_error_value() {
        let long = "y".repeat(crate::limits::MAX_TEXT_CHARS + 1);
        let book = read_csv(format!("[case]\ntitle,{long}\n").as_bytes()).unwrap();
        let (v, at) = book.sheets[0].get(1, 1);
        assert!(
            matches!(v, RawValue::Error(e) if e.contains("32767")),
            "{v:?}"
        );
        assert_eq!(at.to_string(), "case!B2");
    }

    #[test]
    fn unclosed_quote_names_its_line() {
        let e = records("a\nb,\"open\n\nmore").err().unwrap();
        assert!(matches!(e, ReadError::Csv { line: 2, .. }), "{e}");
    }

    #[test]
    fn sections_start_sheets_and_rows_are_absolute() {
        let book =
            read_csv(b"\xEF\xBB\xBF[case]\ntitle,Demo\n\n[ Layers ]\nmaterial\npine\n").unwrap();
        assert_eq!(book.sheets.len(), 2);
        assert_eq!(book.sheets[0].name, "case");
        assert_eq!(book.sheets[1].name, "Layers");
        let (v, at) = book.sheets[1].get(5, 0);
        assert_eq!(v, &RawValue::Text("pine".into()));
        assert_eq!(at.to_string(), "Layers!A6");
    }

    #[test]
    fn rows_before_the_first_section_are_refused() {
        let e = read_csv(b"\n\ntitle;Demo\n[case]\n").unwrap_err();
        assert!(matches!(e, ReadError::Csv { line: 3, .. }), "{e}");
        assert!(e.to_string().contains(';'));
    }

    #[test]
    fn not_utf8_is_refused() {
        let e = read_csv(b"[case]\ntitle,K\xF6ln\n").unwrap_err();
        assert!(matches!(e, ReadError::Csv { line: 2, .. }), "{e}");
    }
}
