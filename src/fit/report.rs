//! Everything the result's `fit` sheet shows, computed here so that the workbook writer only
//! lays it out: the model against the measured points with its goodness of fit, the
//! thin-layer drying models and the slope method, and an estimation where one was asked for.

use crate::analytic::Shape;
use crate::case::{Case, Exposed, Geometry, Measured};
use crate::solver::RunResult;

use super::estimate::Estimation;
use super::thin_layer::{Goodness, ModelFit, fit_drying_models, goodness, slope_method};

/// One measured point beside the model, moistures in % on the case's basis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ComparedPoint {
    /// Time, h.
    pub hours: f64,
    /// Measured mean moisture.
    pub measured_pct: f64,
    /// The run's mean moisture there (input parameters); `None` outside the run.
    pub model_pct: Option<f64>,
    /// The mean moisture with the estimated parameters, where an estimation ran.
    pub fitted_pct: Option<f64>,
}

/// Goodness of the model against the measured points, in % on the case's basis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Agreement {
    /// Points compared.
    pub points: usize,
    /// RMSE, %.
    pub rmse_pct: f64,
    /// Mean of model - measured, %.
    pub bias_pct: f64,
    /// 1 - SSE/SST; `None` where the measured values do not vary.
    pub r2: Option<f64>,
}

/// The `fit` sheet's content.
#[derive(Debug, Clone, PartialEq)]
pub struct FitReport {
    /// The estimation, where the `fit` sheet asked for one.
    pub estimation: Option<Estimation>,
    /// Every measured point with the model beside it.
    pub points: Vec<ComparedPoint>,
    /// The run (input parameters) against the measured points.
    pub model: Option<Agreement>,
    /// The model with the estimated parameters against the measured points.
    pub fitted: Option<Agreement>,
    /// Thin-layer drying models fitted to the moisture ratio, best first.
    pub drying_models: Vec<ModelFit>,
    /// Crank's slope method, m²/s.
    pub slope_d_eff: Option<f64>,
    /// Why the drying models were not fitted, in plain words (too few points, no drying).
    pub drying_models_note: Option<String>,
}

/// The run's mean moisture (dry fraction) at `t` (s), by linear interpolation between curve
/// rows; `None` outside the rows.
pub fn run_mean_at(run: &RunResult, t: f64) -> Option<f64> {
    let rows = &run.curves;
    let j = rows.partition_point(|r| r.time < t);
    if j < rows.len() && (rows[j].time - t).abs() <= 1e-9 * t.max(1.0) {
        return Some(rows[j].mean);
    }
    if j == 0 || j == rows.len() {
        return None;
    }
    let (a, b) = (&rows[j - 1], &rows[j]);
    Some(a.mean + (b.mean - a.mean) * (t - a.time) / (b.time - a.time))
}

fn agreement(measured: &[f64], model: &[f64]) -> Option<Agreement> {
    let n = measured.len();
    if n == 0 {
        return None;
    }
    let g: Goodness = goodness(measured, model, 0);
    let bias = model.iter().zip(measured).map(|(a, b)| a - b).sum::<f64>() / n as f64;
    Some(Agreement {
        points: n,
        rmse_pct: g.rmse,
        bias_pct: bias,
        r2: g.r2,
    })
    .filter(|a| a.rmse_pct.is_finite() && a.bias_pct.is_finite())
}

/// The half-thickness or radius and shape of Crank's series for the case's body.
fn series_body(case: &Case) -> (Shape, f64) {
    match (case.geometry, case.exposed) {
        (Geometry::Slab, Exposed::Both) => (Shape::Slab, 0.5 * case.total_thickness()),
        (Geometry::Slab, _) => (Shape::Slab, case.total_thickness()),
        (Geometry::Cylinder, _) => (Shape::Cylinder, case.total_thickness()),
        (Geometry::Sphere, _) => (Shape::Sphere, case.total_thickness()),
    }
}

/// Builds the report from the run of the case as given, the measured points and an
/// estimation (if one was made).
pub fn report(
    case: &Case,
    run: &RunResult,
    measured: &[Measured],
    estimation: Option<Estimation>,
) -> FitReport {
    let pct = |x: f64| case.basis.from_dry_fraction(x);
    let fitted_values = estimation
        .as_ref()
        .and_then(|e| e.fitted.as_ref())
        .filter(|f| f.len() == measured.len());
    let points: Vec<ComparedPoint> = measured
        .iter()
        .enumerate()
        .map(|(i, m)| ComparedPoint {
            hours: m.time / 3600.0,
            measured_pct: pct(m.moisture),
            model_pct: run_mean_at(run, m.time).map(pct).filter(|v| v.is_finite()),
            fitted_pct: fitted_values.map(|f| pct(f[i])).filter(|v| v.is_finite()),
        })
        .collect();
    let pairs = |pick: fn(&ComparedPoint) -> Option<f64>| {
        let (a, b): (Vec<f64>, Vec<f64>) = points
            .iter()
            .filter_map(|p| pick(p).map(|v| (p.measured_pct, v)))
            .unzip();
        agreement(&a, &b)
    };
    let model = pairs(|p| p.model_pct);
    let fitted = pairs(|p| p.fitted_pct);

    // Moisture ratio with the first step's equilibrium, t in hours.
    let x0 = run.curves.first().map(|c| c.mean);
    let x_eq = run.curves.first().and_then(|c| c.equilibrium);
    let (mut t_h, mut mr) = (Vec::new(), Vec::new());
    if let (Some(x0), Some(x_eq)) = (x0, x_eq)
        && (x0 - x_eq).abs() > 1e-12
    {
        for m in measured {
            t_h.push(m.time / 3600.0);
            mr.push((m.moisture - x_eq) / (x0 - x_eq));
        }
    }
    let spread = mr.iter().copied().fold(f64::NEG_INFINITY, f64::max)
        - mr.iter().copied().fold(f64::INFINITY, f64::min);
    // A fit to fewer points than a model's parameters, or to a flat series, gives numbers that
    // mean nothing; say so instead of ranking them.
    let drying_models_note = if mr.is_empty() {
        Some(String::from(
            "no drying models: the moisture ratio needs the first step's equilibrium moisture \
             (an isotherm, a fixed surface or equilibrium_moisture_pct) and a start away from it",
        ))
    } else if mr.len() < 3 {
        Some(format!(
            "no drying models: {} measured point(s); at least 3 are needed",
            mr.len()
        ))
    } else if spread.is_nan() || spread < 1e-6 {
        Some(String::from(
            "no drying models: the measured moisture does not change, so there is no drying \
             curve to fit",
        ))
    } else {
        None
    };
    let (drying_models, slope_d_eff) = if drying_models_note.is_none() {
        let (shape, length) = series_body(case);
        let t_s: Vec<f64> = t_h.iter().map(|h| h * 3600.0).collect();
        (
            fit_drying_models(&t_h, &mr),
            slope_method(shape, length, &t_s, &mr).filter(|d| d.is_finite()),
        )
    } else {
        (Vec::new(), None)
    };
    FitReport {
        estimation,
        points,
        model,
        fitted,
        drying_models,
        slope_d_eff,
        drying_models_note,
    }
}
