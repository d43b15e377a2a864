//! Writing result and errors workbooks (rust_xlsxwriter, native charts), CSV exports, and
//! atomic file replacement.
//!
//! Every numeric value is a number cell; a value that does not exist is an empty cell. Text that
//! came from the input is always written with `write_string`, never as a formula.

use std::io::Write as _;
use std::path::Path;

use rust_xlsxwriter::{
    Chart, ChartFormat, ChartLegendPosition, ChartLine, ChartLineDashType, ChartMarker,
    ChartMarkerType, ChartType, DocProperties, ExcelDateTime, Format, FormatAlign, Workbook,
    Worksheet, XlsxError,
};

use crate::case::{Case, MoistureBasis};
use crate::check::CheckTable;
use crate::solver::{RunResult, RunStatus};
use crate::text::compact;

use super::parse::{InputProblem, InputRecord, InputValue, Measured};

#[path = "write_fit.rs"]
mod write_fit;

/// Cautions shown in the README and on every summary sheet.
pub const CAUTIONS: [&str; 4] = [
    "Model results are estimates: check them against measurements of your own product and equipment before relying on them.",
    "Kilns and dryers are hot, steamy and can hold low-oxygen or toxic atmospheres: follow your local codes, the equipment maker's instructions and licensed practice.",
    "Dried food is safe only when validated: its water activity, process temperatures and hold times must meet the food-safety rules that apply to you (under-dried food can grow mould or pathogens).",
    "Checking, case hardening and cracking depend on more than the moisture gradient shown here (shrinkage, stress, grade of material): use the gradient as a guide, not a guarantee.",
];

/// Everything the result workbook shows.
pub struct ResultInput<'a> {
    /// The case that ran.
    pub case: &'a Case,
    /// What it produced.
    pub run: &'a RunResult,
    /// Warnings from reading and from the run.
    pub warnings: &'a [String],
    /// What was read, in SI units, and where from.
    pub inputs: &'a [InputRecord],
    /// Measured points, if any.
    pub measured: &'a [Measured],
    /// What the `fit` sheet shows, computed by [`crate::fit::report`]; where it is `None` and
    /// there are measured points, the report is made here without an estimation.
    pub fit: Option<&'a crate::fit::FitReport>,
    /// Series comparison, where the case has one.
    pub check: Option<&'a CheckTable>,
    /// SHA-256 of the input file's bytes, hex.
    pub input_sha256: &'a str,
}

/// Program version written on every result.
pub const PROGRAM_VERSION: &str = env!("CARGO_PKG_VERSION");

fn properties(title: &str) -> Result<DocProperties, XlsxError> {
    // A fixed creation time makes the same input give the same bytes.
    let created = ExcelDateTime::from_ymd(2026, 1, 1)?.and_hms(0, 0, 0)?;
    Ok(DocProperties::new()
        .set_title(title)
        .set_author("dampfront")
        .set_creation_datetime(&created))
}

struct Formats {
    header: Format,
    number: Format,
    hours: Format,
    small: Format,
    count: Format,
    wrap: Format,
    top: Format,
}

impl Formats {
    fn new() -> Formats {
        Formats {
            header: Format::new()
                .set_bold()
                .set_text_wrap()
                .set_align(FormatAlign::Center)
                .set_align(FormatAlign::VerticalCenter),
            number: Format::new().set_num_format("0.000"),
            hours: Format::new().set_num_format("0.00"),
            small: Format::new().set_num_format("0.000E+00"),
            count: Format::new().set_num_format("0"),
            top: Format::new().set_align(FormatAlign::Top),
            wrap: Format::new()
                .set_text_wrap()
                .set_align(FormatAlign::Top)
                .set_align(FormatAlign::Left),
        }
    }
}

fn header_row(
    ws: &mut Worksheet,
    row: u32,
    names: &[String],
    f: &Formats,
) -> Result<(), XlsxError> {
    // Long names wrap in a three-line header, so that tables print legibly one page wide.
    for (c, name) in names.iter().enumerate() {
        ws.write_string_with_format(row, c as u16, name, &f.header)?;
        ws.set_column_width(c as u16, (name.len() as f64 + 2.0).clamp(10.0, 15.0))?;
    }
    if names.iter().any(|n| n.len() > 13) {
        ws.set_row_height(row, 45)?;
    }
    ws.set_freeze_panes(row + 1, 0)?;
    Ok(())
}

/// A number cell where the value exists and is finite; nothing otherwise.
pub(super) fn opt_number(
    ws: &mut Worksheet,
    row: u32,
    col: u16,
    v: Option<f64>,
    fmt: &Format,
) -> Result<(), XlsxError> {
    if let Some(v) = v.filter(|v| v.is_finite()) {
        ws.write_number_with_format(row, col, v, fmt)?;
    }
    Ok(())
}

/// Gives each listed column its number format once. The table cells below are then written
/// without a format of their own ([`opt_plain`]) and take the column's: the file holds the same
/// style index on every cell, but the writer no longer hashes a whole `Format` per cell (about a
/// sixth of the time to build a result). Only for columns whose every body cell has that format;
/// header cells keep their explicit format.
fn column_formats<'f>(
    ws: &mut Worksheet,
    columns: impl IntoIterator<Item = (u16, &'f Format)>,
) -> Result<(), XlsxError> {
    for (col, fmt) in columns {
        ws.set_column_format(col, fmt)?;
    }
    Ok(())
}

