//! Finding the format's sheets in a book, and reading them as key sheets (key in A, value in
//! B) or table sheets (header in the first non-empty row, one data row per item).

use std::collections::HashMap;

use super::context::{Ctx, Loc};
use crate::workbook::raw::{RawBook, RawRow, RawSheet, RawValue, a1, column_letters};

static EMPTY: RawValue = RawValue::Empty;

/// Sheet names and headers are matched this way: case-insensitive, after trimming spaces.
pub(super) fn canonical(s: &str) -> String {
    s.trim().to_lowercase()
}

/// A format sheet as found in the book (or not found).
#[derive(Debug, Clone, Copy)]
pub(super) struct Found<'b> {
    pub sheet: Option<&'b RawSheet>,
    /// Position in the book + 1 (0 when missing), for ordering messages.
    pub order: usize,
}

/// The book's format sheets by canonical name. Unknown sheets are warned about; a second sheet
/// with the same canonical name is a problem.
pub(super) fn find_sheets<'b>(
    book: &'b RawBook,
    ctx: &mut Ctx,
) -> HashMap<&'static str, Found<'b>> {
    let mut found: HashMap<&'static str, Found<'b>> = HashMap::new();
    for (i, sheet) in book.sheets.iter().enumerate() {
        let name = canonical(&sheet.name);
        let at = Loc {
            sheet: sheet.name.clone(),
            cell: String::new(),
            context: String::new(),
            order: (i + 1, 0, 0),
        };
        match crate::workbook::schema::SHEETS
            .iter()
            .map(|s| s.name)
            .find(|k| *k == name)
        {
            Some(k) => {
                if let Some(first) = found.get(&k).and_then(|f| f.sheet) {
                    ctx.problem(
                        &at,
                        None,
                        format!(
                            "a second sheet named {k} (the first is \"{}\"; sheet names are \
                             matched without regard to capitals and spaces); keep only one",
                            first.name
                        ),
                    );
                } else {
                    found.insert(
                        k,
                        Found {
                            sheet: Some(sheet),
                            order: i + 1,
                        },
                    );
                }
            }
            None => ctx.warn(
                &at,
                "this sheet is not part of the case workbook format; it was not read",
            ),
        }
    }
    found
}

/// A whole-sheet location for a format sheet, found or not.
pub(super) fn sheet_loc(name: &str, found: Found<'_>) -> Loc {
    Loc {
        sheet: found
            .sheet
            .map_or_else(|| name.to_string(), |s| s.name.clone()),
        cell: String::new(),
        context: String::new(),
        order: (found.order, 0, 0),
    }
}

fn cell_loc(sheet: &str, order: usize, row: u32, col: u32) -> Loc {
    Loc {
        sheet: sheet.to_string(),
        cell: a1(row, col),
        context: String::new(),
        order: (order, row, col),
    }
}

/// A key sheet: each key's row and value. Keys are matched like headers.
#[derive(Debug)]
pub(super) struct KeySheet<'b> {
    pub whole: Loc,
    order: usize,
    entries: HashMap<&'static str, (u32, &'b RawValue)>,
}

