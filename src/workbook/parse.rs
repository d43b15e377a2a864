//! Raw cells to a checked [`Case`], following the case workbook format (version 1).
//!
//! The rules, all from the format page: sheet names, headers and keys are matched
//! case-insensitively after trimming; a table sheet's header is its first non-empty row and
//! empty rows are skipped; a key sheet has the key in A and the value in B (C onwards are
//! notes); numbers are numeric cells or numeric text with a `.` decimal point. Unknown sheets,
//! keys and columns are warnings. Units are converted here and nowhere else: mm to m, hours and
//! minutes to s, kJ/mol to J/mol, RH % to a fraction, and every moisture % (on the case's
//! `moisture_basis`) to a dry-basis fraction.
//!
//! Every problem is collected, not only the first: first those found while reading cells, then
//! those of [`Case::validate`], each mapped back to the cell its value came from (a value that
//! came from a default points at its key's row, or at the sheet). A validation problem about a
//! value that already failed to read is not repeated.

mod build;
mod context;
mod fit_sheet;
mod sheets;

use std::fmt;

use crate::case::{Case, Place, ValidCase};
use crate::workbook::raw::RawBook;
use crate::workbook::schema;

use context::{Ctx, Loc};
use sheets::{Found, KeySheet, Table, sheet_loc};

pub use build::MAX_STEPS;

/// Most problems listed for one input; the rest are counted in a last line. A broken
/// million-row sheet would otherwise produce a million lines nobody reads.
pub const MAX_PROBLEMS: usize = 1000;

/// One thing wrong with the input, at a sheet and cell.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct InputProblem {
    /// Sheet name as written in the file (the format's name for a missing sheet).
    pub sheet: String,
    /// Cell in A1 style such as `C4`; empty for the whole sheet.
    pub cell: String,
    /// What is wrong, as a sentence.
    pub problem: String,
}

impl fmt::Display for InputProblem {
    /// `SHEET!CELL: problem`, or `SHEET: problem` for a whole sheet.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.cell.is_empty() {
            write!(f, "{}: {}", self.sheet, self.problem)
        } else {
            write!(f, "{}!{}: {}", self.sheet, self.cell, self.problem)
        }
    }
}

/// One row of the `measured` sheet.
#[derive(Debug, Clone, PartialEq)]
pub struct Measured {
    /// Time, hours, as typed.
    pub hours: f64,
    /// Mean moisture in %, as typed (on the case's basis).
    pub moisture_pct: f64,
    /// The same mean moisture as a dry-basis fraction.
    pub moisture: f64,
    /// Surface temperature, degrees C.
    pub surface_temp_c: Option<f64>,
    /// Centre temperature, degrees C.
    pub centre_temp_c: Option<f64>,
}

/// A value as recorded for the result's `input` sheet.
#[derive(Debug, Clone, PartialEq)]
pub enum InputValue {
    /// A number in the record's unit.
    Number(f64),
    /// A word or a name.
    Text(String),
}

/// One value that went into the case: what it is, its value in SI units, and where it came
/// from (for the result's `input` sheet).
#[derive(Debug, Clone, PartialEq)]
pub struct InputRecord {
    /// Path in the case, such as `layers[1].thickness` (lists count from 1).
    pub quantity: String,
    /// The value as the case holds it.
    pub value: InputValue,
    /// SI unit: `m`, `s`, `C`, `kg/m3`, `m2/s`, `J/mol`, `fraction`, `fraction (dry basis)`
    /// for moistures, or empty for words and pure numbers.
    pub unit: String,
    /// The cell it was read from, such as `layers!C2`, or `default`.
    pub source: String,
}

/// A successfully read case workbook.
#[derive(Debug, Clone, PartialEq)]
pub struct Parsed {
    /// The checked case; [`Case::validate`] found nothing wrong with it.
    pub case: ValidCase,
    /// Warnings, each `SHEET!CELL: text` (or `SHEET: text`), in sheet and cell order.
    pub warnings: Vec<String>,
    /// Rows of the `measured` sheet, empty when there is none.
    pub measured: Vec<Measured>,
    /// What the `fit` sheet asks to estimate, when the book has one.
    pub fit: Option<crate::fit::FitRequest>,
    /// What was read, in SI units, with where it came from.
    pub inputs: Vec<InputRecord>,
}

