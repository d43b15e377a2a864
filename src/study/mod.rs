//! Parameter studies: the `variants` sheet of a case workbook.
//!
//! Each data row of `variants` is a case of its own: the base workbook with some input values
//! replaced. Column `variant` names the row; every other header is a path to the value it
//! replaces, `case.KEY` or `SHEET.COLUMN[ROW]` (ROW counts the sheet's data rows from 1, `*`
//! is every row), checked against [`crate::workbook::schema`]. The replacement happens on the
//! raw cells ([`RawBook`]) before parsing, so a variant's values get the same units, range
//! checks and cell-named messages as the base case; a problem at a replaced cell is then told
//! at the variants cell that gave it (`variants!C4: layers.thickness_mm[1]: ...`).
//!
//! A variant whose path or value is bad does not stop the others: it is marked
//! [`Status::InputError`] with its problems, and every other variant still runs
//! ([`run::solve_all`]).

pub mod run;

use std::collections::HashMap;

use crate::workbook::parse::{self, InputProblem, Parsed};
use crate::workbook::raw::{RawBook, RawRow, RawSheet, RawValue, a1};
use crate::workbook::schema::{self, Layout};

/// How a variant ended, as the `status` column of the result's `variants` sheet writes it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Status {
    /// It ran to its end (or target).
    Ok,
    /// A target was set and the end came first.
    TargetNotReached,
    /// A path or value of the variant is bad; it did not run.
    InputError,
    /// The solver stopped (out of time, too many steps, cancelled); no figures.
    SolverError,
}

impl Status {
    /// The word in the `status` column.
    pub fn word(self) -> &'static str {
        match self {
            Status::Ok => "ok",
            Status::TargetNotReached => "target_not_reached",
            Status::InputError => "input_error",
            Status::SolverError => "solver_error",
        }
    }
}

/// Which rows of a table a path names.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Rows {
    /// One data row, counted from 1.
    One(usize),
    /// Every data row (`*`).
    All,
}

/// Where a variant's value goes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Target {
    /// A key of the `case` sheet.
    Key(&'static str),
    /// A column of a table sheet, at some rows.
    Column {
        /// The sheet (`layers`, `materials`, `schedule`).
        sheet: &'static str,
        /// The column, as the schema names it.
        column: &'static str,
        /// Which data rows.
        rows: Rows,
    },
}

/// Reads a path such as `layers.thickness_mm[1]`, `schedule.dry_bulb_c[*]` or
/// `case.end_hours` (compared without regard to capitals and spaces), or says what is wrong
/// with it.
pub fn parse_path(text: &str) -> Result<Target, String> {
    let compact: String = text
        .chars()
        .filter(|c| !c.is_whitespace())
        .collect::<String>()
        .to_lowercase();
    let (sheet_name, rest) = compact.split_once('.').ok_or_else(|| {
        String::from(
            "a path is case.KEY or SHEET.COLUMN[ROW], such as layers.thickness_mm[1] or \
             schedule.dry_bulb_c[*]",
        )
    })?;
    let varied = ["case", "layers", "materials", "schedule"];
    let Some(sheet) = schema::sheet(sheet_name).filter(|s| varied.contains(&s.name)) else {
        return Err(format!(
            "unknown sheet {sheet_name} in the path; a variant can change {}",
            varied.join(", ")
        ));
    };
    let (name, index) = match rest.split_once('[') {
        Some((name, tail)) => {
            let Some(inner) = tail.strip_suffix(']') else {
                return Err(String::from("the row must end with ], as in [1] or [*]"));
            };
            (name, Some(inner))
        }
        None => (rest, None),
    };
    let Some(field) = sheet.field(name) else {
        return Err(format!(
            "{} has no {} {name} (known: {})",
            sheet.name,
            if sheet.layout == Layout::Keys {
                "key"
            } else {
                "column"
            },
            sheet.names().join(", ")
        ));
    };
    match (sheet.layout, index) {
        (Layout::Keys, None) => Ok(Target::Key(field.name)),
        (Layout::Keys, Some(_)) => {
            Err(format!("a case key has no rows: write case.{}", field.name))
        }
        (Layout::Table, None) => Err(format!(
            "give the row: {}.{}[1] for the first data row, or [*] for every row",
            sheet.name, field.name
        )),
        (Layout::Table, Some("*")) => Ok(Target::Column {
            sheet: sheet.name,
            column: field.name,
            rows: Rows::All,
        }),
        (Layout::Table, Some(n)) => match n.parse::<usize>() {
            Ok(n) if n >= 1 => Ok(Target::Column {
                sheet: sheet.name,
                column: field.name,
                rows: Rows::One(n),
            }),
            _ => Err(format!(
                "the row must be a whole number from 1 or *, found [{n}]"
            )),
        },
    }
}

