//! Writing result and errors workbooks (rust_xlsxwriter, native charts), CSV exports, and
//! atomic file replacement.
//!
//! Every numeric value is a number cell; a value that does not exist is an empty cell. Text that
//! came from the input is always written with `write_string`, never as a formula.

use std::io::Write as _;
use std::path::Path;

use rust_xlsxwriter::{
    Chart, ChartLegendPosition, ChartMarker, ChartMarkerType, ChartType, DocProperties,
    ExcelDateTime, Format, FormatAlign, Workbook, Worksheet, XlsxError,
};

use crate::case::{Case, MoistureBasis};
use crate::check::CheckTable;
use crate::solver::{RunResult, RunStatus};
use crate::text::compact;

use super::parse::{InputProblem, InputRecord, InputValue, Measured};

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
    wrap: Format,
}

impl Formats {
    fn new() -> Formats {
        Formats {
            header: Format::new().set_bold().set_align(FormatAlign::Center),
            number: Format::new().set_num_format("0.000"),
            hours: Format::new().set_num_format("0.00"),
            small: Format::new().set_num_format("0.000E+00"),
            wrap: Format::new().set_text_wrap(),
        }
    }
}

fn header_row(
    ws: &mut Worksheet,
    row: u32,
    names: &[String],
    f: &Formats,
) -> Result<(), XlsxError> {
    for (c, name) in names.iter().enumerate() {
        ws.write_string_with_format(row, c as u16, name, &f.header)?;
        ws.set_column_width(c as u16, (name.len() as f64 + 2.0).clamp(10.0, 34.0))?;
    }
    ws.set_freeze_panes(row + 1, 0)?;
    Ok(())
}