fn missing_sheet(name: &'static str, found: Found<'_>, book: &RawBook, ctx: &mut Ctx) {
    if found.sheet.is_some() {
        return;
    }
    let names: Vec<&str> = book.sheets.iter().map(|s| s.name.as_str()).collect();
    let have = if names.is_empty() {
        String::from("it has no sheet at all")
    } else {
        format!("sheets found: {}", names.join(", "))
    };
    ctx.problem(
        &sheet_loc(name, found),
        Some(Place::Sheet(name)),
        format!("the workbook has no sheet named {name}, which is required ({have})"),
    );
}

/// Reads a table sheet with the schema's columns; a column the schema calls required but the
/// header lacks is a problem (marked failed for `kind`, the case place kind of its rows).
fn table<'b>(sheet: &schema::Sheet, found: Found<'b>, kind: u8, ctx: &mut Ctx) -> Table<'b> {
    let t = Table::read(sheet.name, found, &sheet.names(), ctx);
    let required: Vec<&'static str> = sheet
        .fields
        .iter()
        .filter(|f| f.required)
        .map(|f| f.name)
        .collect();
    if t.present && !t.is_empty() {
        t.require(&required, kind, ctx);
    }
    t
}

/// Reads a raw book as a case workbook. `default_title` (usually the file stem) is the title
/// when the `case` sheet gives none.
///
/// Returns the case with its warnings, measurements and input records, or every problem found.
pub fn parse(book: &RawBook, default_title: &str) -> Result<Parsed, Vec<InputProblem>> {
    let mut ctx = Ctx::new();
    let found = sheets::find_sheets(book, &mut ctx);
    let get = |name: &str| {
        found.get(name).copied().unwrap_or(Found {
            sheet: None,
            order: 0,
        })
    };

    missing_sheet("case", get("case"), book, &mut ctx);
    let keys = KeySheet::read("case", get("case"), &schema::CASE.names(), &mut ctx);
    let case = build::settings(&keys, &mut ctx, default_title);

    missing_sheet("materials", get("materials"), book, &mut ctx);
    let materials_t = table(&schema::MATERIALS, get("materials"), 3, &mut ctx);
    let (materials, names) = build::materials(&materials_t, &mut ctx);

    missing_sheet("layers", get("layers"), book, &mut ctx);
    let layers_t = table(&schema::LAYERS, get("layers"), 2, &mut ctx);
    if !layers_t.has("material") {
        ctx.exchange_unknown = true;
    }
    let layers = build::layers(&layers_t, &mut ctx, &materials, &names);

    missing_sheet("schedule", get("schedule"), book, &mut ctx);
    let schedule_t = table(&schema::SCHEDULE, get("schedule"), 4, &mut ctx);
    let schedule = build::schedule(&schedule_t, &mut ctx, case.exposed);

    let measured_t = table(&schema::MEASURED, get("measured"), 5, &mut ctx);
    let measured = build::measured(&measured_t, &mut ctx);

    let first_material = layers.first().map(|l| l.material);
    let fit = fit_sheet::read(
        get("fit"),
        &names,
        first_material,
        !measured.is_empty(),
        &mut ctx,
    );
    // The `variants` sheet is read by `crate::study`, on the raw cells.

    let case = Case {
        layers,
        materials,
        schedule,
        ..case
    };

    let places = Places {
        keys: &keys,
        layers: &layers_t,
        materials: &materials_t,
        schedule: &schedule_t,
        sheet: |name| sheet_loc(name, get(name)),
    };
    // A material whose row already failed (e.g. a missing isotherm parameter) stands in as
    // a placeholder; what validate says about layers *using* it only restates that problem.
    let material_failed = ctx
        .problems
        .iter()
        .any(|(l, _)| l.sheet.eq_ignore_ascii_case("materials"));
    // Cells that already have a problem, looked up in a set: a scan of the list for each
    // problem was quadratic (a 400 KB CSV of many rows took a minute).
    let mut flagged: std::collections::HashSet<(String, String)> = ctx
        .problems
        .iter()
        .map(|(l, _)| (l.sheet.clone(), l.cell.clone()))
        .collect();
    for p in case.validate() {
        if ctx.suppressed(&p.place) {
            continue;
        }
        if material_failed
            && matches!(
                p.place,
                crate::case::Place::Layer {
                    column: "material",
                    ..
                }
            )
        {
            continue;
        }
        let at = places.locate(&p.place, &p.message);
        let key = (at.sheet.clone(), at.cell.clone());
        let repeated = !at.cell.is_empty() && flagged.contains(&key);
        if !repeated {
            flagged.insert(key);
            ctx.problem(&at, None, p.message);
        }
    }

    if !ctx.problems.is_empty() {
        return Err(finish_problems(ctx.problems));
    }
    // Values that run but look like a slipped unit: warnings at their cells.
    for p in case.plausibility() {
        let at = places.locate(&p.place, &p.message);
        ctx.warn(&at, p.message);
    }
    let mut warnings = ctx.warnings;
    warnings.sort_by_key(|(l, _)| l.order);
    // Every problem validation reports was reported above, so this only wraps the case.
    let case = case.validated().map_err(|problems| {
        problems
            .into_iter()
            .map(|p| InputProblem {
                sheet: String::new(),
                cell: String::new(),
                problem: p.to_string(),
            })
            .collect::<Vec<_>>()
    })?;
    Ok(Parsed {
        case,
        warnings: warnings
            .into_iter()
            .map(|(l, m)| {
                InputProblem {
                    sheet: l.sheet,
                    cell: l.cell,
                    problem: m,
                }
                .to_string()
            })
            .collect(),
        measured,
        fit,
        inputs: ctx.records,
    })
}