/// One value a variant replaces.
#[derive(Debug, Clone, PartialEq)]
pub struct Override {
    /// The header as written.
    pub path: String,
    /// The value as typed.
    pub value: RawValue,
    /// Its cell on the variants sheet, such as `C4`.
    pub cell: String,
}

impl Override {
    /// `path=value`, for the `overrides` column.
    pub fn describe(&self) -> String {
        let value = match &self.value {
            RawValue::Text(s) => s.trim().to_string(),
            v => v.describe(),
        };
        format!("{}={value}", self.path.trim())
    }
}

/// One row of the variants sheet.
#[derive(Debug, Clone, PartialEq)]
pub struct Variant {
    /// Its name (`variant N` when the `variant` cell is empty).
    pub name: String,
    /// The cell of its row's first column, where messages about the whole variant point.
    pub cell: String,
    /// What it replaces, in column order.
    pub overrides: Vec<Override>,
}

impl Variant {
    /// Its overrides as `path=value; ...`.
    pub fn overrides_text(&self) -> String {
        self.overrides
            .iter()
            .map(Override::describe)
            .collect::<Vec<_>>()
            .join("; ")
    }
}

/// The variants sheet of a book: its name as written and its rows in order.
#[derive(Debug, Clone, PartialEq)]
pub struct Study {
    /// The sheet's name as written.
    pub sheet: String,
    /// The variants, in input order.
    pub variants: Vec<Variant>,
    /// Header paths with no value under them in any variant: (header cell, path as typed).
    pub unused_columns: Vec<(String, String)>,
}

fn canonical(v: &RawValue) -> String {
    match v {
        RawValue::Text(s) => s.trim().to_lowercase(),
        other => other.describe(),
    }
}

/// The book's variants sheet, or `None` when it has none (or one with no data row).
pub fn read(book: &RawBook) -> Option<Study> {
    let sheet = book.sheet("variants")?;
    let mut rows = sheet.non_empty_rows();
    let header = rows.next()?;
    let name_col = header
        .cells
        .iter()
        .find(|(_, v)| canonical(v) == "variant")
        .map(|(c, _)| *c);
    let paths: Vec<(u32, String)> = header
        .cells
        .iter()
        .filter(|(c, v)| Some(*c) != name_col && !v.is_blank())
        .map(|(c, v)| {
            let text = match v {
                RawValue::Text(s) => s.trim().to_string(),
                other => other.describe(),
            };
            (*c, text)
        })
        .collect();
    let mut variants = Vec::new();
    let mut used: Vec<u32> = Vec::new();
    for row in rows {
        // A value under no header is kept with an empty path: the variant then says so at
        // its cell rather than running without it.
        let overrides: Vec<Override> = row
            .cells
            .iter()
            .filter(|(c, v)| Some(*c) != name_col && !v.is_blank())
            .map(|(c, v)| Override {
                path: paths
                    .iter()
                    .find(|(pc, _)| pc == c)
                    .map(|(_, p)| p.clone())
                    .unwrap_or_default(),
                value: v.clone(),
                cell: a1(row.row, *c),
            })
            .collect();
        let named = name_col
            .map(|c| row.get(c))
            .filter(|v| !v.is_blank())
            .map(|v| match v {
                RawValue::Text(s) => s.trim().to_string(),
                other => other.describe(),
            });
        if named.is_none() && overrides.is_empty() {
            continue;
        }
        used.extend(
            row.cells
                .iter()
                .filter(|(_, v)| !v.is_blank())
                .map(|(c, _)| *c),
        );
        let n = variants.len() + 1;
        variants.push(Variant {
            name: named.unwrap_or_else(|| format!("variant {n}")),
            cell: a1(row.row, name_col.unwrap_or(0)),
            overrides,
        });
    }
    // A typed path with nothing under it changes nothing; say so rather than pass it by.
    let unused_columns = paths
        .iter()
        .filter(|(c, _)| !used.contains(c))
        .map(|(c, p)| (a1(header.row, *c), p.clone()))
        .collect();
    (!variants.is_empty()).then(|| Study {
        sheet: sheet.name.clone(),
        variants,
        unused_columns,
    })
}