impl<'b> KeySheet<'b> {
    /// Reads `found` as a key sheet; unknown keys are warned about, a key given twice is a
    /// problem at its second row.
    pub fn read(
        name: &str,
        found: Found<'b>,
        known: &[&'static str],
        ctx: &mut Ctx,
    ) -> KeySheet<'b> {
        let whole = sheet_loc(name, found);
        let mut entries: HashMap<&'static str, (u32, &'b RawValue)> = HashMap::new();
        if let Some(sheet) = found.sheet {
            for row in sheet.non_empty_rows() {
                let key = row.get(0);
                let value = row.get(1);
                let at_key = cell_loc(&sheet.name, found.order, row.row, 0);
                if key.is_blank() {
                    if !value.is_blank() {
                        ctx.warn(
                            &cell_loc(&sheet.name, found.order, row.row, 1),
                            "a value without a key in column A; it was ignored",
                        );
                    }
                    continue;
                }
                let key_text = match key {
                    RawValue::Text(s) => canonical(s),
                    other => other.describe(),
                };
                match known.iter().find(|k| **k == key_text) {
                    Some(k) => {
                        if let Some((first, _)) = entries.get(k) {
                            ctx.problem(
                                &at_key,
                                None,
                                format!(
                                    "the key {k} is given twice (first in row {}); give it once",
                                    first + 1
                                ),
                            );
                        } else {
                            entries.insert(k, (row.row, value));
                            // In a CSV, `profile_hours,0,24,72` splits the list at its commas:
                            // the later times land in the notes columns.
                            let numeric = match row.get(2) {
                                RawValue::Number(_) => true,
                                RawValue::Text(t) => t.trim().parse::<f64>().is_ok(),
                                _ => false,
                            };
                            if *k == "profile_hours" && numeric {
                                ctx.warn(
                                    &cell_loc(&sheet.name, found.order, row.row, 2),
                                    "profile_hours goes on past column B (a CSV line splits the \
                                     list at its commas): only column B was read; put the whole \
                                     list in one cell, quoted in a CSV (\"0, 24, 72\") or with \
                                     semicolons (0; 24; 72)",
                                );
                            }
                        }
                    }
                    None => ctx.warn(
                        &at_key,
                        format!(
                            "unknown key {}; it was ignored (known keys: {})",
                            key.describe(),
                            known.join(", ")
                        ),
                    ),
                }
            }
        }
        KeySheet {
            whole,
            order: found.order,
            entries,
        }
    }

    /// The value of `key` (empty when not given) and where it is: the value cell in column B
    /// where the key has a row, otherwise the whole sheet.
    pub fn get(&self, key: &str) -> (&'b RawValue, Loc) {
        match self.entries.get(key) {
            Some((row, v)) => (*v, cell_loc(&self.whole.sheet, self.order, *row, 1)),
            None => (&EMPTY, self.whole.clone()),
        }
    }
}

/// A table sheet: its header's known columns and its data rows.
#[derive(Debug)]
pub(super) struct Table<'b> {
    pub whole: Loc,
    pub present: bool,
    order: usize,
    header_row: Option<u32>,
    /// Column of the header's first cell, where row-level messages point.
    first_col: u32,
    columns: HashMap<&'static str, u32>,
    /// Header names that matched no known column, as written (for hints on missing ones).
    unknown: Vec<String>,
    pub rows: Vec<&'b RawRow>,
}