/// Sorts problems by sheet, row and column (stable, so one cell's problems keep their order)
/// and caps the list at [`MAX_PROBLEMS`].
fn finish_problems(mut problems: Vec<(Loc, String)>) -> Vec<InputProblem> {
    problems.sort_by_key(|(l, _)| l.order);
    let total = problems.len();
    let mut out: Vec<InputProblem> = problems
        .into_iter()
        .take(MAX_PROBLEMS)
        .map(|(l, m)| InputProblem {
            sheet: l.sheet,
            cell: l.cell,
            problem: m,
        })
        .collect();
    if total > MAX_PROBLEMS {
        let sheet = out.last().map(|p| p.sheet.clone()).unwrap_or_default();
        out.push(InputProblem {
            sheet,
            cell: String::new(),
            problem: format!(
                "{} more problems were found on this and later sheets and are not listed",
                total - MAX_PROBLEMS
            ),
        });
    }
    out
}

/// Maps a [`Place`] of the case back to where its value was read.
struct Places<'a, 'b, F: Fn(&'static str) -> Loc> {
    keys: &'a KeySheet<'b>,
    layers: &'a Table<'b>,
    materials: &'a Table<'b>,
    schedule: &'a Table<'b>,
    sheet: F,
}

impl<F: Fn(&'static str) -> Loc> Places<'_, '_, F> {
    fn locate(&self, place: &Place, message: &str) -> Loc {
        let row_cell = |t: &Table<'_>, index: usize, column: &str| match t.rows.get(index) {
            Some(row) => t.cell(row, column).1,
            None => t.whole.clone(),
        };
        match place {
            // An empty table: where its first row would go.
            Place::Sheet("layers") if self.layers.rows.is_empty() => self.layers.first_row_loc(),
            Place::Sheet("materials") if self.materials.rows.is_empty() => {
                self.materials.first_row_loc()
            }
            Place::Sheet("schedule") if self.schedule.rows.is_empty() => {
                self.schedule.first_row_loc()
            }
            Place::Sheet(s) => (self.sheet)(s),
            Place::Case(k) => self.keys.get(k).1,
            Place::Layer { index, column } => row_cell(self.layers, *index, column),
            Place::Material { index, column } => {
                // Isotherm messages name their parameter; point at its cell where there is one.
                let column = ["iso_a", "iso_b", "iso_c"]
                    .into_iter()
                    .find(|c| *column == "isotherm" && message.contains(&format!("({c})")))
                    .filter(|c| self.materials.has(c))
                    .unwrap_or(column);
                row_cell(self.materials, *index, column)
            }
            Place::Step { index, column } => row_cell(self.schedule, *index, column),
        }
    }
}
