//! The moisture (and coupled heat) solver: a finite-volume mesh graded by the surface Biot number,
//! ESDIRK4(3) time steps (five implicit stages, each a Newton solve on a tridiagonal or 2x2
//! block-tridiagonal system) with an embedded error estimate, and a run loop that follows the
//! schedule. Knows nothing of files.
//!
//! Layers of the API: [`Problem`] (immutable, built from a case), [`Stepper`] (owns the state,
//! the step control and a [`Workspace`]; the caller drives `step()`), and [`run`] (the loop that
//! produces a [`RunResult`]).

pub mod blocktri;
pub mod coupled;
mod driver;
pub mod esdirk;
mod exp;
pub mod flux;
pub mod mesh;
pub mod method;
pub mod model;
pub mod observe;
pub mod problem;
mod schedule;
pub mod state;
mod stepper;
mod sums;
pub mod tridiag;
mod wide;
mod workspace;

pub use driver::{CurveRow, Profile, RunControl, RunResult, RunStatus, run};
pub use problem::Problem;
pub use schedule::{StepEnd, StepRecord};
pub use state::State;
pub use stepper::{Controller, Exchanged, Stats, Stepper, StopReason};
pub use workspace::Workspace;

use crate::case::Case;

/// Why a run could not finish.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SolveError {
    /// Step-size control gave up.
    #[error(
        "the time step fell to {dt:.3e} s at {hours:.4} h without meeting the error test; \
         the case is too stiff or ill-posed there (check diffusivity and surface values)"
    )]
    StepTooSmall {
        /// Time of failure, h.
        hours: f64,
        /// The step that failed, s.
        dt: f64,
    },
    /// The run took more step attempts than any ordinary case needs.
    #[error(
        "the run needed more than {steps} time steps and stopped at {hours:.4} h; the case is \
         extremely stiff (check isotherm parameters, diffusivity and surface values)"
    )]
    TooManySteps {
        /// Time reached, h.
        hours: f64,
        /// Step attempts made.
        steps: u64,
    },
    /// Newton's method failed where it had succeeded before.
    #[error("Newton iterations failed at {hours:.4} h")]
    NewtonFailed {
        /// Time of failure, h.
        hours: f64,
    },
    /// The caller asked the run to stop.
    #[error("the run was cancelled at {hours:.4} h")]
    Cancelled {
        /// Time reached, h.
        hours: f64,
    },
    /// The run used up its time budget ([`RunControl::deadline`]).
    #[error(
        "the run was stopped after {seconds:.0} s of computing at {hours:.4} h of {end_hours:.4} h \
         (the time budget per case); use fewer cells_per_layer, a larger tolerance or a shorter \
         end_hours, or allow more time with --case-seconds"
    )]
    OutOfTime {
        /// Time reached, h.
        hours: f64,
        /// The end time of the run, h.
        end_hours: f64,
        /// The budget that ran out, s.
        seconds: f64,
    },
    /// The case did not pass validation.
    #[error("the case is not valid: {0}")]
    Invalid(String),
}

/// Validates and runs a case with no cancellation or progress.
pub fn solve(case: &Case) -> Result<RunResult, SolveError> {
    let valid = case
        .clone()
        .validated()
        .map_err(|problems| SolveError::Invalid(problems[0].to_string()))?;
    run(&Problem::new(&valid), &RunControl::default())
}
