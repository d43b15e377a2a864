//! The result's `variants` sheet (format 1.1: one row per variant in input order) and
//! dampfront's extension `variant_curves` (every variant's mean-moisture drying curve, the base
//! case's first), with a native chart of those curves on the `variants` sheet.

use rust_xlsxwriter::{
    Chart, ChartLegendPosition, ChartType, Format, FormatAlign, Workbook, XlsxError,
};

use super::write::{opt_number as number, opt_plain};
use crate::study::run::Outcome;

/// The `variants` sheet's columns, exactly as the format page lists them, then dampfront's
/// `problems` (what kept a variant from running).
pub const VARIANT_COLUMNS: [&str; 9] = [
    "variant",
    "overrides",
    "status",
    "drying_time_h",
    "final_mean_moisture_pct",
    "max_surface_centre_difference_pct",
    "final_surface_temp_c",
    "final_centre_temp_c",
    "problems",
];

/// Most curves drawn in the chart (every curve is on `variant_curves` all the same); a chart
/// with hundreds of lines reads as a smear.
pub const MAX_CHART_SERIES: usize = 60;

/// What the variants sheets show.
#[derive(Debug, Clone, Copy)]
pub struct Variants<'a> {
    /// Every variant, in input order.
    pub outcomes: &'a [Outcome],
    /// The base case's curve: (hours, mean moisture %).
    pub base_curve: &'a [(f64, f64)],
    /// `dry basis` or `wet basis`, for the chart's axis.
    pub basis: &'a str,
}

/// Adds `variants` and `variant_curves` to `wb`.
pub fn add_sheets(wb: &mut Workbook, v: &Variants<'_>) -> Result<(), XlsxError> {
    let header = Format::new()
        .set_bold()
        .set_text_wrap()
        .set_align(FormatAlign::Center);
    let num = Format::new().set_num_format("0.000");
    let hours = Format::new().set_num_format("0.00");

    let ws = wb.add_worksheet();
    ws.set_name("variants")?;
    ws.set_landscape();
    // One page wide, header repeated, like every table sheet.
    ws.set_repeat_rows(0, 0)?;
    ws.set_paper_size(9);
    ws.set_print_fit_to_pages(1, 0);
    for (c, name) in VARIANT_COLUMNS.iter().enumerate() {
        ws.write_string_with_format(0, c as u16, *name, &header)?;
        ws.set_column_width(c as u16, 14)?;
    }
    ws.set_row_height(0, 45)?;
    ws.set_column_width(1, 36)?;
    ws.set_column_width(8, 60)?;
    ws.set_freeze_panes(1, 0)?;
    for (i, o) in v.outcomes.iter().enumerate() {
        let row = i as u32 + 1;
        ws.write_string(row, 0, &o.name)?;
        ws.write_string(row, 1, &o.overrides)?;
        ws.write_string(row, 2, o.status.word())?;
        number(ws, row, 3, o.drying_time_h, &hours)?;
        number(ws, row, 4, o.final_mean_moisture_pct, &num)?;
        number(ws, row, 5, o.max_surface_centre_difference_pct, &num)?;
        number(ws, row, 6, o.final_surface_temp_c, &num)?;
        number(ws, row, 7, o.final_centre_temp_c, &num)?;
        let problems: Vec<String> = o.problems.iter().map(ToString::to_string).collect();
        if !problems.is_empty() {
            ws.write_string(row, 8, problems.join("\n"))?;
        }
    }

    // The curves, two columns a run: its name above, hours and mean moisture below.
    let mut runs: Vec<(&str, &[(f64, f64)])> = vec![("base case", v.base_curve)];
    runs.extend(
        v.outcomes
            .iter()
            .filter(|o| !o.curve.is_empty())
            .map(|o| (o.name.as_str(), o.curve.as_slice())),
    );
    let mut chart = Chart::new(ChartType::ScatterStraight);
    chart.title().set_name("Mean moisture of every variant");
    chart.x_axis().set_name("hours");
    chart
        .y_axis()
        .set_name(&format!("mean moisture, % ({})", v.basis));
    chart.legend().set_position(ChartLegendPosition::Right);
    let cs = wb.add_worksheet();
    cs.set_name("variant_curves")?;
    for (k, (name, curve)) in runs.iter().enumerate() {
        let col = (2 * k) as u16;
        cs.write_string_with_format(0, col, *name, &header)?;
        cs.write_string_with_format(1, col, "hours", &header)?;
        cs.write_string_with_format(1, col + 1, "mean_moisture_pct", &header)?;
        cs.set_column_width(col + 1, 14)?;
        // Every cell below the two header rows has the column's number format: given once to
        // the column, not hashed again for each of up to a thousand points (as on `curves`).
        cs.set_column_format(col, &hours)?;
        cs.set_column_format(col + 1, &num)?;
        for (i, (h, x)) in curve.iter().enumerate() {
            let row = i as u32 + 2;
            opt_plain(cs, row, col, Some(*h))?;
            opt_plain(cs, row, col + 1, Some(*x))?;
        }
        if k < MAX_CHART_SERIES && !curve.is_empty() {
            let last = curve.len() as u32 + 1;
            chart
                .add_series()
                .set_name(("variant_curves", 0, col))
                .set_categories(("variant_curves", 2, col, last, col))
                .set_values(("variant_curves", 2, col + 1, last, col + 1));
        }
    }
    cs.set_freeze_panes(2, 0)?;
    cs.set_repeat_rows(0, 1)?;
    cs.set_paper_size(9);
    cs.set_print_fit_to_pages(1, 0);
    if let Ok(ws) = wb.worksheet_from_name("variants") {
        ws.insert_chart_with_offset(v.outcomes.len() as u32 + 3, 0, &chart, 0, 0)?;
    }
    Ok(())
}