impl<'b> Table<'b> {
    /// Reads `found` as a table sheet with the columns `known`.
    ///
    /// Unknown headers are warned about, a header given twice is a problem at the second.
    /// A row counts as data when a known column holds a value in it; rows with values only
    /// under unknown or unheaded columns are skipped (those columns are warned about).
    pub fn read(name: &str, found: Found<'b>, known: &[&'static str], ctx: &mut Ctx) -> Table<'b> {
        let whole = sheet_loc(name, found);
        let mut table = Table {
            whole,
            present: found.sheet.is_some(),
            order: found.order,
            header_row: None,
            first_col: 0,
            columns: HashMap::new(),
            unknown: Vec::new(),
            rows: Vec::new(),
        };
        let Some(sheet) = found.sheet else {
            return table;
        };
        let mut rows = sheet.non_empty_rows();
        let Some(header) = rows.next() else {
            return table;
        };
        table.header_row = Some(header.row);
        let mut headed = Vec::new();
        for (col, v) in &header.cells {
            if v.is_blank() {
                continue;
            }
            if table.columns.is_empty() && headed.is_empty() {
                table.first_col = *col;
            }
            headed.push(*col);
            let at = cell_loc(&sheet.name, found.order, header.row, *col);
            let name = match v {
                RawValue::Text(s) => canonical(s),
                other => other.describe(),
            };
            match known.iter().find(|k| **k == name) {
                Some(k) => {
                    if let Some(first) = table.columns.get(k) {
                        ctx.problem(
                            &at,
                            None,
                            format!(
                                "the column {k} appears twice in the header (first in column \
                                 {}); keep one",
                                column_letters(*first)
                            ),
                        );
                    } else {
                        table.columns.insert(k, *col);
                    }
                }
                None => {
                    table.unknown.push(v.describe());
                    ctx.warn(
                        &at,
                        format!(
                            "unknown column {}; it was ignored (known columns: {})",
                            v.describe(),
                            known.join(", ")
                        ),
                    )
                }
            }
        }
        let mut warned_unheaded: Vec<u32> = Vec::new();
        for row in rows {
            for (col, v) in &row.cells {
                if !v.is_blank() && !headed.contains(col) && !warned_unheaded.contains(col) {
                    warned_unheaded.push(*col);
                    ctx.warn(
                        &cell_loc(&sheet.name, found.order, row.row, *col),
                        format!(
                            "column {} holds values but has no header; they were ignored",
                            column_letters(*col)
                        ),
                    );
                }
            }
            let data = table.columns.values().any(|c| !row.get(*c).is_blank());
            if data {
                table.rows.push(row);
            }
        }
        table
    }

    /// Whether the header has `column`.
    pub fn has(&self, column: &str) -> bool {
        self.columns.contains_key(column)
    }

    /// The value of `column` in `row` and its cell; for a column not in the header, an empty
    /// value at the whole sheet with the row named in the context.
    pub fn cell(&self, row: &'b RawRow, column: &str) -> (&'b RawValue, Loc) {
        match self.columns.get(column) {
            Some(col) => (
                row.get(*col),
                cell_loc(&self.whole.sheet, self.order, row.row, *col),
            ),
            None => (
                &EMPTY,
                Loc {
                    context: format!("row {}, column {column} (not in the header)", row.row + 1),
                    order: (self.order, row.row, 0),
                    ..self.whole.clone()
                },
            ),
        }
    }

    /// Where a table without data rows would take its first one (the cell under the header's
    /// first cell; A1, where the header goes, on a sheet without one), for a message that the
    /// table is empty; the whole sheet when there is no such sheet.
    pub fn first_row_loc(&self) -> Loc {
        match self.header_row {
            Some(header) => cell_loc(&self.whole.sheet, self.order, header + 1, self.first_col),
            None if self.present => cell_loc(&self.whole.sheet, self.order, 0, 0),
            None => self.whole.clone(),
        }
    }

    /// The cell where a message about a whole row points: the header's first column.
    pub fn row_loc(&self, row: &RawRow) -> Loc {
        cell_loc(&self.whole.sheet, self.order, row.row, self.first_col)
    }

    /// Records a problem for each of `required` missing from the header (when the sheet has
    /// data), and marks the column failed so later checks do not repeat it.
    pub fn require(&self, required: &[&'static str], kind: u8, ctx: &mut Ctx) {
        if self.header_row.is_none() {
            return;
        }
        for column in required {
            if !self.has(column) {
                let row = self.header_row.map_or(1, |r| r + 1);
                let hint = if self.unknown.is_empty() {
                    String::new()
                } else {
                    format!(
                        "; the header's unknown columns are {}",
                        self.unknown.join(", ")
                    )
                };
                ctx.problem(
                    &Loc {
                        order: (self.order, self.header_row.unwrap_or(0), 0),
                        ..self.whole.clone()
                    },
                    None,
                    format!(
                        "the header (row {row}) has no column {column}, which is required{hint}"
                    ),
                );
                ctx.poison_column(kind, column);
            }
        }
    }

    /// Whether the sheet has no header row at all (missing or empty).
    pub fn is_empty(&self) -> bool {
        self.header_row.is_none()
    }
}
