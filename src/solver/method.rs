//! Time integration methods behind one interface, so that the stepper drives any of them, for
//! either model block size, the same way.
//!
//! A [`Method`] attempts a step of a given length from the current state: it solves its implicit
//! stages through the [`Model`], estimates the local error in the unknowns, integrates what
//! crossed the faces with its own quadrature (so the water and energy balances close), and keeps
//! what it needs for dense output inside the step. The stepper owns the step-size control
//! ([`super::Controller`]), landings and triggers.
//!
//! The one method is [`TrBdf2`]. (Extrapolated backward Euler with step doubling, the method
//! before it, cost three implicit solves per step where TR-BDF2 needs two at the same cost each,
//! and its first-order error law made steps grow as tol^-1/2; the Crank, conduction and balance
//! tests check TR-BDF2 directly, so it was not kept as a reference.)

use super::flux::{NewtonFailure, NewtonSettings};
use super::model::{Conditions, Model, Rates};
use super::problem::Problem;
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

    /// The time derivative of the unknowns at the candidate's end.
    fn candidate_slope(&self) -> &State;

    /// Swaps the candidate with `state` (the stepper accepts the step of `dt` that ends at
    /// `t_end`), and keeps what dense output over the accepted step needs.
    fn accept(&mut self, state: &mut State, t_end: f64, dt: f64);

    /// The state at fraction `s` in [0, 1] of the last accepted step that went from `start` to
    /// `end`, written into `out`.
    fn interpolate(&self, s: f64, start: &State, end: &State, out: &mut State);

    /// Forgets what was carried from step to step (the face conditions jumped).
    fn restart(&mut self);
}

/// gamma = 2 - sqrt(2): where the trapezoidal stage ends, so that both stages share the matrix
/// coefficient d = gamma / 2 and the method is L-stable (Hosea & Shampine 1996, section 2).
const GAMMA: f64 = 2.0 - std::f64::consts::SQRT_2;
/// d = gamma / 2 = 1 - 1/sqrt(2): the diagonal coefficient of both implicit stages.
const D: f64 = 0.5 * GAMMA;
/// w = sqrt(2) / 4: the weight of the first two stage derivatives in the step's quadrature.
const W: f64 = 0.25 * std::f64::consts::SQRT_2;

/// TR-BDF2 (Hosea & Shampine, "Analysis and implementation of TR-BDF2", Appl. Numer. Math. 20,
/// 1996), written as the three-stage ESDIRK it is, on the stored quantities U (water, and energy
/// in coupled runs) with G their net inflow:
///
/// - trapezoidal stage to t + gamma dt:  U(y_g) - d dt G(y_g) = U(y_n) + d dt G(y_n)
/// - BDF2 stage to t + dt:  U(y_1) - d dt G(y_1) = U(y_n) + dt (w G(y_n) + w G(y_g))
///
/// with gamma = 2 - sqrt 2, d = gamma / 2, w = sqrt(2) / 4. It is second order, L-stable (no
/// ringing after a sudden change of the surface) and needs one implicit solve per stage, both
/// with the same matrix coefficient d dt as a backward-Euler step of d dt; G(y_n) is the last
/// stage's G of the step before when the conditions have not jumped. The water and energy that
/// crossed the faces are dt (w R_n + w R_g + d R_1), the same quadrature as the state, so both
/// balances close.
///
/// Error estimate: the embedded third-order weights (1 - w, 3 w + 1, d) / 3 give
/// e = dt ((4 w - 1)/3 G_n - 1/3 G_g + 2 d / 3 G_1) in stored quantities; as Hosea and Shampine
/// advise it is filtered by the stage matrix, (dU/dy - d dt dG/dy)^-1 e, which turns it into an
/// error of the unknowns and damps the stiff components that the method damps itself (without
/// the filter stiff diffusion modes would force tiny steps). The scaled error is the dry-mass
/// weighted root mean square over cells of e / (tolerance x moisture scale) (and of the
/// temperature errors against tolerance x temperature scale): it follows the water held, the
/// figure a run reports, rather than the few thin cells at a surface, whose error early in a
/// fixed-surface run would otherwise set every step (measured: 30 % fewer steps on the issue's
/// problems for the same error in mean moisture ratio against Crank's series).
///
/// Dense output: the quadratic through y_n and y_1 with the slope G(y_1) at the end (second
/// order, as the method). The stage y_g is not used there: for stiff components the trapezoidal
/// stage swings to the other side of the solution (its amplification tends to -1), so a
/// quadratic through it would overshoot between steps; the end slope of an L-stable step is
/// smooth, and for a decaying mode the interpolant is start (1 - s)^2, never past the end.
/// Newton starts the trapezoidal stage on the line through the previous step's stage and end,
/// extrapolated to t + gamma dt, and the second stage on the line through y_n and y_g.
pub struct TrBdf2 {
    block: usize,
    /// Stored quantities at the step start, and the right-hand side being built.
    u0: Vec<f64>,
    rhs: Vec<f64>,
    /// Net inflow at the step start, the trapezoidal stage and the end.
    g0: Vec<f64>,
    gg: Vec<f64>,
    g1: Vec<f64>,
    /// Face rates at the step start.
    r0: Rates,
    /// Whether `g0` and `r0` belong to the current start (time `g0_time`).
    g0_valid: bool,
    g0_time: f64,
    /// The trapezoidal stage's state and the end state of the last attempt.
    stage: State,
    end: State,
    /// The previous accepted step's stage state, for the predictor.
    kept_stage: State,
    /// dt times the derivative of the unknowns at the end of the last accepted step.
    kept_slope: State,
    /// Whether `kept_stage` belongs to the step before the current start, and its length.
    kept_valid: bool,
    kept_dt: f64,
    /// The last attempt's end-of-step inflow and rates (the next step's start when accepted).
    r1: Rates,
    /// The derivative of the unknowns at the last attempt's end.
    end_slope: State,
    /// Error scratch.
    err: Vec<f64>,
    settings: NewtonSettings,
    scale: [f64; 2],
    /// Each cell's share of the dry mass, for the error norm.
    weight: Vec<f64>,
}

