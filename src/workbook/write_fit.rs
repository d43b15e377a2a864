//! The result's `fit` sheet: lays out the [`FitReport`] that `fit/` computed. First the
//! parameter table (format 1.1: `parameter`, `estimate`, `low_95`, `high_95`, `unit`), then
//! after an empty row the estimation's figures, findings and correlation matrix, the
//! thin-layer drying models with the slope method, and the model against the measured points.

use rust_xlsxwriter::{Worksheet, XlsxError};

use crate::fit::{Estimation, FitReport};

use super::{Formats, ResultInput, basis_unit, header_row, opt_number, print_table};

/// Writes the `fit` sheet.
pub(super) fn fit_sheet(
    ws: &mut Worksheet,
    r: &ResultInput<'_>,
    f: &Formats,
) -> Result<(), XlsxError> {
    let owned;
    let report = match r.fit {
        Some(report) => report,
        None => {
            let measured: Vec<_> = r.measured.iter().map(|m| m.to_si()).collect();
            owned = crate::fit::report(r.case, r.run, &measured, None);
            &owned
        }
    };
    ws.set_name("fit")?;
    print_table(ws)?;
    let names = |v: &[&str]| v.iter().map(|s| s.to_string()).collect::<Vec<_>>();
    header_row(
        ws,
        0,
        &names(&["parameter", "estimate", "low_95", "high_95", "unit"]),
        f,
    )?;
    let mut row = 0;
    if let Some(e) = &report.estimation {
        for p in &e.parameters {
            row += 1;
            ws.write_string(row, 0, p.parameter.column())?;
            for (c, v) in [p.estimate, p.low_95, p.high_95].into_iter().enumerate() {
                opt_number(ws, row, c as u16 + 1, v, &f.small)?;
            }
            ws.write_string(row, 4, p.parameter.unit())?;
        }
    }
    row += 2;
    row = estimation_block(ws, r, report, f, row)?;
    row += 2;
    row = drying_model_table(ws, report, f, row)?;
    row += 2;
    comparison_table(ws, r, report, f, row)?;
    Ok(())
}

/// Key rows of the estimation, its findings in plain words and the correlation matrix; or one
/// line saying that nothing was asked for. Returns the last row written.
fn estimation_block(
    ws: &mut Worksheet,
    r: &ResultInput<'_>,
    report: &FitReport,
    f: &Formats,
    mut row: u32,
) -> Result<u32, XlsxError> {
    let Some(e) = &report.estimation else {
        ws.write_string(
            row,
            0,
            "No parameter was estimated: list the ones to estimate on a fit sheet (key \
             parameters: d_ref, activation_energy, moisture_coef, surface_coef, hm). Below, the \
             drying-model fits and the model against the measured points.",
        )?;
        return Ok(row);
    };
    let fitted = report.fitted;
    let keys: [(&str, Option<f64>, &str, &super::Format); 7] = [
        (
            "estimation_points",
            Some(e.points as f64),
            "after time 0",
            &f.count,
        ),
        (
            "estimation_iterations",
            Some(e.iterations as f64),
            "",
            &f.count,
        ),
        ("engine_runs", Some(e.runs as f64), "", &f.count),
        (
            "t_quantile_95",
            e.t_quantile.filter(|t| t.is_finite()),
            "Student's t, 0.975, points - parameters degrees of freedom",
            &f.number,
        ),
        (
            "residual_sd_pct",
            e.residual_sd.map(|s| 100.0 * s),
            "% dry basis",
            &f.number,
        ),
        (
            "fitted_rmse_pct",
            fitted.map(|a| a.rmse_pct),
            basis_unit(r.case),
            &f.number,
        ),
        ("fitted_r_squared", fitted.and_then(|a| a.r2), "", &f.number),
    ];
    for (key, value, unit, format) in keys {
        ws.write_string(row, 0, key)?;
        opt_number(ws, row, 1, value, format)?;
        ws.write_string(row, 2, unit)?;
        row += 1;
    }
    if e.messages.is_empty() {
        ws.write_string(row, 0, "message")?;
        ws.write_string(
            row,
            1,
            "The estimation converged; no parameter was found hard to determine.",
        )?;
        row += 1;
    }
    for m in &e.messages {
        ws.write_string(row, 0, "message")?;
        ws.write_string(row, 1, m)?;
        row += 1;
    }
    correlation(ws, e, f, row + 1)
}