/// The data rows of a table sheet as the parser counts them: after the header, rows with a
/// value under a column the schema knows.
fn data_rows(sheet: &RawSheet, known: &[&str]) -> (Option<u32>, HashMap<String, u32>, Vec<u32>) {
    let mut rows = sheet.non_empty_rows();
    let Some(header) = rows.next() else {
        return (None, HashMap::new(), Vec::new());
    };
    let columns: HashMap<String, u32> = header
        .cells
        .iter()
        .filter(|(_, v)| !v.is_blank())
        .map(|(c, v)| (canonical(v), *c))
        .collect();
    let known_cols: Vec<u32> = columns
        .iter()
        .filter(|(name, _)| known.contains(&name.as_str()))
        .map(|(_, c)| *c)
        .collect();
    let data = rows
        .filter(|r| known_cols.iter().any(|c| !r.get(*c).is_blank()))
        .map(|r| r.row)
        .collect();
    (Some(header.row), columns, data)
}

/// Puts `value` at (`row`, `col`) of `sheet`, keeping rows and cells in order.
fn set_cell(sheet: &mut RawSheet, row: u32, col: u32, value: RawValue) {
    let i = match sheet.rows.binary_search_by_key(&row, |r| r.row) {
        Ok(i) => i,
        Err(i) => {
            sheet.rows.insert(
                i,
                RawRow {
                    row,
                    cells: Vec::new(),
                },
            );
            i
        }
    };
    let cells = &mut sheet.rows[i].cells;
    match cells.binary_search_by_key(&col, |(c, _)| *c) {
        Ok(j) => cells[j].1 = value,
        Err(j) => cells.insert(j, (col, value)),
    }
}

fn last_col(sheet: &RawSheet) -> Option<u32> {
    sheet
        .rows
        .iter()
        .filter_map(|r| r.cells.last().map(|(c, _)| *c))
        .max()
}

/// Where a replaced value went: (sheet as written, cell) → (variants cell, path).
type Moved = HashMap<(String, String), (String, String)>;