fn opt_number(
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

/// Builds the result workbook.
pub fn result_workbook(r: &ResultInput<'_>) -> Result<Vec<u8>, XlsxError> {
    let mut wb = Workbook::new();
    wb.set_properties(&properties(&r.case.title)?);
    let f = Formats::new();
    summary_sheet(wb.add_worksheet(), r, &f)?;
    curves_sheet(&mut wb, r, &f)?;
    profiles_sheet(&mut wb, r, &f)?;
    if !r.measured.is_empty() {
        fit_sheet(wb.add_worksheet(), r, &f)?;
    }
    if let Some(check) = r.check {
        check_sheet(wb.add_worksheet(), r.case, check, &f)?;
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

fn summary_sheet(ws: &mut Worksheet, r: &ResultInput<'_>, f: &Formats) -> Result<(), XlsxError> {
    ws.set_name("summary")?;
    let case = r.case;
    let run = r.run;
    let last = run.last();
    let unit = basis_unit(case);
    let status = match run.status {
        RunStatus::Ok => "ok",
        RunStatus::TargetNotReached => "target_not_reached",
    };
    let final_temp = |pick: fn(&crate::solver::CurveRow) -> f64| last.map(pick);
    let diff = run
        .max_surface_centre_difference_pair
        .map(|(s, c)| (pct(case, s) - pct(case, c)).abs());
    let numbers: Vec<(&str, Option<f64>, &str)> = vec![
        ("drying_time_h", run.drying_time.map(|t| t / 3600.0), "h"),
        ("final_hours", last.map(|l| l.time / 3600.0), "h"),
        (
            "final_mean_moisture_pct",
            last.map(|l| pct(case, l.mean)),
            unit,
        ),
        (
            "final_surface_moisture_pct",
            last.map(|l| pct(case, l.surface)),
            unit,
        ),
        (
            "final_centre_moisture_pct",
            last.map(|l| pct(case, l.centre)),
            unit,
        ),
        (
            "max_surface_centre_difference_pct",
            diff.or(Some(0.0)),
            unit,
        ),
        (
            "final_surface_temp_c",
            final_temp(|l| l.surface_temp_c),
            "C",
        ),
        ("final_centre_temp_c", final_temp(|l| l.centre_temp_c), "C"),
        (
            "water_removed_kg_m2",
            Some(run.water_removed),
            "kg per m2 of exposed surface",
        ),
        (
            "mass_balance_error",
            Some(run.mass_balance_error),
            "relative to the water held at the start",
        ),
        ("cells", Some(run.cells as f64), ""),
        (
            "time_steps",
            Some(run.stats.accepted as f64),
            "accepted steps",
        ),
        ("solve_seconds", Some(run.solve_seconds), "s"),
    ];
    // A key sheet: no header row, the first row is `title`.
    ws.set_column_width(0, 34)?;
    ws.set_column_width(1, 24)?;
    ws.set_column_width(2, 40)?;
    let mut row = 0;
    ws.write_string(row, 0, "title")?;
    ws.write_string(row, 1, &case.title)?;
    row += 1;
    ws.write_string(row, 0, "status")?;
    ws.write_string(row, 1, status)?;
    row += 1;
    for (key, value, unit) in numbers {
        ws.write_string(row, 0, key)?;
        let fmt = if key == "mass_balance_error" {
            &f.small
        } else {
            &f.number
        };
        opt_number(ws, row, 1, value, fmt)?;
        if !unit.is_empty() {
            ws.write_string(row, 2, unit)?;
        }
        row += 1;
    }
    for (key, value) in [
        ("program_version", PROGRAM_VERSION),
        ("input_sha256", r.input_sha256),
    ] {
        ws.write_string(row, 0, key)?;
        ws.write_string(row, 1, value)?;
        row += 1;
    }
    for w in r.warnings {
        ws.write_string(row, 0, "warning")?;
        ws.write_string_with_format(row, 1, w, &f.wrap)?;
        row += 1;
    }
    for c in CAUTIONS {
        ws.write_string(row, 0, "caution")?;
        ws.write_string(row, 1, c)?;
        row += 1;
    }
    Ok(())
}

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
    h
}

/// One curve row as cells: numbers (None = empty) and the step label.
fn curve_cells(case: &Case, row: &crate::solver::CurveRow) -> (Vec<Option<f64>>, String) {
    let rate = case.basis.slope_from_dry(row.mean) * row.drying_rate * 3600.0;
    let mut v = vec![
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
    ];
    v.extend(row.layer_means.iter().map(|&x| Some(pct(case, x))));
    let label = case
        .schedule
        .get(row.step)
        .map_or_else(String::new, |s| s.label.clone());
    (v, label)
}

fn curves_sheet(wb: &mut Workbook, r: &ResultInput<'_>, f: &Formats) -> Result<(), XlsxError> {
    let case = r.case;
    let ws = wb.add_worksheet();
    ws.set_name("curves")?;
    let headers = curve_headers(case.layers.len());
    header_row(ws, 0, &headers, f)?;
    for (i, row) in r.run.curves.iter().enumerate() {
        let excel_row = i as u32 + 1;
        let (values, label) = curve_cells(case, row);
        for (c, v) in values.iter().enumerate() {
            // The step label sits in column 11; layer means follow it.
            let col = if c < 11 { c } else { c + 1 } as u16;
            let fmt = if c == 0 { &f.hours } else { &f.number };
            opt_number(ws, excel_row, col, *v, fmt)?;
        }
        ws.write_string(excel_row, 11, &label)?;
    }
    let n = r.run.curves.len() as u32;
    let mut chart = Chart::new(ChartType::ScatterStraight);
    for (col, name) in [(1u16, "mean"), (2, "surface"), (3, "centre")] {
        chart
            .add_series()
            .set_name(name)
            .set_categories(("curves", 1, 0, n, 0))
            .set_values(("curves", 1, col, n, col));
    }
    if !r.measured.is_empty() {
        // Measured points sit to the right of the table, so the chart can reference them.
        let base = (headers.len() + 1) as u16;
        ws.write_string_with_format(0, base, "measured_hours", &f.header)?;
        ws.write_string_with_format(0, base + 1, "measured_moisture_pct", &f.header)?;
        for (i, m) in r.measured.iter().enumerate() {
            ws.write_number(i as u32 + 1, base, m.hours)?;
            ws.write_number(i as u32 + 1, base + 1, m.moisture_pct)?;
        }
        let m = r.measured.len() as u32;
        chart
            .add_series()
            .set_name("measured")
            .set_categories(("curves", 1, base, m, base))
            .set_values(("curves", 1, base + 1, m, base + 1))
            .set_marker(ChartMarker::new().set_type(ChartMarkerType::Circle))
            .set_format(rust_xlsxwriter::ChartFormat::new().set_no_line());
    }
    chart
        .title()
        .set_name(&chart_text(&format!("Drying curve: {}", case.title)));
    chart.x_axis().set_name("time, h");
    chart
        .y_axis()
        .set_name(&format!("moisture, {}", basis_unit(case)));
    chart.legend().set_position(ChartLegendPosition::Bottom);
    chart.set_width(720).set_height(420);
    let chart_col = (headers.len() + 4) as u16;
    ws.insert_chart(1, chart_col, &chart)?;
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

/// Profile column headers for the given times (s).
pub fn profile_header(hours: f64) -> String {
    format!("moisture_pct_at_{}h", compact(hours))
}

fn profiles_sheet(wb: &mut Workbook, r: &ResultInput<'_>, f: &Formats) -> Result<(), XlsxError> {
    let case = r.case;
    let run = r.run;
    let ws = wb.add_worksheet();
    ws.set_name("profiles")?;
    let mut headers = vec![String::from("position_mm")];
    headers.extend(run.profiles.iter().map(|p| profile_header(p.time / 3600.0)));
    header_row(ws, 0, &headers, f)?;
    for (i, pos) in run.positions.iter().enumerate() {
        let row = i as u32 + 1;
        ws.write_number_with_format(row, 0, pos * 1000.0, &f.number)?;
        for (c, p) in run.profiles.iter().enumerate() {
            let v = p
                .moisture
                .as_ref()
                .and_then(|m| m.get(i))
                .map(|&x| pct(case, x));
            opt_number(ws, row, c as u16 + 1, v, &f.number)?;
        }
    }
    let n = run.positions.len() as u32;
    let mut chart = Chart::new(ChartType::ScatterStraight);
    for (c, p) in run.profiles.iter().enumerate() {
        if p.moisture.is_none() {
            continue;
        }
        let col = c as u16 + 1;
        chart
            .add_series()
            .set_name(&format!("{} h", compact(p.time / 3600.0)))
            .set_categories(("profiles", 1, 0, n, 0))
            .set_values(("profiles", 1, col, n, col));
    }
    chart.title().set_name("Moisture profiles");
    chart.x_axis().set_name("distance from face A, mm");
    chart
        .y_axis()
        .set_name(&format!("moisture, {}", basis_unit(case)));
    chart.legend().set_position(ChartLegendPosition::Bottom);
    chart.set_width(720).set_height(420);
    // Every profile time after the run's end: no series, so no chart (the run warns).
    if run.profiles.iter().any(|p| p.moisture.is_some()) {
        ws.insert_chart(1, headers.len() as u16 + 1, &chart)?;
    }
    Ok(())
}

fn check_sheet(
    ws: &mut Worksheet,
    case: &Case,
    check: &CheckTable,
    f: &Formats,
) -> Result<(), XlsxError> {
    ws.set_name("check")?;
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
    for (i, row) in check.rows.iter().enumerate() {
        let r = i as u32 + 1;
        ws.write_number_with_format(r, 0, row.hours, &f.hours)?;
        ws.write_number_with_format(r, 1, row.model, &f.number)?;
        ws.write_number_with_format(r, 2, row.series, &f.number)?;
        ws.write_number_with_format(r, 3, row.model - row.series, &f.small)?;
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

/// The model's mean moisture (basis %) at `hours`, by linear interpolation between curve rows.
fn model_mean_at(case: &Case, run: &RunResult, hours: f64) -> Option<f64> {
    let t = hours * 3600.0;
    let rows = &run.curves;
    let j = rows.partition_point(|r| r.time < t);
    let value = if j < rows.len() && (rows[j].time - t).abs() <= 1e-9 * t.max(1.0) {
        rows[j].mean
    } else if j == 0 || j == rows.len() {
        return None;
    } else {
        let (a, b) = (&rows[j - 1], &rows[j]);
        a.mean + (b.mean - a.mean) * (t - a.time) / (b.time - a.time)
    };
    Some(pct(case, value))
}

/// The `fit` sheet: the parameter table (no parameter is estimated in this version), then the
/// model against the measured points with goodness-of-fit figures.
fn fit_sheet(ws: &mut Worksheet, r: &ResultInput<'_>, f: &Formats) -> Result<(), XlsxError> {
    ws.set_name("fit")?;
    let names = |v: &[&str]| v.iter().map(|s| s.to_string()).collect::<Vec<_>>();
    header_row(
        ws,
        0,
        &names(&["parameter", "estimate", "low_95", "high_95", "unit"]),
        f,
    )?;
    let mut row = 2;
    ws.write_string(
        row,
        0,
        "No parameter is estimated in this version; below, the model against the measured points.",
    )?;
    row += 2;
    let start = row;
    for (c, h) in [
        "hours",
        "measured_moisture_pct",
        "model_moisture_pct",
        "residual_pct",
    ]
    .iter()
    .enumerate()
    {
        ws.write_string_with_format(row, c as u16, *h, &f.header)?;
    }
    let mut residuals = Vec::new();
    let mut measured_values = Vec::new();
    for m in r.measured {
        row += 1;
        ws.write_number_with_format(row, 0, m.hours, &f.hours)?;
        ws.write_number_with_format(row, 1, m.moisture_pct, &f.number)?;
        let model = model_mean_at(r.case, r.run, m.hours);
        opt_number(ws, row, 2, model, &f.number)?;
        if let Some(model) = model {
            ws.write_number_with_format(row, 3, model - m.moisture_pct, &f.number)?;
            residuals.push(model - m.moisture_pct);
            measured_values.push(m.moisture_pct);
        }
    }
    let n = residuals.len();
    if n > 0 {
        let nf = n as f64;
        let sse: f64 = residuals.iter().map(|e| e * e).sum();
        let mean = measured_values.iter().sum::<f64>() / nf;
        let sst: f64 = measured_values
            .iter()
            .map(|v| (v - mean) * (v - mean))
            .sum();
        let stats: [(&str, Option<f64>, &str); 4] = [
            ("points_compared", Some(nf), ""),
            ("rmse_pct", Some((sse / nf).sqrt()), basis_unit(r.case)),
            (
                "bias_pct",
                Some(residuals.iter().sum::<f64>() / nf),
                "model - measured",
            ),
            (
                "r_squared",
                (sst > 0.0).then(|| 1.0 - sse / sst),
                "1 - SSE/SST",
            ),
        ];
        let col = 6;
        ws.write_string_with_format(start, col, "goodness_of_fit", &f.header)?;
        ws.set_column_width(col, 20)?;
        for (i, (key, value, unit)) in stats.into_iter().enumerate() {
            let rr = start + 1 + i as u32;
            ws.write_string(rr, col, key)?;
            opt_number(ws, rr, col + 1, value, &f.number)?;
            ws.write_string(rr, col + 2, unit)?;
        }
    }
    Ok(())
}

fn input_sheet(ws: &mut Worksheet, r: &ResultInput<'_>, f: &Formats) -> Result<(), XlsxError> {
    ws.set_name("input")?;
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
    for row in &run.curves {
        let (values, label) = curve_cells(case, row);
        let mut fields: Vec<String> = values[..11].iter().map(|v| csv_number(*v)).collect();
        fields.push(csv_field(&label));
        fields.extend(values[11..].iter().map(|v| csv_number(*v)));
        out.push_str(&fields.join(","));
        out.push('\n');
    }
    out
}

/// The `profiles` table as CSV.
pub fn profiles_csv(case: &Case, run: &RunResult) -> String {
    let mut headers = vec![String::from("position_mm")];
    headers.extend(run.profiles.iter().map(|p| profile_header(p.time / 3600.0)));
    let mut out = headers.join(",");
    out.push('\n');
    for (i, pos) in run.positions.iter().enumerate() {
        let mut fields = vec![(pos * 1000.0).to_string()];
        fields.extend(run.profiles.iter().map(|p| {
            csv_number(
                p.moisture
                    .as_ref()
                    .and_then(|m| m.get(i))
                    .map(|&x| pct(case, x)),
            )
        }));
        out.push_str(&fields.join(","));
        out.push('\n');
    }
    out
}

/// Writes `bytes` to `path` through a temporary file in the same folder and a rename, so a
/// reader never sees half a file. The temporary name starts with a dot (ignored by watchers).
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
    tmp.as_file().sync_all()?;
    tmp.persist(path).map_err(|e| e.error)?;
    Ok(())
}