/// [`opt_number`] in a column that [`column_formats`] formatted.
pub(super) fn opt_plain(
    ws: &mut Worksheet,
    row: u32,
    col: u16,
    v: Option<f64>,
) -> Result<(), XlsxError> {
    if let Some(v) = v.filter(|v| v.is_finite()) {
        ws.write_number(row, col, v)?;
    }
    Ok(())
}

/// Deflate level of result and errors workbooks. Level 1 deflates about six times faster than
/// the default level 6, for result files about 40 % larger (a demo result: 117 KB instead of
/// 83 KB); level 2 takes twice level 1's time for 89 KB. Measured by `cargo bench --bench write`.
const ZIP_LEVEL: u8 = 1;

/// Builds the result workbook.
pub fn result_workbook(r: &ResultInput<'_>) -> Result<Vec<u8>, XlsxError> {
    result_workbook_with(r, None)
}

/// Builds the result workbook, with the `variants` and `variant_curves` sheets of a study.
pub fn result_workbook_with(
    r: &ResultInput<'_>,
    variants: Option<&super::write_variants::Variants<'_>>,
) -> Result<Vec<u8>, XlsxError> {
    let mut wb = Workbook::new();
    wb.set_properties(&properties(&r.case.title)?);
    wb.set_zip_compression_level(ZIP_LEVEL);
    let f = Formats::new();
    summary_sheet(wb.add_worksheet(), r, &f)?;
    curves_sheet(&mut wb, r, &f)?;
    steps_sheet(&mut wb, r, &f)?;
    profiles_sheet(&mut wb, r, &f)?;
    if !r.measured.is_empty() {
        write_fit::fit_sheet(wb.add_worksheet(), r, &f)?;
    }
    if let Some(check) = r.check {
        check_sheet(wb.add_worksheet(), r.case, check, &f)?;
    }
    if let Some(v) = variants {
        super::write_variants::add_sheets(&mut wb, v)?;
    }
    input_sheet(wb.add_worksheet(), r, &f)?;
    wb.save_to_buffer()
}

fn pct(case: &Case, x: f64) -> f64 {
    case.basis.from_dry_fraction(x)
}

fn basis_unit(case: &Case) -> &'static str {
    match case.basis {
        MoistureBasis::Dry => "% dry basis",
        MoistureBasis::Wet => "% wet basis",
    }
}

/// A summary value: text, a number, or nothing (an empty cell).
#[derive(Debug, Clone, PartialEq)]
pub enum SummaryValue {
    /// Text.
    Text(String),
    /// A finite number.
    Number(f64),
    /// No value: an empty cell.
    Empty,
}

/// How a number on the summary is shown.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NumberStyle {
    /// Three decimals.
    Plain,
    /// Two decimals (hours, days).
    Hours,
    /// Scientific notation.
    Small,
    /// A whole number, no decimals.
    Count,
}

/// One row of the `summary` sheet: key, value, unit and a note.
#[derive(Debug, Clone, PartialEq)]
pub struct SummaryEntry {
    /// Column A.
    pub key: &'static str,
    /// Column B.
    pub value: SummaryValue,
    /// Column C: the unit symbol (empty for text and plain ratios).
    pub unit: &'static str,
    /// Column D: a note for the reader.
    pub note: String,
    /// Number format.
    pub style: NumberStyle,
}

/// The `summary` keys in the contract's order (format 1.1), before warnings and cautions.
pub const SUMMARY_KEYS: [&str; 23] = [
    "title",
    "status",
    "drying_time_h",
    "final_hours",
    "final_mean_moisture_pct",
    "final_surface_moisture_pct",
    "final_centre_moisture_pct",
    "max_surface_centre_difference_pct",
    "final_surface_temp_c",
    "final_centre_temp_c",
    "water_removed_kg_m2",
    "mass_balance_error",
    "cells",
    "time_steps",
    "solve_seconds",
    "program_version",
    "input_sha256",
    "target_moisture_pct",
    "drying_time_days",
    "time_of_max_difference_h",
    "final_surface_water_activity",
    "final_centre_water_activity",
    "evaporation_energy_kj_m2",
];

/// The status word of a run.
pub fn status_word(status: RunStatus) -> &'static str {
    match status {
        RunStatus::Ok => "ok",
        RunStatus::TargetNotReached => "target_not_reached",
    }
}