/// The base book with the variant's values in place of the base's (and without the variants
/// sheet), and where each went; or the variant's problems with its paths, each at its
/// variants cell.
pub fn apply(
    base: &RawBook,
    study: &Study,
    v: &Variant,
) -> Result<(RawBook, Moved), Vec<InputProblem>> {
    let mut book = RawBook {
        sheets: base
            .sheets
            .iter()
            .filter(|s| !s.name.trim().eq_ignore_ascii_case("variants"))
            .cloned()
            .collect(),
    };
    let mut moved = Moved::new();
    let mut problems = Vec::new();
    let mut problem = |cell: &str, path: &str, text: String| {
        problems.push(InputProblem {
            sheet: study.sheet.clone(),
            cell: cell.to_string(),
            problem: if path.trim().is_empty() {
                text
            } else {
                format!("{}: {text}", path.trim())
            },
        });
    };
    for o in &v.overrides {
        if o.path.trim().is_empty() {
            problem(
                &o.cell,
                "",
                String::from(
                    "a value under a column with no path in the header row; give its path \
                     (such as layers.thickness_mm[1]) or delete the value",
                ),
            );
            continue;
        }
        let target = match parse_path(&o.path) {
            Ok(t) => t,
            Err(e) => {
                problem(&o.cell, &o.path, e);
                continue;
            }
        };
        let (sheet_name, column) = match &target {
            Target::Key(k) => ("case", *k),
            Target::Column { sheet, column, .. } => (*sheet, *column),
        };
        let Some(sheet) = book
            .sheets
            .iter_mut()
            .find(|s| s.name.trim().eq_ignore_ascii_case(sheet_name))
        else {
            problem(
                &o.cell,
                &o.path,
                format!("the workbook has no sheet {sheet_name} to change"),
            );
            continue;
        };
        let mut cells: Vec<(u32, u32)> = Vec::new();
        match target {
            Target::Key(key) => {
                let row = sheet
                    .non_empty_rows()
                    .find(|r| canonical(r.get(0)) == key)
                    .map(|r| r.row);
                let row = match row {
                    Some(r) => r,
                    None => {
                        // A key the base leaves to its default gets a row of its own.
                        let r = sheet.rows.last().map_or(0, |r| r.row + 1);
                        set_cell(sheet, r, 0, RawValue::Text(key.to_string()));
                        r
                    }
                };
                cells.push((row, 1));
            }
            Target::Column { rows, .. } => {
                let known = schema::sheet(sheet_name)
                    .map(|s| s.names())
                    .unwrap_or_default();
                let (header, columns, data) = data_rows(sheet, &known);
                let Some(header) = header else {
                    problem(
                        &o.cell,
                        &o.path,
                        format!("sheet {sheet_name} has no header row to change"),
                    );
                    continue;
                };
                let picked: Vec<u32> = match rows {
                    Rows::All => data.clone(),
                    Rows::One(n) => match data.get(n - 1) {
                        Some(r) => vec![*r],
                        None => {
                            problem(
                                &o.cell,
                                &o.path,
                                format!(
                                    "sheet {sheet_name} has {} data row(s); row {n} does not exist",
                                    data.len()
                                ),
                            );
                            continue;
                        }
                    },
                };
                let col = match columns.get(column) {
                    Some(c) => *c,
                    None => {
                        // A column the base does not use gets a header of its own.
                        let c = last_col(sheet).map_or(0, |c| c + 1);
                        set_cell(sheet, header, c, RawValue::Text(column.to_string()));
                        c
                    }
                };
                cells.extend(picked.into_iter().map(|r| (r, col)));
            }
        }
        for (r, c) in cells {
            set_cell(sheet, r, c, o.value.clone());
            moved.insert(
                (sheet.name.clone(), a1(r, c)),
                (o.cell.clone(), o.path.trim().to_string()),
            );
        }
    }
    if problems.is_empty() {
        Ok((book, moved))
    } else {
        Err(problems)
    }
}

