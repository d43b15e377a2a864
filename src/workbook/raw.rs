//! A file-independent grid of cells that remembers where each cell came from.
//!
//! Every reader (xlsx, xls, ods, csv) produces the same [`RawBook`]: sheets in file order,
//! each holding only its non-empty cells at their absolute, 0-based positions. Nothing is
//! interpreted here: a number typed as text stays text, so the parser can say exactly what it
//! found and where.

use std::fmt;

/// Where a cell is: sheet name as the user wrote it, 0-based absolute row and column.
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub struct CellRef {
    /// Sheet name, exactly as written in the file.
    pub sheet: String,
    /// Row, 0-based (row 1 in a spreadsheet is 0).
    pub row: u32,
    /// Column, 0-based (column A is 0).
    pub col: u32,
}

impl CellRef {
    /// A reference to `row`, `col` (0-based) on `sheet`.
    pub fn new(sheet: &str, row: u32, col: u32) -> CellRef {
        CellRef {
            sheet: sheet.to_string(),
            row,
            col,
        }
    }

    /// The cell in A1 style without the sheet, such as `C4`.
    pub fn a1(&self) -> String {
        a1(self.row, self.col)
    }
}

impl fmt::Display for CellRef {
    /// `sheet!C4`: the sheet as written, then the cell in A1 style (1-based row).
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}!{}", self.sheet, self.a1())
    }
}

/// Column letters for a 0-based column: 0 is `A`, 25 is `Z`, 26 is `AA`.
pub fn column_letters(col: u32) -> String {
    // Bijective base 26: there is no zero digit, so subtract one before each division.
    let mut n = u64::from(col) + 1;
    let mut letters = Vec::new();
    while n > 0 {
        let rem = ((n - 1) % 26) as u8;
        letters.push(b'A' + rem);
        n = (n - 1) / 26;
    }
    letters.reverse();
    letters.into_iter().map(char::from).collect()
}

/// A cell in A1 style from a 0-based row and column: `a1(3, 2)` is `C4`.
pub fn a1(row: u32, col: u32) -> String {
    format!("{}{}", column_letters(col), u64::from(row) + 1)
}

/// The value of one cell, as the file stored it.
#[derive(Debug, Clone, PartialEq)]
pub enum RawValue {
    /// No value.
    Empty,
    /// A numeric cell (or a formula's cached numeric result).
    Number(f64),
    /// A text cell. CSV fields are always text.
    Text(String),
    /// A logical cell.
    Bool(bool),
    /// A cell that stands for no usable value: a spreadsheet error such as `#DIV/0!`, a formula
    /// with no cached value, or a date or time (which is never read as a plain number, because
    /// a serial day count silently taken for hours would be a wrong input).
    Error(String),
}

impl RawValue {
    /// True for [`RawValue::Empty`] and for text that is only white space.
    pub fn is_blank(&self) -> bool {
        match self {
            RawValue::Empty => true,
            RawValue::Text(s) => s.trim().is_empty(),
            _ => false,
        }
    }

    /// How the value reads in a message: text in quotes, numbers as written, TRUE/FALSE,
    /// errors by their text.
    pub fn describe(&self) -> String {
        match self {
            RawValue::Empty => String::from("an empty cell"),
            RawValue::Number(x) => crate::text::as_typed(*x),
            RawValue::Text(s) => format!("\"{}\"", s.trim()),
            RawValue::Bool(true) => String::from("TRUE"),
            RawValue::Bool(false) => String::from("FALSE"),
            RawValue::Error(e) => e.clone(),
        }
    }
}

static EMPTY: RawValue = RawValue::Empty;

/// One non-empty row of a sheet: its absolute row and its non-empty cells by column.
#[derive(Debug, Clone, PartialEq)]
pub struct RawRow {
    /// Row, 0-based, absolute.
    pub row: u32,
    /// Non-empty cells as (0-based column, value), in increasing column order.
    pub cells: Vec<(u32, RawValue)>,
}

impl RawRow {
    /// The value at column `col`, [`RawValue::Empty`] where there is none.
    pub fn get(&self, col: u32) -> &RawValue {
        match self.cells.binary_search_by_key(&col, |(c, _)| *c) {
            Ok(i) => &self.cells[i].1,
            Err(_) => &EMPTY,
        }
    }

    /// True when every cell of the row is blank (see [`RawValue::is_blank`]).
    pub fn is_blank(&self) -> bool {
        self.cells.iter().all(|(_, v)| v.is_blank())
    }
}

/// One sheet: its name as written and its non-empty rows in increasing row order.
#[derive(Debug, Clone, PartialEq)]
pub struct RawSheet {
    /// Sheet name, exactly as written in the file.
    pub name: String,
    /// Rows holding at least one non-empty cell, in increasing row order.
    pub rows: Vec<RawRow>,
}