/// The summary's keys and values (the contract's keys, then `moisture_basis`), shared by the
/// sheet and the command line's `--json`.
pub fn summary_entries(case: &Case, run: &RunResult, input_sha256: &str) -> Vec<SummaryEntry> {
    use NumberStyle::{Count, Hours, Plain, Small};
    let last = run.last();
    let basis_note = match case.basis {
        MoistureBasis::Dry => "dry basis",
        MoistureBasis::Wet => "wet basis",
    };
    let num = |v: Option<f64>| match v.filter(|v| v.is_finite()) {
        Some(v) => SummaryValue::Number(v),
        None => SummaryValue::Empty,
    };
    let text = |t: &str| SummaryValue::Text(t.to_string());
    let diff = run
        .max_surface_centre_difference_pair
        .map(|(s, c)| (pct(case, s) - pct(case, c)).abs());
    let drying_h = run.drying_time.map(|t| t / 3600.0);
    let e = |key, value, unit, note: &str, style| SummaryEntry {
        key,
        value,
        unit,
        note: note.to_string(),
        style,
    };
    vec![
        e("title", text(&case.title), "", "", Plain),
        e("status", text(status_word(run.status)), "", "", Plain),
        e(
            "drying_time_h",
            num(drying_h),
            "h",
            "when the mean reached the target",
            Hours,
        ),
        e(
            "final_hours",
            num(last.map(|l| l.time / 3600.0)),
            "h",
            "",
            Hours,
        ),
        e(
            "final_mean_moisture_pct",
            num(last.map(|l| pct(case, l.mean))),
            "%",
            basis_note,
            Plain,
        ),
        e(
            "final_surface_moisture_pct",
            num(last.map(|l| pct(case, l.surface))),
            "%",
            basis_note,
            Plain,
        ),
        e(
            "final_centre_moisture_pct",
            num(last.map(|l| pct(case, l.centre))),
            "%",
            basis_note,
            Plain,
        ),
        e(
            "max_surface_centre_difference_pct",
            num(diff.or(Some(0.0))),
            "%",
            "largest over every time step and output row",
            Plain,
        ),
        e(
            "final_surface_temp_c",
            num(last.map(|l| l.surface_temp_c)),
            "°C",
            "",
            Plain,
        ),
        e(
            "final_centre_temp_c",
            num(last.map(|l| l.centre_temp_c)),
            "°C",
            "",
            Plain,
        ),
        e(
            "water_removed_kg_m2",
            num(Some(run.water_removed)),
            "kg/m²",
            "per m² of exposed surface",
            Plain,
        ),
        e(
            "mass_balance_error",
            num(Some(run.mass_balance_error)),
            "",
            "relative to the water held at the start",
            Small,
        ),
        e("cells", num(Some(run.cells as f64)), "", "", Count),
        e(
            "time_steps",
            num(Some(run.stats.accepted as f64)),
            "",
            "accepted steps",
            Count,
        ),
        e(
            "solve_seconds",
            num(Some(run.solve_seconds)),
            "s",
            "",
            Plain,
        ),
        e("program_version", text(PROGRAM_VERSION), "", "", Plain),
        e("input_sha256", text(input_sha256), "", "", Plain),
        e(
            "target_moisture_pct",
            num(case.target_moisture.map(|x| pct(case, x))),
            "%",
            basis_note,
            Plain,
        ),
        e(
            "drying_time_days",
            num(drying_h.map(|h| h / 24.0)),
            "d",
            "",
            Hours,
        ),
        e(
            "time_of_max_difference_h",
            num(run.time_of_max_difference.map(|t| t / 3600.0)),
            "h",
            "",
            Hours,
        ),
        e(
            "final_surface_water_activity",
            num(last.and_then(|l| l.surface_water_activity)),
            "",
            "from the surface material's isotherm",
            Plain,
        ),
        e(
            "final_centre_water_activity",
            num(last.and_then(|l| l.centre_water_activity)),
            "",
            "from the centre material's isotherm",
            Plain,
        ),
        e(
            "evaporation_energy_kj_m2",
            num(run.evaporation_energy),
            "kJ/m²",
            "coupled runs only",
            Plain,
        ),
        e(
            "energy_balance_error",
            num(run.energy_balance_error),
            "",
            "coupled runs: |convective heat in - (stored + latent + sensible heat of the water \
             that left)| / the largest term",
            Small,
        ),
        e(
            "moisture_basis",
            text(match case.basis {
                MoistureBasis::Dry => "dry",
                MoistureBasis::Wet => "wet",
            }),
            "",
            "basis of every moisture %",
            Plain,
        ),
    ]
}

fn summary_sheet(ws: &mut Worksheet, r: &ResultInput<'_>, f: &Formats) -> Result<(), XlsxError> {
    ws.set_name("summary")?;
    // A key sheet with a header row: key, value, unit, note.
    ws.set_column_width(0, 34)?;
    ws.set_column_width(1, 26)?;
    ws.set_column_width(2, 8)?;
    ws.set_column_width(3, 38)?;
    for (c, h) in ["key", "value", "unit", "note"].iter().enumerate() {
        ws.write_string_with_format(0, c as u16, *h, &f.header)?;
    }
    let mut row = 1;
    for entry in summary_entries(r.case, r.run, r.input_sha256) {
        ws.write_string(row, 0, entry.key)?;
        match &entry.value {
            SummaryValue::Text(t) => {
                ws.write_string(row, 1, t)?;
            }
            SummaryValue::Number(v) => {
                let fmt = match entry.style {
                    NumberStyle::Plain => &f.number,
                    NumberStyle::Hours => &f.hours,
                    NumberStyle::Small => &f.small,
                    NumberStyle::Count => &f.count,
                };
                ws.write_number_with_format(row, 1, *v, fmt)?;
            }
            SummaryValue::Empty => {}
        }
        if !entry.unit.is_empty() {
            ws.write_string(row, 2, entry.unit)?;
        }
        if !entry.note.is_empty() {
            ws.write_string(row, 3, &entry.note)?;
        }
        row += 1;
    }
    // Warnings and cautions span the value, unit and note columns, wrapped, so that they print
    // within the page's width.
    for (key, text) in r
        .warnings
        .iter()
        .map(|w| ("warning", w.as_str()))
        .chain(CAUTIONS.iter().map(|c| ("caution", *c)))
    {
        ws.write_string_with_format(row, 0, key, &f.top)?;
        ws.merge_range(row, 1, row, 3, text, &f.wrap)?;
        let lines = (text.chars().count() as f64 / 85.0).ceil().max(1.0);
        ws.set_row_height(row, 15.0 * lines)?;
        row += 1;
    }
    summary_charts(ws, r)?;
    ws.set_landscape();
    ws.set_paper_size(9);
    ws.set_print_fit_to_pages(1, 1);
    ws.set_print_gridlines(false);
    Ok(())
}