/// Parses the variant `v` of `base`: its paths applied to the raw cells, then the whole
/// case read and checked as any case workbook. Every problem is told on the variants sheet:
/// at the variants cell whose value it is about (prefixed with its path), or at the
/// variant's row with the cell it concerns.
pub fn parse_variant(
    base: &RawBook,
    study: &Study,
    v: &Variant,
    default_title: &str,
) -> Result<Parsed, Vec<InputProblem>> {
    let (book, moved) = apply(base, study, v)?;
    parse::parse(&book, default_title).map_err(|problems| {
        let mut out: Vec<InputProblem> = Vec::new();
        for p in problems {
            let here = match moved.get(&(p.sheet.clone(), p.cell.clone())) {
                Some((cell, path)) => InputProblem {
                    sheet: study.sheet.clone(),
                    cell: cell.clone(),
                    problem: format!("{path}: {}", p.problem),
                },
                None => InputProblem {
                    sheet: study.sheet.clone(),
                    cell: v.cell.clone(),
                    problem: format!("variant {}: {p}", v.name),
                },
            };
            // A [*] path puts one value in many cells; say its problem once.
            if !out.contains(&here) {
                out.push(here);
            }
        }
        out
    })
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    #[test]
    fn paths_name_a_key_or_a_column_and_rows() {
        assert_eq!(parse_path("case.end_hours"), Ok(Target::Key("end_hours")));
        assert_eq!(
            parse_path(" Layers.Thickness_mm[2] "),
            Ok(Target::Column {
                sheet: "layers",
                column: "thickness_mm",
                rows: Rows::One(2)
            })
        );
        assert_eq!(
            parse_path("schedule.dry_bulb_c[*]"),
            Ok(Target::Column {
                sheet: "schedule",
                column: "dry_bulb_c",
                rows: Rows::All
            })
        );
    }

    #[test]
    fn bad_paths_say_what_is_wrong() {
        for (path, says) in [
            ("layer.thickness_mm[1]", "unknown sheet layer"),
            ("layers.thick[1]", "layers has no column thick"),
            ("layers.thickness_mm", "give the row"),
            ("layers.thickness_mm[0]", "whole number from 1"),
            ("case.end_hours[1]", "has no rows"),
            ("case.speed", "case has no key speed"),
            ("end_hours", "a path is"),
            ("measured.hours[1]", "unknown sheet measured"),
        ] {
            let e = parse_path(path).unwrap_err();
            assert!(e.contains(says), "{path}: {e}");
        }
    }

    fn text(s: &str) -> RawValue {
        RawValue::Text(s.to_string())
    }

    fn sheet(name: &str, rows: &[&[RawValue]]) -> RawSheet {
        RawSheet::from_cells(
            name,
            rows.iter().enumerate().flat_map(|(r, row)| {
                row.iter()
                    .enumerate()
                    .map(move |(c, v)| (r as u32, c as u32, v.clone()))
            }),
        )
    }

    fn base(variants: &[&[RawValue]]) -> RawBook {
        let n = RawValue::Number;
        RawBook {
            sheets: vec![
                sheet("Case", &[&[text("end_hours"), n(10.0)]]),
                sheet(
                    "layers",
                    &[
                        &[text("material"), text("thickness_mm")],
                        &[text("a"), n(5.0)],
                        &[text("b"), n(6.0)],
                    ],
                ),
                sheet("variants", variants),
            ],
        }
    }

    #[test]
    fn values_go_into_their_cells_adding_keys_and_columns() {
        let n = RawValue::Number;
        let book = base(&[
            &[
                text("variant"),
                text("layers.thickness_mm[*]"),
                text("case.target_moisture_pct"),
                text("layers.initial_temp_c[2]"),
            ],
            &[text("v"), n(9.0), n(12.0), n(30.0)],
        ]);
        let study = read(&book).unwrap();
        let v = &study.variants[0];
        assert_eq!(
            v.overrides_text(),
            "layers.thickness_mm[*]=9; case.target_moisture_pct=12; layers.initial_temp_c[2]=30"
        );
        let (out, moved) = apply(&book, &study, v).unwrap();
        assert!(out.sheet("variants").is_none());
        let layers = out.sheet("layers").unwrap();
        assert_eq!(layers.get(1, 1).0, &n(9.0));
        assert_eq!(layers.get(2, 1).0, &n(9.0));
        // initial_temp_c was not in the header: a new column C.
        assert_eq!(layers.get(0, 2).0, &text("initial_temp_c"));
        assert_eq!(layers.get(2, 2).0, &n(30.0));
        let case = out.sheet("case").unwrap();
        assert_eq!(case.get(1, 0).0, &text("target_moisture_pct"));
        assert_eq!(case.get(1, 1).0, &n(12.0));
        // Both rows of the [*] path came from B2 of the variants sheet.
        for cell in ["B2", "B3"] {
            assert_eq!(
                moved[&("layers".to_string(), cell.to_string())],
                ("B2".to_string(), "layers.thickness_mm[*]".to_string())
            );
        }
    }

    #[test]
    fn a_value_without_a_path_is_a_problem_at_its_cell() {
        let n = RawValue::Number;
        let book = base(&[
            &[text("variant"), text("layers.thickness_mm[1]")],
            &[text("v"), n(9.0), n(3.0)],
        ]);
        let study = read(&book).unwrap();
        let problems = apply(&book, &study, &study.variants[0]).unwrap_err();
        assert_eq!(problems.len(), 1);
        assert_eq!(problems[0].cell, "C2");
        assert!(problems[0].problem.contains("no path"), "{problems:?}");
    }
}
