//! Time integration methods behind one interface, so that the stepper drives any of them, for
//! either model block size, the same way.
//!
//! A [`Method`] attempts a step of a given length from the current state: it solves its implicit
//! stages through the [`Model`], estimates the local error in the unknowns, integrates what
//! crossed the faces with its own quadrature (so the water and energy balances close), and keeps
//! what it needs for dense output inside the step. The stepper owns the step-size control
//! ([`super::Controller`]), landings and triggers.
//!
//! The one method is ESDIRK4(3)6L\[2\]SA ([`super::esdirk`]). The methods before it were not kept
//! as references, since the Crank, conduction and balance tests check the method in use directly:
//! extrapolated backward Euler with step doubling (three implicit solves per step, steps growing
//! as tol^-1/2), then TR-BDF2 (Hosea & Shampine 1996: second order, two implicit stages). On the
//! bench problems ESDIRK4(3) reaches the same error in mean moisture ratio as TR-BDF2 in 1.3-2.7x
//! less time (more at tight tolerances), and unlike TR-BDF2, whose stability function is negative
//! for z < -(1 + sqrt 2), its stability function stays >= 0 on the whole negative real axis: a
//! decaying mode never steps past its equilibrium.

use super::flux::NewtonFailure;
use super::model::{Conditions, Model};
use super::state::State;
use super::stepper::Exchanged;

/// What the exposed faces see at each time of the step in force (built by the stepper).
pub trait ConditionsAt {
    /// The conditions at time `t`, s.
    fn at(&self, t: f64) -> Conditions;
}

/// The outcome of a successful attempt.
#[derive(Debug, Clone, Copy)]
pub struct Attempt {
    /// Scaled local error estimate (accept when <= 1).
    pub error: f64,
    /// What crossed the faces over the step.
    pub exchanged: Exchanged,
    /// Newton iterations spent.
    pub newton_iterations: usize,
}

/// A one-step time integration method.
pub trait Method {
    /// Order of the local error estimate minus one: the step-size controller's exponent is
    /// 1 / (this + 1).
    fn error_order(&self) -> u32;

    /// Attempts a step of `dt` from `(t, y)`. On success the end state is [`Method::candidate`].
    fn attempt(
        &mut self,
        model: &mut dyn Model,
        conditions: &dyn ConditionsAt,
        t: f64,
        dt: f64,
        y: &State,
    ) -> Result<Attempt, NewtonFailure>;

    /// The end state of the last successful attempt.
    fn candidate(&self) -> &State;

    /// The water gained (kg per m2 of face A) from the start of the last successful attempt,
    /// of length dt, to fraction s of it, by the method's dense output: dt sum_k w[k] s^(k+1),
    /// with the weights w returned. It locates a mean-moisture trigger inside the attempt.
    fn candidate_gain(&self) -> [f64; 4];

    /// Swaps the candidate with `state` (the stepper accepts the step of `dt` that ends at
    /// `t_end`), and keeps what dense output over the accepted step needs.
    fn accept(&mut self, state: &mut State, t_end: f64, dt: f64);

    /// The state at fraction `s` in [0, 1] of the last accepted step that went from `start` to
    /// `end`, written into `out`.
    fn interpolate(&self, s: f64, start: &State, end: &State, out: &mut State);

    /// Forgets what was carried from step to step (the face conditions jumped).
    fn restart(&mut self);
}