/// Columns of the 1.1 additions on `curves`, after the layer columns.
pub const CURVE_ADDITIONS: [&str; 5] = [
    "equilibrium_moisture_pct",
    "surface_water_activity",
    "centre_water_activity",
    "surface_centre_difference_pct",
    // Beyond the contract (an extension at the end): the air's wet bulb, which a kiln is run
    // by and a wet surface tends to.
    "air_wet_bulb_c",
];

/// The header of the `curves` sheet, in the contract's order.
pub fn curve_headers(layers: usize) -> Vec<String> {
    let mut h: Vec<String> = [
        "hours",
        "mean_moisture_pct",
        "surface_moisture_pct",
        "centre_moisture_pct",
        "moisture_ratio",
        "mean_temp_c",
        "surface_temp_c",
        "centre_temp_c",
        "drying_rate_pct_h",
        "air_temp_c",
        "air_rh_pct",
        "step",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    h.extend((1..=layers).map(|n| format!("layer_{n}_mean_moisture_pct")));
    h.extend(CURVE_ADDITIONS.iter().map(|s| s.to_string()));
    h
}

/// Column of the step label on `curves`.
const STEP_COLUMN: usize = 11;

/// Curve rows as cells: numbers (None = empty) in header order without the step column, and
/// the step label. It keeps the wet bulb of the last air it saw: rows share their air while a
/// schedule step holds it constant, and the wet bulb is a root search (80 bisections of the
/// psychrometric relation), which computed for every row was the largest part of building a
/// result with air.
struct CurveCells<'a> {
    case: &'a Case,
    /// The last air (dry bulb and relative humidity, as bits) and its wet bulb.
    last_air: Option<((u64, u64), Option<f64>)>,
    values: Vec<Option<f64>>,
}