impl TrBdf2 {
    /// TR-BDF2 for `problem` with `model`'s block size.
    pub fn new(problem: &Problem, block: usize) -> TrBdf2 {
        let n = problem.len();
        let coupled = block == 2;
        let nb = n * block;
        let t_scale = problem
            .thermal
            .as_ref()
            .map_or(1.0, |th| th.temperature_scale);
        let scale = [
            problem.tolerance * problem.moisture_scale,
            problem.tolerance * t_scale,
        ];
        TrBdf2 {
            block,
            u0: vec![0.0; nb],
            rhs: vec![0.0; nb],
            g0: vec![0.0; nb],
            gg: vec![0.0; nb],
            g1: vec![0.0; nb],
            r0: Rates::default(),
            g0_valid: false,
            g0_time: 0.0,
            stage: State::zeros(n, coupled),
            end: State::zeros(n, coupled),
            kept_stage: State::zeros(n, coupled),
            kept_slope: State::zeros(n, coupled),
            kept_valid: false,
            kept_dt: 0.0,
            r1: Rates::default(),
            end_slope: State::zeros(n, coupled),
            err: vec![0.0; nb],
            settings: NewtonSettings {
                tol: [
                    super::flux::NEWTON_FRACTION * scale[0],
                    super::flux::NEWTON_FRACTION * scale[1],
                ],
                linear: false,
            },
            scale,
            weight: {
                let total = problem.total_dry_mass();
                problem.dry_mass.iter().map(|m| m / total).collect()
            },
        }
    }

    /// The predictor for the trapezoidal stage: the line through the previous step's stage state
    /// (at fraction gamma of it) and its end `y`, extrapolated to t + gamma dt (at most twice the
    /// distance between those two points); the start state when there is no previous step.
    fn predict_stage(&mut self, y: &State, dt: f64) {
        if !self.kept_valid || self.kept_dt <= 0.0 {
            self.stage.clone_from(y);
            return;
        }
        let s = GAMMA * dt / self.kept_dt;
        let f = (s / (1.0 - GAMMA)).min(2.0);
        self.stage
            .update_with(&self.kept_stage, y, |_, a, b| b + f * (b - a));
    }
}

/// Rates times a length of time.
fn over(r: Rates, dt: f64) -> Exchanged {
    Exchanged {
        water: r.water * dt,
        convective: r.convective * dt,
        latent: r.latent * dt,
        energy_in: r.energy_in * dt,
    }
}

/// a * p + b * q + c * r, term by term.
fn combine(a: f64, p: Rates, b: f64, q: Rates, c: f64, r: Rates) -> Rates {
    Rates {
        water: a * p.water + b * q.water + c * r.water,
        convective: a * p.convective + b * q.convective + c * r.convective,
        latent: a * p.latent + b * q.latent + c * r.latent,
        energy_in: a * p.energy_in + b * q.energy_in + c * r.energy_in,
    }
}