impl RawSheet {
    /// A sheet from cells `(row, col, value)` in any order. Empty values are dropped; where
    /// one position is given twice, the later value wins.
    pub fn from_cells(
        name: &str,
        cells: impl IntoIterator<Item = (u32, u32, RawValue)>,
    ) -> RawSheet {
        let mut all: Vec<(u32, u32, RawValue)> = cells
            .into_iter()
            .filter(|(_, _, v)| *v != RawValue::Empty)
            .collect();
        // A stable sort keeps later duplicates after earlier ones.
        all.sort_by_key(|(r, c, _)| (*r, *c));
        let mut rows: Vec<RawRow> = Vec::new();
        for (r, c, v) in all {
            match rows.last_mut() {
                Some(last) if last.row == r => match last.cells.last_mut() {
                    Some(cell) if cell.0 == c => cell.1 = v,
                    _ => last.cells.push((c, v)),
                },
                _ => rows.push(RawRow {
                    row: r,
                    cells: vec![(c, v)],
                }),
            }
        }
        RawSheet {
            name: name.to_string(),
            rows,
        }
    }

    /// Rows that hold at least one non-blank cell, in order.
    pub fn non_empty_rows(&self) -> impl Iterator<Item = &RawRow> {
        self.rows.iter().filter(|r| !r.is_blank())
    }

    /// The row with absolute index `row`, if it holds any cell.
    pub fn row(&self, row: u32) -> Option<&RawRow> {
        self.rows
            .binary_search_by_key(&row, |r| r.row)
            .ok()
            .map(|i| &self.rows[i])
    }

    /// The value at (`row`, `col`) with its reference; [`RawValue::Empty`] where there is none.
    pub fn get(&self, row: u32, col: u32) -> (&RawValue, CellRef) {
        let value = self.row(row).map_or(&EMPTY, |r| r.get(col));
        (value, self.cell_ref(row, col))
    }

    /// The reference of (`row`, `col`) on this sheet.
    pub fn cell_ref(&self, row: u32, col: u32) -> CellRef {
        CellRef::new(&self.name, row, col)
    }

    /// Number of non-empty cells.
    pub fn cell_count(&self) -> usize {
        self.rows.iter().map(|r| r.cells.len()).sum()
    }
}

/// A whole workbook: its sheets in file order.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct RawBook {
    /// Sheets in the order the file lists them.
    pub sheets: Vec<RawSheet>,
}

impl RawBook {
    /// The first sheet whose name matches `name` case-insensitively after trimming spaces.
    pub fn sheet(&self, name: &str) -> Option<&RawSheet> {
        let want = name.trim().to_lowercase();
        self.sheets
            .iter()
            .find(|s| s.name.trim().to_lowercase() == want)
    }
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    #[test]
    fn column_letters_follow_spreadsheet_naming() {
        // Spreadsheet column naming (A..Z, AA.., XFD is the last Excel column, 16384th): common practice.
        assert_eq!(column_letters(0), "A");
        assert_eq!(column_letters(25), "Z");
        assert_eq!(column_letters(26), "AA");
        assert_eq!(column_letters(51), "AZ");
        assert_eq!(column_letters(52), "BA");
        assert_eq!(column_letters(701), "ZZ");
        assert_eq!(column_letters(702), "AAA");
        assert_eq!(column_letters(16383), "XFD");
    }

    #[test]
    fn cell_ref_displays_sheet_and_a1() {
        let c = CellRef::new("Layers", 3, 2);
        assert_eq!(c.to_string(), "Layers!C4");
        assert_eq!(c.a1(), "C4");
    }

    #[test]
    fn from_cells_sorts_drops_empty_and_keeps_last_duplicate() {
        let s = RawSheet::from_cells(
            "s",
            vec![
                (2, 1, RawValue::Number(3.0)),
                (0, 0, RawValue::Text("a".into())),
                (2, 0, RawValue::Empty),
                (0, 0, RawValue::Text("b".into())),
            ],
        );
        assert_eq!(s.rows.len(), 2);
        assert_eq!(s.get(0, 0).0, &RawValue::Text("b".into()));
        assert_eq!(s.get(2, 1).0, &RawValue::Number(3.0));
        assert_eq!(s.get(2, 0).0, &RawValue::Empty);
        assert_eq!(s.get(9, 9).1.to_string(), "s!J10");
    }

    #[test]
    fn blank_rows_are_skipped() {
        let s = RawSheet::from_cells(
            "s",
            vec![
                (0, 0, RawValue::Text("  ".into())),
                (1, 0, RawValue::Number(1.0)),
            ],
        );
        let rows: Vec<u32> = s.non_empty_rows().map(|r| r.row).collect();
        assert_eq!(rows, vec![1]);
    }
}