impl<'a> CurveCells<'a> {
    fn new(case: &'a Case) -> CurveCells<'a> {
        CurveCells {
            case,
            last_air: None,
            values: Vec::new(),
        }
    }

    fn wet_bulb(&mut self, dry_bulb_c: f64, rh: f64) -> Option<f64> {
        let key = (dry_bulb_c.to_bits(), rh.to_bits());
        match self.last_air {
            Some((k, wet)) if k == key => wet,
            _ => {
                let wet = crate::physics::psychro::wet_bulb_from_rh(
                    dry_bulb_c,
                    rh,
                    crate::physics::STANDARD_PRESSURE_PA,
                );
                self.last_air = Some((key, wet));
                wet
            }
        }
    }

    /// The cells of `row` (valid until the next call) and its step label.
    fn row(&mut self, row: &crate::solver::CurveRow) -> (&[Option<f64>], &'a str) {
        let case = self.case;
        let rate = case.basis.slope_from_dry(row.mean) * row.drying_rate * 3600.0;
        let wet_bulb = row.air_rh.and_then(|rh| self.wet_bulb(row.air_temp_c, rh));
        let v = &mut self.values;
        v.clear();
        v.extend([
            Some(row.time / 3600.0),
            Some(pct(case, row.mean)),
            Some(pct(case, row.surface)),
            Some(pct(case, row.centre)),
            row.moisture_ratio,
            Some(row.mean_temp_c),
            Some(row.surface_temp_c),
            Some(row.centre_temp_c),
            Some(rate),
            Some(row.air_temp_c),
            row.air_rh.map(|rh| 100.0 * rh),
        ]);
        v.extend(row.layer_means().iter().map(|&x| Some(pct(case, x))));
        v.extend([
            row.equilibrium.map(|x| pct(case, x)),
            row.surface_water_activity,
            row.centre_water_activity,
            Some((pct(case, row.surface) - pct(case, row.centre)).abs()),
            wet_bulb,
        ]);
        for x in v.iter_mut() {
            *x = x.filter(|x| x.is_finite());
        }
        let label = case.schedule.get(row.step).map_or("", |s| s.label.as_str());
        (v, label)
    }
}

/// Where the chart helper cells (measured points, target line) start on `curves`.
fn helper_column(case: &Case) -> u16 {
    (curve_headers(case.layers.len()).len() + 1) as u16
}

fn curves_sheet(wb: &mut Workbook, r: &ResultInput<'_>, f: &Formats) -> Result<(), XlsxError> {
    let case = r.case;
    let ws = wb.add_worksheet();
    ws.set_name("curves")?;
    let headers = curve_headers(case.layers.len());
    header_row(ws, 0, &headers, f)?;
    let value_col = |c: usize| if c < STEP_COLUMN { c } else { c + 1 } as u16;
    let numeric = headers.len().saturating_sub(1);
    column_formats(
        ws,
        (0..numeric).map(|c| (value_col(c), if c == 0 { &f.hours } else { &f.number })),
    )?;
    let mut cells = CurveCells::new(case);
    for (i, row) in r.run.curves.iter().enumerate() {
        let excel_row = i as u32 + 1;
        let (values, label) = cells.row(row);
        for (c, v) in values.iter().enumerate() {
            if c < numeric {
                opt_plain(ws, excel_row, value_col(c), *v)?;
            } else {
                opt_number(ws, excel_row, value_col(c), *v, &f.number)?;
            }
        }
        ws.write_string(excel_row, STEP_COLUMN as u16, label)?;
    }
    // Helper cells for the charts, right of the table after an empty column.
    let base = helper_column(case);
    if !r.measured.is_empty() {
        ws.write_string_with_format(0, base, "measured_hours", &f.header)?;
        ws.write_string_with_format(0, base + 1, "measured_moisture_pct", &f.header)?;
        for (i, m) in r.measured.iter().enumerate() {
            ws.write_number(i as u32 + 1, base, m.hours)?;
            ws.write_number(i as u32 + 1, base + 1, m.moisture_pct)?;
        }
    }
    if let (Some(target), Some(last)) = (case.target_moisture, r.run.last()) {
        let col = base + 2;
        ws.write_string_with_format(0, col, "target_line_hours", &f.header)?;
        ws.write_string_with_format(0, col + 1, "target_line_pct", &f.header)?;
        for (i, h) in [0.0, last.time / 3600.0].into_iter().enumerate() {
            ws.write_number(i as u32 + 1, col, h)?;
            ws.write_number(i as u32 + 1, col + 1, pct(case, target))?;
        }
    }
    // Print the table only, not the chart helper cells beside it.
    let rows = r.run.curves.len() as u32;
    ws.set_print_area(0, 0, rows, headers.len() as u16 - 1)?;
    ws.set_landscape();
    print_table(ws)?;
    Ok(())
}

/// The drying chart, the surface-centre difference and the profiles, on the summary beside
/// the key table.
fn summary_charts(ws: &mut Worksheet, r: &ResultInput<'_>) -> Result<(), XlsxError> {
    let case = r.case;
    let run = r.run;
    let headers = curve_headers(case.layers.len());
    let col_of = |name: &str| {
        let c = headers.iter().position(|h| h == name).unwrap_or(0);
        c as u16
    };
    let n = run.curves.len().max(1) as u32;
    let unit = format!("moisture, % {}", basis_word(case));

    let mut drying = Chart::new(ChartType::ScatterStraight);
    for (name, label) in [
        ("mean_moisture_pct", "mean"),
        ("surface_moisture_pct", "surface"),
        ("centre_moisture_pct", "centre"),
    ] {
        let col = col_of(name);
        drying
            .add_series()
            .set_name(label)
            .set_categories(("curves", 1, 0, n, 0))
            .set_values(("curves", 1, col, n, col));
    }
    let base = helper_column(case);
    if !r.measured.is_empty() {
        let m = r.measured.len() as u32;
        drying
            .add_series()
            .set_name("measured")
            .set_categories(("curves", 1, base, m, base))
            .set_values(("curves", 1, base + 1, m, base + 1))
            .set_marker(ChartMarker::new().set_type(ChartMarkerType::Circle))
            .set_format(ChartFormat::new().set_no_line());
    }
    if case.target_moisture.is_some() && run.last().is_some() {
        let col = base + 2;
        drying
            .add_series()
            .set_name("target")
            .set_categories(("curves", 1, col, 2, col))
            .set_values(("curves", 1, col + 1, 2, col + 1))
            .set_format(
                ChartFormat::new().set_line(
                    ChartLine::new()
                        .set_color("#C00000")
                        .set_dash_type(ChartLineDashType::Dash),
                ),
            );
    }
    // The air on a secondary axis: dry bulb always, relative humidity where known (a wet
    // bulb is converted to it).
    let air_dash = ChartLineDashType::RoundDot;
    let has_rh = run.curves.iter().any(|c| c.air_rh.is_some());
    let mut air_series = vec![("air_temp_c", "air dry bulb, °C", "#7F7F7F")];
    if has_rh {
        air_series.push(("air_rh_pct", "air RH, %", "#4F81BD"));
    }
    for (name, label, colour) in air_series {
        let col = col_of(name);
        drying
            .add_series()
            .set_name(label)
            .set_categories(("curves", 1, 0, n, 0))
            .set_values(("curves", 1, col, n, col))
            .set_secondary_axis(true)
            .set_format(
                ChartFormat::new()
                    .set_line(ChartLine::new().set_color(colour).set_dash_type(air_dash)),
            );
    }
    drying
        .title()
        .set_name(&chart_text(&format!("Drying curve: {}", case.title)));
    drying.x_axis().set_name("time, h");
    drying.y_axis().set_name(&unit);
    drying.y2_axis().set_name(if has_rh {
        "air: dry bulb °C, RH %"
    } else {
        "air: dry bulb °C"
    });
    drying.legend().set_position(ChartLegendPosition::Bottom);
    drying.set_width(640).set_height(360);

    let mut difference = Chart::new(ChartType::ScatterStraight);
    let col = col_of("surface_centre_difference_pct");
    difference
        .add_series()
        .set_name("|surface - centre|")
        .set_categories(("curves", 1, 0, n, 0))
        .set_values(("curves", 1, col, n, col));
    difference
        .title()
        .set_name("Surface-centre moisture difference");
    difference.x_axis().set_name("time, h");
    difference
        .y_axis()
        .set_name(&format!("difference, % {}", basis_word(case)));
    difference.legend().set_hidden();
    difference.set_width(640).set_height(300);

    let mut profiles = Chart::new(ChartType::ScatterStraight);
    let rows = profile_rows(run).len() as u32;
    for (c, p) in run.profiles.iter().enumerate() {
        if p.moisture.is_none() {
            continue;
        }
        let col = c as u16 + 1;
        profiles
            .add_series()
            .set_name(&format!("{} h", compact(p.time / 3600.0)))
            .set_categories(("profiles", 1, 0, rows, 0))
            .set_values(("profiles", 1, col, rows, col));
    }
    profiles.title().set_name("Moisture profiles");
    profiles.x_axis().set_name("distance from face A, mm");
    profiles.y_axis().set_name(&unit);
    profiles.legend().set_position(ChartLegendPosition::Bottom);
    profiles.set_width(640).set_height(360);

    // Beside the key table (columns A-D), stacked at fixed offsets from the top so that tall
    // warning rows do not pull them apart.
    let col = 5;
    ws.insert_chart_with_offset(0, col, &drying, 0, 0)?;
    ws.insert_chart_with_offset(0, col, &difference, 0, 370)?;
    // Every profile time after the run's end: no series, so no chart (the run warns).
    if run.profiles.iter().any(|p| p.moisture.is_some()) {
        ws.insert_chart_with_offset(0, col, &profiles, 0, 680)?;
    }
    if has_temperatures(run) {
        // Product surface and centre against the air's dry and wet bulb.
        let mut temps = Chart::new(ChartType::ScatterStraight);
        let has_wet_bulb = run.curves.iter().any(|c| c.air_rh.is_some());
        let mut series = vec![
            ("surface_temp_c", "product surface", None),
            ("centre_temp_c", "product centre", None),
            ("air_temp_c", "air dry bulb", Some("#7F7F7F")),
        ];
        if has_wet_bulb {
            series.push(("air_wet_bulb_c", "air wet bulb", Some("#4F81BD")));
        }
        for (name, label, colour) in series {
            let c = col_of(name);
            let s = temps
                .add_series()
                .set_name(label)
                .set_categories(("curves", 1, 0, n, 0))
                .set_values(("curves", 1, c, n, c));
            if let Some(colour) = colour {
                s.set_format(
                    ChartFormat::new().set_line(
                        ChartLine::new()
                            .set_color(colour)
                            .set_dash_type(ChartLineDashType::RoundDot),
                    ),
                );
            }
        }
        temps.title().set_name("Temperatures");
        temps.x_axis().set_name("time, h");
        temps.y_axis().set_name("temperature, °C");
        temps.legend().set_position(ChartLegendPosition::Bottom);
        temps.set_width(640).set_height(360);
        ws.insert_chart_with_offset(0, col, &temps, 0, 1050)?;
    }
    Ok(())
}

/// Text for a chart title that the writer cannot mistake for a cell range: a title ending in
/// something like `X!A1` gets a trailing space.
fn chart_text(text: &str) -> String {
    match text.rsplit_once('!') {
        Some((_, end)) if end.ends_with(|c: char| c.is_ascii_digit()) => format!("{text} "),
        _ => text.to_string(),
    }
}

/// `dry basis` or `wet basis`.
pub fn basis_word(case: &Case) -> &'static str {
    match case.basis {
        MoistureBasis::Dry => "dry basis",
        MoistureBasis::Wet => "wet basis",
    }
}