impl Method for TrBdf2 {
    fn error_order(&self) -> u32 {
        2
    }

    fn attempt(
        &mut self,
        model: &mut dyn Model,
        conditions: &dyn ConditionsAt,
        t: f64,
        dt: f64,
        y: &State,
    ) -> Result<Attempt, NewtonFailure> {
        self.settings.linear = model.is_linear();
        let mut iterations = 0;
        if !self.g0_valid || self.g0_time != t {
            self.r0 = model.inflow(&conditions.at(t), y, &mut self.g0);
            self.g0_valid = true;
            self.g0_time = t;
        }
        model.conserved(y, &mut self.u0);
        // Trapezoidal stage.
        for ((r, u), g) in self.rhs.iter_mut().zip(&self.u0).zip(&self.g0) {
            *r = u + D * dt * g;
        }
        self.predict_stage(y, dt);
        let (rg, it) = model.solve_stage(
            &conditions.at(t + GAMMA * dt),
            D * dt,
            &self.rhs,
            &mut self.stage,
            y,
            &self.settings,
        )?;
        iterations += it;
        self.gg.copy_from_slice(model.last_inflow());
        // BDF2 stage, started on the line through y_n and y_g.
        for (((r, u), g0), gg) in self
            .rhs
            .iter_mut()
            .zip(&self.u0)
            .zip(&self.g0)
            .zip(&self.gg)
        {
            *r = u + dt * W * (g0 + gg);
        }
        let reach = 1.0 / GAMMA;
        self.end
            .update_with(y, &self.stage, |_, a, b| a + reach * (b - a));
        let (r1, it) = model.solve_stage(
            &conditions.at(t + dt),
            D * dt,
            &self.rhs,
            &mut self.end,
            &self.stage,
            &self.settings,
        )?;
        iterations += it;
        self.g1.copy_from_slice(model.last_inflow());
        self.r1 = r1;
        model.state_rates(&self.end, &self.g1, &mut self.end_slope);
        // Embedded error estimate, filtered by the stage matrix.
        let (c0, cg, c1) = ((4.0 * W - 1.0) / 3.0, -1.0 / 3.0, 2.0 * D / 3.0);
        for (((e, a), b), c) in self
            .err
            .iter_mut()
            .zip(&self.g0)
            .zip(&self.gg)
            .zip(&self.g1)
        {
            *e = dt * (c0 * a + cg * b + c1 * c);
        }
        if !model.filter(&mut self.err) {
            return Err(NewtonFailure::Breakdown);
        }
        let mut sum = 0.0;
        for (i, e) in self.err.iter().enumerate() {
            let v = e / self.scale[i % self.block];
            sum += self.weight[i / self.block] * v * v;
        }
        let error: f64 = sum.sqrt();
        if !error.is_finite() {
            return Err(NewtonFailure::Breakdown);
        }
        let rates = combine(W, self.r0, W, rg, D, r1);
        Ok(Attempt {
            error,
            exchanged: over(rates, dt),
            newton_iterations: iterations,
        })
    }

    fn candidate(&self) -> &State {
        &self.end
    }

    fn candidate_slope(&self) -> &State {
        &self.end_slope
    }

    fn accept(&mut self, state: &mut State, t_end: f64, dt: f64) {
        std::mem::swap(state, &mut self.end);
        // The end's inflow starts the next step (until the conditions jump).
        std::mem::swap(&mut self.g0, &mut self.g1);
        self.r0 = self.r1;
        self.g0_valid = true;
        self.g0_time = t_end;
        std::mem::swap(&mut self.kept_stage, &mut self.stage);
        std::mem::swap(&mut self.kept_slope, &mut self.end_slope);
        for v in self
            .kept_slope
            .moisture
            .iter_mut()
            .chain(self.kept_slope.temperature.iter_mut())
        {
            *v *= dt;
        }
        self.kept_valid = true;
        self.kept_dt = dt;
    }

    fn interpolate(&self, s: f64, start: &State, end: &State, out: &mut State) {
        // The quadratic through the start and the end with the end's slope: with
        // D = end - start and S = dt y'(end), p(s) = start + (2 D - S) s + (S - D) s^2.
        let (a, b) = (s * (2.0 - s), s * (s - 1.0));
        out.clone_from(end);
        out.update_with(start, &self.kept_slope, |o, y0, sl| {
            y0 + a * (o - y0) + b * sl
        });
    }

    fn restart(&mut self) {
        self.g0_valid = false;
        self.kept_valid = false;
    }
}
