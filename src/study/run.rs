//! Solving every variant of a study, in parallel within the job budget (rayon), each with the
//! case time limit of its own and the shared cancel flag.

use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

use rayon::prelude::*;

use super::{Status, Study, Variant};
use crate::case::Case;
use crate::limits::{MAX_VARIANT_CURVE_POINTS, MAX_VARIANTS};
use crate::solver::{self, Problem, RunControl, RunResult, RunStatus};
use crate::workbook::parse::InputProblem;
use crate::workbook::raw::RawBook;
use crate::workbook::write::{SummaryValue, summary_entries};

/// What one variant gave, for the result's `variants` sheet.
#[derive(Debug, Clone, PartialEq)]
pub struct Outcome {
    /// The variant's name.
    pub name: String,
    /// Its overrides as `path=value; ...`.
    pub overrides: String,
    /// How it ended.
    pub status: Status,
    /// When the mean reached the target, h.
    pub drying_time_h: Option<f64>,
    /// Mean moisture at the end, % on the case's basis.
    pub final_mean_moisture_pct: Option<f64>,
    /// Largest surface-centre difference, %.
    pub max_surface_centre_difference_pct: Option<f64>,
    /// Surface temperature at the end, degrees C.
    pub final_surface_temp_c: Option<f64>,
    /// Centre temperature at the end, degrees C.
    pub final_centre_temp_c: Option<f64>,
    /// The mean-moisture drying curve: (hours, mean moisture %), empty when it did not run.
    pub curve: Vec<(f64, f64)>,
    /// Its input problems (status `input_error`) or the solver's message (`solver_error`).
    pub problems: Vec<InputProblem>,
    /// Its warnings as the base case's would read (`SHEET!CELL: text`), from reading and solving.
    pub warnings: Vec<String>,
}

/// Limits each variant's solve shares with a single case.
#[derive(Debug, Clone, Copy, Default)]
pub struct Budget<'a> {
    /// Set to stop every run early.
    pub cancel: Option<&'a AtomicBool>,
    /// Seconds each variant may compute.
    pub case_seconds: Option<f64>,
}

/// Parses and solves every variant of `study` on `base` (in input order), on the threads of
/// `pool` (rayon's global pool when `None`).
pub fn solve_all(
    base: &RawBook,
    study: &Study,
    default_title: &str,
    budget: Budget<'_>,
    pool: Option<&rayon::ThreadPool>,
) -> Vec<Outcome> {
    let work = || {
        study
            .variants
            .par_iter()
            .enumerate()
            .map(|(i, v)| {
                if i < MAX_VARIANTS {
                    solve_one(base, study, v, default_title, budget)
                } else {
                    too_many(study, v, i)
                }
            })
            .collect()
    };
    match pool {
        Some(p) => p.install(work),
        None => work(),
    }
}

/// A variant beyond [`MAX_VARIANTS`]: not run, said at its row.
fn too_many(study: &Study, v: &Variant, i: usize) -> Outcome {
    Outcome {
        problems: vec![InputProblem {
            sheet: study.sheet.clone(),
            cell: v.cell.clone(),
            problem: format!(
                "variant {}: a study runs at most {MAX_VARIANTS} variants and this is variant {}; \
                 split the study into several workbooks",
                v.name,
                i + 1
            ),
        }],
        ..blank(v)
    }
}

fn blank(v: &Variant) -> Outcome {
    Outcome {
        name: v.name.clone(),
        overrides: v.overrides_text(),
        status: Status::InputError,
        drying_time_h: None,
        final_mean_moisture_pct: None,
        max_surface_centre_difference_pct: None,
        final_surface_temp_c: None,
        final_centre_temp_c: None,
        curve: Vec::new(),
        problems: Vec::new(),
        warnings: Vec::new(),
    }
}