fn steps_sheet(wb: &mut Workbook, r: &ResultInput<'_>, f: &Formats) -> Result<(), XlsxError> {
    let case = r.case;
    let ws = wb.add_worksheet();
    ws.set_name("steps")?;
    let headers: Vec<String> = STEPS_HEADERS.iter().map(|s| s.to_string()).collect();
    header_row(ws, 0, &headers, f)?;
    column_formats(
        ws,
        (1..=3)
            .map(|c| (c, &f.hours))
            .chain((5..=8).map(|c| (c, &f.number))),
    )?;
    for (i, s) in r.run.steps.iter().enumerate() {
        let row = i as u32 + 1;
        let label = case
            .schedule
            .get(s.index)
            .map_or_else(|| format!("step {}", s.index + 1), |st| st.label.clone());
        ws.write_string(row, 0, &label)?;
        ws.write_number(row, 1, s.start / 3600.0)?;
        ws.write_number(row, 2, s.end / 3600.0)?;
        ws.write_number(row, 3, (s.end - s.start) / 3600.0)?;
        ws.write_string(row, 4, s.ended_by.as_str())?;
        opt_plain(ws, row, 5, Some(pct(case, s.mean_at_end)))?;
        opt_plain(
            ws,
            row,
            6,
            s.max_difference_pair
                .map(|(a, b)| (pct(case, a) - pct(case, b)).abs()),
        )?;
        opt_plain(ws, row, 7, Some(s.air_at_end.dry_bulb_c))?;
        opt_plain(ws, row, 8, s.air_at_end.rh.map(|x| 100.0 * x))?;
    }
    ws.set_landscape();
    print_table(ws)?;
    Ok(())
}

/// The header of the `steps` sheet (format 1.1).
pub const STEPS_HEADERS: [&str; 9] = [
    "step",
    "start_h",
    "end_h",
    "hours",
    "ended_by",
    "mean_moisture_at_end_pct",
    "max_surface_centre_difference_pct",
    "dry_bulb_c",
    "rh_pct",
];

/// A profile time in a column header: without trailing zeros, and below 1e-4 h as typed (the
/// six decimals of `compact` would print 0 there, and two columns alike).
fn profile_time(hours: f64) -> String {
    if hours != 0.0 && hours.abs() < 1e-4 {
        crate::text::as_typed(hours)
    } else {
        compact(hours)
    }
}

/// The header of a profile's moisture column.
pub fn profile_header(hours: f64) -> String {
    format!("moisture_pct_at_{}h", profile_time(hours))
}

/// One row of `profiles`: position (m), each profile's moisture (dry fraction) there, and in
/// coupled runs each profile's temperature (degrees C; empty otherwise).
type ProfileRow = (f64, Vec<Option<f64>>, Vec<Option<f64>>);

/// The header of a profile's temperature column (coupled runs).
pub fn profile_temp_header(hours: f64) -> String {
    format!("temp_c_at_{}h", profile_time(hours))
}

/// Whether the run solved temperatures (then `profiles` has `temp_c_at_<H>h` columns).
fn has_temperatures(run: &RunResult) -> bool {
    run.energy_balance_error.is_some()
}

