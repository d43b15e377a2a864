//! Solving every variant of a study, in parallel within the job budget (rayon), each with the
//! case time limit of its own and the shared cancel flag.

use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

use rayon::prelude::*;

use super::{Status, Study, Variant};
use crate::solver::{self, Problem, RunControl, RunStatus};
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
            .map(|v| solve_one(base, study, v, default_title, budget))
            .collect()
    };
    match pool {
        Some(p) => p.install(work),
        None => work(),
    }
}

fn solve_one(
    base: &RawBook,
    study: &Study,
    v: &Variant,
    default_title: &str,
    budget: Budget<'_>,
) -> Outcome {
    let mut out = Outcome {
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
    };
    let parsed = match super::parse_variant(base, study, v, default_title) {
        Ok(p) => p,
        Err(problems) => {
            out.problems = problems;
            return out;
        }
    };
    let case = parsed.case.case();
    let problem = Problem::new(&parsed.case);
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
    out.curve = run
        .curves
        .iter()
        .map(|r| (r.time / 3600.0, case.basis.from_dry_fraction(r.mean)))
        .filter(|(h, x)| h.is_finite() && x.is_finite())
        .collect();
    out
}