/// The correlation matrix of the estimated parameters. Returns the last row written.
fn correlation(
    ws: &mut Worksheet,
    e: &Estimation,
    f: &Formats,
    mut row: u32,
) -> Result<u32, XlsxError> {
    let Some(c) = &e.correlation else {
        return Ok(row);
    };
    let names: Vec<&str> = e
        .parameters
        .iter()
        .filter(|p| p.estimate.is_some())
        .map(|p| p.parameter.column())
        .collect();
    if names.len() != c.nrows() {
        return Ok(row);
    }
    ws.write_string_with_format(row, 0, "correlation", &f.header)?;
    for (k, n) in names.iter().enumerate() {
        ws.write_string_with_format(row, k as u16 + 1, *n, &f.header)?;
    }
    for (i, n) in names.iter().enumerate() {
        row += 1;
        ws.write_string(row, 0, *n)?;
        for k in 0..names.len() {
            opt_number(ws, row, k as u16 + 1, Some(c[[i, k]]), &f.number)?;
        }
    }
    Ok(row)
}

/// The thin-layer drying models (t in hours, MR with the first step's equilibrium), best
/// first, then the slope method's diffusivity (format 1.1). Returns the last row written.
fn drying_model_table(
    ws: &mut Worksheet,
    report: &FitReport,
    f: &Formats,
    mut row: u32,
) -> Result<u32, XlsxError> {
    let headers = [
        "drying_model",
        "k_per_h",
        "n",
        "a",
        "c",
        "r2",
        "rmse",
        "reduced_chi_square",
    ];
    for (c, h) in headers.iter().enumerate() {
        ws.write_string_with_format(row, c as u16, *h, &f.header)?;
    }
    for fit in &report.drying_models {
        row += 1;
        ws.write_string(row, 0, fit.model.name())?;
        let values = [
            Some(fit.k_per_h),
            fit.n,
            fit.a,
            fit.c,
            fit.goodness.r2,
            Some(fit.goodness.rmse),
            fit.goodness.reduced_chi_square,
        ];
        for (c, v) in values.iter().enumerate() {
            // k, n, a, c to four significant figures' worth; the statistics can be tiny.
            let format = if c < 4 { &f.number } else { &f.small };
            opt_number(ws, row, c as u16 + 1, *v, format)?;
        }
    }
    if let Some(note) = &report.drying_models_note {
        row += 1;
        ws.write_string(row, 0, "note")?;
        ws.write_string(row, 1, note)?;
    }
    row += 2;
    ws.write_string(row, 0, "slope_method_d_eff_m2_s")?;
    opt_number(ws, row, 1, report.slope_d_eff, &f.small)?;
    ws.write_string(row, 2, "m²/s")?;
    Ok(row)
}

/// The model (and the fitted model) against each measured point, with the goodness of fit
/// beside the table in columns G to I.
fn comparison_table(
    ws: &mut Worksheet,
    r: &ResultInput<'_>,
    report: &FitReport,
    f: &Formats,
    mut row: u32,
) -> Result<(), XlsxError> {
    let start = row;
    let with_fitted = report.points.iter().any(|p| p.fitted_pct.is_some());
    let mut headers = vec![
        "hours",
        "measured_moisture_pct",
        "model_moisture_pct",
        "residual_pct",
    ];
    if with_fitted {
        headers.push("fitted_moisture_pct");
    }
    for (c, h) in headers.iter().enumerate() {
        ws.write_string_with_format(row, c as u16, *h, &f.header)?;
    }
    for p in &report.points {
        row += 1;
        ws.write_number_with_format(row, 0, p.hours, &f.hours)?;
        opt_number(ws, row, 1, Some(p.measured_pct), &f.number)?;
        opt_number(ws, row, 2, p.model_pct, &f.number)?;
        opt_number(
            ws,
            row,
            3,
            p.model_pct.map(|m| m - p.measured_pct),
            &f.number,
        )?;
        if with_fitted {
            opt_number(ws, row, 4, p.fitted_pct, &f.number)?;
        }
    }
    let mut stats: Vec<(&str, Option<f64>, &str)> = Vec::new();
    if let Some(a) = report.model {
        stats.extend([
            ("points_compared", Some(a.points as f64), ""),
            ("rmse_pct", Some(a.rmse_pct), basis_unit(r.case)),
            ("bias_pct", Some(a.bias_pct), "model - measured"),
            ("r_squared", a.r2, "1 - SSE/SST"),
        ]);
    }
    if let Some(a) = report.fitted {
        stats.extend([
            ("fitted_rmse_pct", Some(a.rmse_pct), basis_unit(r.case)),
            ("fitted_bias_pct", Some(a.bias_pct), "fitted - measured"),
            ("fitted_r_squared", a.r2, "1 - SSE/SST"),
        ]);
    }
    if !stats.is_empty() {
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