/// The rows of `profiles`. An exposed face's surface value is a row of its own: face A at 0,
/// face B at the thickness.
fn profile_rows(run: &RunResult) -> Vec<ProfileRow> {
    let coupled = has_temperatures(run);
    let mut rows = Vec::with_capacity(run.positions.len() + 2);
    let face = |pick: fn(&crate::solver::Profile) -> Option<f64>| {
        run.profiles.iter().map(pick).collect::<Vec<_>>()
    };
    let temps = |pick: fn(&crate::solver::Profile) -> Option<f64>| {
        if coupled { face(pick) } else { Vec::new() }
    };
    let any = |v: &[Option<f64>]| v.iter().any(Option::is_some);
    let a = face(|p| p.face_a);
    if any(&a) {
        rows.push((0.0, a, temps(|p| p.face_a_temp)));
    }
    for (i, &pos) in run.positions.iter().enumerate() {
        let at = |v: &Option<Vec<f64>>| v.as_ref().and_then(|m| m.get(i).copied());
        let values = run.profiles.iter().map(|p| at(&p.moisture)).collect();
        let t = if coupled {
            run.profiles.iter().map(|p| at(&p.temperature)).collect()
        } else {
            Vec::new()
        };
        rows.push((pos, values, t));
    }
    let b = face(|p| p.face_b);
    if any(&b) {
        rows.push((run.thickness, b, temps(|p| p.face_b_temp)));
    }
    rows
}

/// The header of `profiles`: position, moisture columns, then temperature columns when coupled.
fn profile_headers(run: &RunResult) -> Vec<String> {
    let mut headers = vec![String::from("position_mm")];
    headers.extend(run.profiles.iter().map(|p| profile_header(p.time / 3600.0)));
    if has_temperatures(run) {
        headers.extend(
            run.profiles
                .iter()
                .map(|p| profile_temp_header(p.time / 3600.0)),
        );
    }
    headers
}

fn profiles_sheet(wb: &mut Workbook, r: &ResultInput<'_>, f: &Formats) -> Result<(), XlsxError> {
    let case = r.case;
    let run = r.run;
    let ws = wb.add_worksheet();
    ws.set_name("profiles")?;
    let headers = profile_headers(run);
    header_row(ws, 0, &headers, f)?;
    column_formats(ws, (0..headers.len() as u16).map(|c| (c, &f.number)))?;
    for (i, (pos, values, temps)) in profile_rows(run).iter().enumerate() {
        let row = i as u32 + 1;
        ws.write_number(row, 0, pos * 1000.0)?;
        for (c, v) in values.iter().enumerate() {
            opt_plain(ws, row, c as u16 + 1, v.map(|x| pct(case, x)))?;
        }
        let first = values.len() as u16 + 1;
        for (c, v) in temps.iter().enumerate() {
            opt_plain(ws, row, first + c as u16, *v)?;
        }
    }
    print_table(ws)?;
    Ok(())
}