/// At most `most` points of `curve`, spread evenly, the first and last kept.
pub fn thin(curve: Vec<(f64, f64)>, most: usize) -> Vec<(f64, f64)> {
    let n = curve.len();
    if n <= most || most < 2 {
        return curve;
    }
    (0..most).map(|k| curve[k * (n - 1) / (most - 1)]).collect()
}

fn solve_one(
    base: &RawBook,
    study: &Study,
    v: &Variant,
    default_title: &str,
    budget: Budget<'_>,
) -> Outcome {
    let mut out = blank(v);
    let parsed = match super::parse_variant(base, study, v, default_title) {
        Ok(p) => p,
        Err(problems) => {
            out.problems = problems;
            return out;
        }
    };
    out.warnings.clone_from(&parsed.warnings);
    // A variant writes no profiles: it asks for none, so none are recorded or warned about.
    let mut case = parsed.case.into_case();
    case.profile_times = Some(Vec::new());
    let valid = match case.validated() {
        Ok(valid) => valid,
        Err(problems) => {
            out.problems = problems
                .iter()
                .map(|p| InputProblem {
                    sheet: study.sheet.clone(),
                    cell: v.cell.clone(),
                    problem: format!("variant {}: {p}", v.name),
                })
                .collect();
            return out;
        }
    };
    let case = valid.case();
    let problem = Problem::new(&valid);
    let started = Instant::now();
    let deadline = budget.case_seconds.and_then(|s| {
        Some((
            started.checked_add(Duration::try_from_secs_f64(s).ok()?)?,
            s,
        ))
    });
    let control = RunControl {
        cancel: budget.cancel,
        progress: None,
        deadline,
    };
    let run = match solver::run(&problem, &control) {
        Ok(run) => run,
        Err(e) => {
            out.status = Status::SolverError;
            out.problems = vec![InputProblem {
                sheet: study.sheet.clone(),
                cell: v.cell.clone(),
                problem: format!("variant {}: the solver stopped: {e}", v.name),
            }];
            return out;
        }
    };
    out.warnings.extend(run.warnings.iter().cloned());
    out.status = match run.status {
        RunStatus::Ok => Status::Ok,
        RunStatus::TargetNotReached => Status::TargetNotReached,
    };
    let entries = summary_entries(case, &run, "");
    let number = |key: &str| {
        entries
            .iter()
            .find(|e| e.key == key)
            .and_then(|e| match e.value {
                SummaryValue::Number(x) if x.is_finite() => Some(x),
                _ => None,
            })
    };
    out.drying_time_h = number("drying_time_h");
    out.final_mean_moisture_pct = number("final_mean_moisture_pct");
    out.max_surface_centre_difference_pct = number("max_surface_centre_difference_pct");
    out.final_surface_temp_c = number("final_surface_temp_c");
    out.final_centre_temp_c = number("final_centre_temp_c");
    out.curve = thin(mean_curve(case, &run), MAX_VARIANT_CURVE_POINTS);
    out
}

/// A run's mean moisture against time: (hours, mean moisture % on the case's basis).
pub fn mean_curve(case: &Case, run: &RunResult) -> Vec<(f64, f64)> {
    run.curves
        .iter()
        .map(|r| (r.time / 3600.0, case.basis.from_dry_fraction(r.mean)))
        .filter(|(h, x)| h.is_finite() && x.is_finite())
        .collect()
}

#[cfg(test)]
mod tests {
    use super::thin;

    #[test]
    fn thinning_keeps_the_ends_and_spreads_the_rest() {
        let curve: Vec<(f64, f64)> = (0..=100).map(|i| (f64::from(i), 0.0)).collect();
        let t = thin(curve.clone(), 11);
        let hours: Vec<f64> = t.iter().map(|p| p.0).collect();
        assert_eq!(
            hours,
            (0..=10).map(|i| f64::from(i * 10)).collect::<Vec<_>>()
        );
        assert_eq!(thin(curve.clone(), 500), curve);
    }
}