fn check_sheet(
    ws: &mut Worksheet,
    case: &Case,
    check: &CheckTable,
    f: &Formats,
) -> Result<(), XlsxError> {
    ws.set_name("check")?;
    ws.set_landscape();
    print_table(ws)?;
    let headers: Vec<String> = [
        "hours",
        "model_moisture_ratio",
        "series_moisture_ratio",
        "difference",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    header_row(ws, 0, &headers, f)?;
    column_formats(
        ws,
        [(0, &f.hours), (1, &f.number), (2, &f.number), (3, &f.small)],
    )?;
    for (i, row) in check.rows.iter().enumerate() {
        let r = i as u32 + 1;
        ws.write_number(r, 0, row.hours)?;
        ws.write_number(r, 1, row.model)?;
        ws.write_number(r, 2, row.series)?;
        ws.write_number(r, 3, row.model - row.series)?;
    }
    let col = 5;
    ws.set_column_width(col, 30)?;
    ws.set_column_width(col + 1, 60)?;
    let notes: Vec<(&str, Option<f64>, String)> = vec![
        ("solution", None, check.description.clone()),
        ("source", None, "J. Crank, The Mathematics of Diffusion, 2nd ed., Oxford 1975 (sheet pp. 47-48, 60; cylinder ch. 5; sphere pp. 91, 96)".into()),
        ("length_m", Some(check.length), "half-thickness (both faces exposed) or thickness/radius".into()),
        ("diffusivity_m2_s", Some(check.diffusivity), "at the air temperature".into()),
        ("biot_number", check.biot, "L = l beta / D".into()),
        ("max_abs_difference", Some(check.max_abs_difference), "moisture ratio".into()),
        ("cells_per_layer", Some(case.cells_per_layer as f64), String::new()),
    ];
    for (i, (key, value, note)) in notes.into_iter().enumerate() {
        let r = i as u32 + 1;
        ws.write_string(r, col, key)?;
        match value {
            Some(v) => {
                ws.write_number_with_format(r, col + 1, v, &f.small)?;
                ws.write_string(r, col + 2, &note)?;
            }
            None => {
                ws.write_string(r, col + 1, &note)?;
            }
        }
    }
    Ok(())
}

/// Prints a table sheet one page wide, as many pages tall as it needs, header repeated.
fn print_table(ws: &mut Worksheet) -> Result<(), XlsxError> {
    ws.set_repeat_rows(0, 0)?;
    ws.set_paper_size(9);
    ws.set_print_fit_to_pages(1, 0);
    Ok(())
}

fn input_sheet(ws: &mut Worksheet, r: &ResultInput<'_>, f: &Formats) -> Result<(), XlsxError> {
    ws.set_name("input")?;
    ws.set_landscape();
    print_table(ws)?;
    let headers: Vec<String> = ["quantity", "value", "unit", "source"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    header_row(ws, 0, &headers, f)?;
    ws.set_column_width(0, 36)?;
    for (i, rec) in r.inputs.iter().enumerate() {
        let row = i as u32 + 1;
        ws.write_string(row, 0, &rec.quantity)?;
        match &rec.value {
            InputValue::Number(v) if v.is_finite() => {
                ws.write_number(row, 1, *v)?;
            }
            InputValue::Number(_) => {}
            InputValue::Text(t) => {
                ws.write_string(row, 1, t)?;
            }
        }
        ws.write_string(row, 2, &rec.unit)?;
        ws.write_string(row, 3, &rec.source)?;
    }
    Ok(())
}

/// Builds the errors workbook: sheet `problems` with sheet, cell, problem.
pub fn errors_workbook(problems: &[InputProblem]) -> Result<Vec<u8>, XlsxError> {
    let mut wb = Workbook::new();
    wb.set_properties(&properties("problems")?);
    wb.set_zip_compression_level(ZIP_LEVEL);
    let f = Formats::new();
    let ws = wb.add_worksheet();
    ws.set_name("problems")?;
    header_row(
        ws,
        0,
        &["sheet".into(), "cell".into(), "problem".into()],
        &f,
    )?;
    ws.set_column_width(2, 100)?;
    for (i, p) in problems.iter().enumerate() {
        let row = i as u32 + 1;
        ws.write_string(row, 0, &p.sheet)?;
        ws.write_string(row, 1, &p.cell)?;
        ws.write_string(row, 2, &p.problem)?;
    }
    wb.save_to_buffer()
}

fn csv_field(s: &str) -> String {
    // Text starting with = + - @ (or a tab or CR) would run as a formula where a spreadsheet
    // program opens the CSV: a leading apostrophe keeps it text (common practice).
    let guarded;
    let s = if s.starts_with(['=', '+', '-', '@', '\t', '\r']) {
        guarded = format!("'{s}");
        guarded.as_str()
    } else {
        s
    };
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

fn csv_number(v: Option<f64>) -> String {
    v.filter(|v| v.is_finite())
        .map_or_else(String::new, |v| v.to_string())
}

/// The `curves` table as CSV.
pub fn curves_csv(case: &Case, run: &RunResult) -> String {
    let headers = curve_headers(case.layers.len());
    let mut out = headers.join(",");
    out.push('\n');
    let mut cells = CurveCells::new(case);
    for row in &run.curves {
        let (values, label) = cells.row(row);
        let mut fields: Vec<String> = values[..STEP_COLUMN]
            .iter()
            .map(|v| csv_number(*v))
            .collect();
        fields.push(csv_field(label));
        fields.extend(values[STEP_COLUMN..].iter().map(|v| csv_number(*v)));
        out.push_str(&fields.join(","));
        out.push('\n');
    }
    out
}

/// The `profiles` table as CSV.
pub fn profiles_csv(case: &Case, run: &RunResult) -> String {
    let mut out = profile_headers(run).join(",");
    out.push('\n');
    for (pos, values, temps) in profile_rows(run) {
        let mut fields = vec![(pos * 1000.0).to_string()];
        fields.extend(values.iter().map(|v| csv_number(v.map(|x| pct(case, x)))));
        fields.extend(temps.iter().map(|v| csv_number(*v)));
        out.push_str(&fields.join(","));
        out.push('\n');
    }
    out
}

/// Writes `bytes` to `path` through a temporary file in the same folder and a rename, so a
/// reader never sees half a file. The temporary name starts with a dot (ignored by watchers).
///
/// Two flushes to disk, each where it protects data, and no more: the temporary file's data
/// before the rename (else a crash soon after could leave the new name on an empty or partial
/// file, with the old result already gone), and on Unix the folder after it (else the rename
/// itself could be lost, leaving the old result or no file). `sync_data` skips metadata a
/// reader does not need (times); the size is still flushed.
pub fn write_atomically(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    let mut builder = tempfile::Builder::new();
    builder.prefix(".dampfront-").suffix(".tmp");
    // Created rw for everyone less the umask, as any file a user saves (tempfile's default is
    // owner-only, which locks colleagues on a shared folder out of the results).
    #[cfg(unix)]
    builder.permissions(std::os::unix::fs::PermissionsExt::from_mode(0o666));
    let mut tmp = builder.tempfile_in(dir)?;
    tmp.write_all(bytes)?;
    tmp.as_file().sync_data()?;
    tmp.persist(path).map_err(|e| e.error)?;
    // The result is in place by now: a folder that cannot be flushed (some network and FUSE
    // file systems refuse fsync on a folder) weakens only the crash guarantee, so it is not an
    // error.
    #[cfg(unix)]
    let _ = std::fs::File::open(dir).and_then(|d| d.sync_all());
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::{profile_header, profile_temp_header};

    #[test]
    fn profile_headers_of_tiny_times_are_distinct_from_zero() {
        assert_eq!(profile_header(0.0), "moisture_pct_at_0h");
        assert_eq!(profile_header(24.0), "moisture_pct_at_24h");
        assert_eq!(profile_header(1e-9), "moisture_pct_at_1e-9h");
        assert_ne!(profile_header(1e-7), profile_header(0.0));
        assert_eq!(profile_temp_header(1e-9), "temp_c_at_1e-9h");
    }
}
