//! The time stepper: a [`Method`] (ESDIRK4(3)) with error-per-step control, exact landing on stop
//! times, mean-moisture triggers and dense output inside the last step.
//!
//! The stepper owns the state, the step size and the schedule step in force; the method solves
//! the implicit stages through the model, estimates the local error and integrates what crossed
//! the faces with its own quadrature, so water (and in coupled runs energy) is conserved up to
//! the Newton iteration's last update.

use std::fmt;

use super::SolveError;
use super::coupled::{HeatFace, HeatFaces};
use super::esdirk::{ESDIRK43, Esdirk};
use super::flux::{self, FaceLaws, Surfaces};
use super::method::{ConditionsAt, Method};
use super::model::{self, Conditions, Model};
use super::problem::{Air, FaceLaw, Problem};
use super::state::State;

/// What crossed the exposed faces over a time, per m2 of face A (integrals of the face rates).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Exchanged {
    /// Water out, kg/m2.
    pub water: f64,
    /// Heat the air gave the surfaces, h (T_air - T_s), J/m2 (coupled runs).
    pub convective: f64,
    /// Latent heat taken by the evaporated water, J/m2 (coupled runs).
    pub latent: f64,
    /// Energy into the body: convective less latent less the sensible heat of the water that
    /// left, J/m2 (coupled runs).
    pub energy_in: f64,
}

impl Exchanged {
    fn plus(self, o: Exchanged) -> Exchanged {
        Exchanged {
            water: self.water + o.water,
            convective: self.convective + o.convective,
            latent: self.latent + o.latent,
            energy_in: self.energy_in + o.energy_in,
        }
    }
}

/// Step-size control from the method's local error estimate.
///
/// With `err` the method's scaled error (the dry-mass weighted root mean square over cells of the
/// estimated local error against tolerance x moisture scale, and against tolerance x temperature
/// scale in coupled runs), a step is accepted when `err <= 1`. The next step is
///
///   dt_new = dt * clamp(safety * err^(-exponent), min_factor, max_factor)
///
/// with exponent 1 / (p + 1), p the order of the method's embedded pair (the error estimate is
/// ~ dt^(p+1)): 1/4 for ESDIRK4(3), the step that would just meet the tolerance (set from
/// [`Method::error_order`] when the stepper is built).
/// A factor between 1 and `dead_zone` keeps dt as it is (no churn for a gain of a few per cent).
/// Defaults and why: safety 0.9 (the usual margin, so the next step is rarely rejected), factors
/// 0.2 and 5 (a firm cut after a rejection; fast growth from the tiny first step, which is
/// chosen small against the smallest cell's diffusion time and so is far below what the
/// tolerance allows), dead zone 1.2. After a rejected step the factor is at most 1.
#[derive(Debug, Clone, Copy)]
pub struct Controller {
    /// Safety factor on the optimal step.
    pub safety: f64,
    /// Smallest change factor.
    pub min_factor: f64,
    /// Largest change factor.
    pub max_factor: f64,
    /// Factors in [1, dead_zone] leave dt as it is.
    pub dead_zone: f64,
    /// Exponent of the error in the step-size law, 1 / (order of the local error).
    pub exponent: f64,
}

impl Default for Controller {
    fn default() -> Self {
        Controller {
            safety: 0.9,
            min_factor: 0.2,
            max_factor: 5.0,
            dead_zone: 1.2,
            exponent: 0.25,
        }
    }
}

impl Controller {
    /// The next step size after a step of `dt` with scaled error `err`.
    pub fn next(&self, dt: f64, err: f64) -> f64 {
        let raw = if err > 0.0 {
            self.safety * err.powf(-self.exponent)
        } else {
            self.max_factor
        };
        let mut factor = raw.clamp(self.min_factor, self.max_factor);
        if err > 1.0 {
            factor = factor.min(1.0);
        }
        if (1.0..=self.dead_zone).contains(&factor) {
            dt
        } else {
            dt * factor
        }
    }
}

/// Work counters of a run.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Stats {
    /// Accepted steps.
    pub accepted: u64,
    /// Steps rejected by the error test.
    pub rejected: u64,
    /// Steps rejected because Newton failed.
    pub newton_failures: u64,
    /// Newton iterations over all implicit stage solves.
    pub newton_iterations: u64,
    /// Tridiagonal solves.
    pub linear_solves: u64,
    /// Extra attempts spent landing on a moisture trigger.
    pub trigger_refinements: u64,
    /// Evaluations of the Jacobian parts that cost extra face solves (the finite differences at
    /// material boundaries), counted once per fresh evaluation; fewer than the linear solves while
    /// they are reused. Derivatives inside a material and at exposed faces come with every flux
    /// evaluation and are not counted.
    pub jacobian_evaluations: u64,
}

impl fmt::Display for Stats {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{} steps accepted, {} rejected (error), {} rejected (Newton), {} Newton iterations, \
             {} linear solves, {} Jacobians, {} trigger refinements",
            self.accepted,
            self.rejected,
            self.newton_failures,
            self.newton_iterations,
            self.linear_solves,
            self.jacobian_evaluations,
            self.trigger_refinements
        )
    }
}

/// Why [`Stepper::step`] returned.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StopReason {
    /// An ordinary step; the stop time has not been reached.
    Internal,
    /// The step landed exactly on the stop time.
    StopTime,
    /// The mean moisture reached the trigger with this index (see [`Stepper::set_triggers`]).
    Trigger(usize),
}

/// Relative closeness to a stop time below which a step lands on it rather than leaving a sliver.
const LANDING_MARGIN: f64 = 1e-3;

/// The smallest step, relative to the run length, before the stepper gives up.
const MIN_STEP_FRACTION: f64 = 1e-14;

/// Step attempts (accepted and rejected) after which a run is given up: ordinary runs take a
/// few thousand, so this only stops a case that crawls without failing outright.
pub const MAX_ATTEMPTS: u64 = 2_000_000;

/// After Newton fails at dt, steps stay below half of it and may grow back by this factor per
/// accepted step, instead of bouncing between a cut of 4 and a growth of 4.
const NEWTON_CAP_GROWTH: f64 = 1.5;

/// The face conditions of the schedule step in force, at any time.
#[derive(Clone, Copy)]
struct Scheduled<'p> {
    problem: &'p Problem,
    step_index: usize,
    step_start: f64,
    /// The conditions of a step whose air does not change (no ramp), worked out once when the
    /// step comes into force: every stage and output row asks for them.
    steady: Option<Conditions>,
}

impl Scheduled<'_> {
    fn air_at(&self, t: f64) -> Air {
        match self.problem.steps.get(self.step_index) {
            Some(step) => step.air_at(t - self.step_start),
            None => Air {
                dry_bulb_c: 20.0,
                rh: None,
            },
        }
    }

    fn laws_at(&self, t: f64) -> (FaceLaws, f64) {
        let air = self.air_at(t);
        let p = self.problem;
        let law =
            |site: Option<super::problem::FaceSite>| match (site, p.steps.get(self.step_index)) {
                (Some(site), Some(step)) => p.face_law(step, air, site.material),
                _ => FaceLaw::Sealed,
            };
        (
            FaceLaws {
                a: law(p.face_a),
                b: law(p.face_b),
            },
            air.dry_bulb_c,
        )
    }

    /// The coupled faces' conditions for the water laws `laws` at time `t` (isothermal runs use
    /// no heat coefficient, so none is worked out: it costs a power law per stage).
    fn heat_faces(&self, laws: &FaceLaws, t: f64) -> HeatFaces {
        let air = self.air_at(t);
        let h = self
            .problem
            .thermal
            .as_ref()
            .and(self.problem.steps.get(self.step_index))
            .and_then(|step| self.problem.heat_coef(step, air))
            .unwrap_or(0.0);
        let face = |law: FaceLaw| HeatFace {
            law,
            h,
            t_air: air.dry_bulb_c,
        };
        HeatFaces {
            a: face(laws.a),
            b: face(laws.b),
        }
    }

    /// The conditions at `t`, worked out.
    fn worked_out(&self, t: f64) -> Conditions {
        let (laws, t_air) = self.laws_at(t);
        Conditions {
            laws,
            t_air,
            heat: self.heat_faces(&laws, t),
        }
    }

    /// The conditions of the step in force when its air does not change with time.
    fn steady_conditions(&self) -> Option<Conditions> {
        let step = self.problem.steps.get(self.step_index);
        let changes = step.is_some_and(|s| s.ramp && s.duration.is_some_and(|d| d > 0.0));
        (!changes).then(|| self.worked_out(self.step_start))
    }
}

impl ConditionsAt for Scheduled<'_> {
    fn at(&self, t: f64) -> Conditions {
        self.steady.unwrap_or_else(|| self.worked_out(t))
    }
}

/// Advances a [`Problem`] in time. The caller drives it with [`Stepper::step`].
pub struct Stepper<'p> {
    problem: &'p Problem,
    t: f64,
    x: State,
    dt: f64,
    stop_time: f64,
    triggers: [Option<f64>; 2],
    step_index: usize,
    step_start: f64,
    /// The step's conditions when its air does not change (see [`Scheduled`]).
    steady: Option<Conditions>,
    model: Box<dyn Model + 'p>,
    method: Box<dyn Method>,
    controller: Controller,
    stats: Stats,
    exchanged: Exchanged,
    newton_cap: f64,
    prev: State,
    prev_t: f64,
}

impl<'p> Stepper<'p> {
    /// A stepper at t = 0 with the problem's initial state and schedule step 0.
    pub fn new(problem: &'p Problem) -> Stepper<'p> {
        let n = problem.len();
        let coupled = problem.thermal.is_some();
        let mut s = Stepper {
            problem,
            t: 0.0,
            x: State {
                moisture: problem.initial.clone(),
                temperature: problem
                    .thermal
                    .as_ref()
                    .map_or_else(Vec::new, |th| th.initial.clone()),
            },
            dt: 0.0,
            stop_time: problem.end_time,
            triggers: [None, None],
            step_index: 0,
            step_start: 0.0,
            steady: None,
            model: model::for_problem(problem),
            method: Box::new(Esdirk::new(
                &ESDIRK43,
                problem,
                if problem.thermal.is_some() { 2 } else { 1 },
            )),
            controller: Controller::default(),
            stats: Stats::default(),
            exchanged: Exchanged::default(),
            prev: State::zeros(n, coupled),
            prev_t: 0.0,
            newton_cap: f64::INFINITY,
        };
        s.controller.exponent = 1.0 / f64::from(s.method.error_order() + 1);
        s.steady = s.scheduled().steady_conditions();
        s.restart_step_size();
        s
    }

    /// Current time, s.
    pub fn time(&self) -> f64 {
        self.t
    }

    /// Current moisture of every cell, dry fraction.
    pub fn moisture(&self) -> &[f64] {
        &self.x.moisture
    }

    /// Current state (moisture, and temperature in coupled runs).
    pub fn state(&self) -> &State {
        &self.x
    }

    /// Work counters so far.
    pub fn stats(&self) -> Stats {
        Stats {
            linear_solves: self.model.linear_solves(),
            jacobian_evaluations: self.model.jacobian_evaluations(),
            ..self.stats
        }
    }

    /// Water that has left through the exposed faces, kg per m2 of face A.
    pub fn outflow(&self) -> f64 {
        self.exchanged.water
    }

    /// Water and heat exchanged through the exposed faces so far.
    pub fn exchanged(&self) -> Exchanged {
        self.exchanged
    }

    /// The schedule step now in force, and when it started.
    pub fn schedule_step(&self) -> (usize, f64) {
        (self.step_index, self.step_start)
    }

    /// Puts schedule step `index` in force from time `start` and restarts step-size control
    /// (surface conditions may jump).
    pub fn set_schedule_step(&mut self, index: usize, start: f64) {
        self.step_index = index.min(self.problem.steps.len().saturating_sub(1));
        self.step_start = start;
        self.steady = self.scheduled().steady_conditions();
        self.method.restart();
        self.model.invalidate_jacobian();
        self.restart_step_size();
    }

    /// Steps will land exactly on `t` and report [`StopReason::StopTime`].
    pub fn set_stop_time(&mut self, t: f64) {
        self.stop_time = t;
    }

    /// Mean-moisture levels whose crossing ends a step exactly at the crossing.
    pub fn set_triggers(&mut self, levels: [Option<f64>; 2]) {
        self.triggers = levels;
    }

    /// Air in force at time `t`.
    pub fn air_at(&self, t: f64) -> Air {
        self.scheduled().air_at(t)
    }

    fn scheduled(&self) -> Scheduled<'p> {
        Scheduled {
            problem: self.problem,
            step_index: self.step_index,
            step_start: self.step_start,
            steady: self.steady,
        }
    }

    /// Surface figures at the current state (fills the workspace's face arrays).
    pub fn surfaces(&mut self) -> Surfaces {
        let x = std::mem::take(&mut self.x);
        let s = self.surfaces_at(&x, self.t);
        self.x = x;
        s
    }

    /// Surface figures of `state` at time `t` within the schedule step in force (for
    /// interpolated states; fills the workspace's face arrays).
    pub fn surfaces_at(&mut self, state: &State, t: f64) -> Surfaces {
        let conditions = self.conditions_at(t);
        self.model.surfaces(&conditions, state)
    }

    /// What the exposed faces see at time `t` in the schedule step in force.
    fn conditions_at(&self, t: f64) -> Conditions {
        self.scheduled().at(t)
    }

    /// The state at time `t` within the last accepted step, written into `out` (dense output,
    /// so that output times never force a step): the method's interpolant (the cubic Hermite
    /// through the step's start and end with their slopes). Outside the last
    /// step, the nearest end.
    pub fn interpolate_into(&self, t: f64, out: &mut State) {
        let dt = self.t - self.prev_t;
        if dt <= 0.0 || dt.is_nan() || t >= self.t {
            out.clone_from(&self.x);
            return;
        }
        if t <= self.prev_t {
            out.clone_from(&self.prev);
            return;
        }
        self.method
            .interpolate((t - self.prev_t) / dt, &self.prev, &self.x, out);
    }

    /// A first step small against the diffusion time of the smallest cell (a tenth of it), so
    /// that a sudden change of surface conditions is resolved. The error control takes over from
    /// the first step on; a hundredth, as before, only added one to two steps of growth to every
    /// run (P1-P5 at the default tolerance: 19 -> 18, 17 -> 15, 16 -> 14, 19 -> 17 and 90 -> 81
    /// steps at equal error), a whole cell's time drew rejections.
    fn restart_step_size(&mut self) {
        let p = self.problem;
        let t_c = self.air_at(self.t).dry_bulb_c;
        let temp = |i: usize| self.x.temperature.get(i).copied().unwrap_or(t_c);
        let mut d_max = p
            .cell_material
            .iter()
            .zip(&self.x.moisture)
            .enumerate()
            .map(|(i, (&m, &x))| p.materials[m].diffusivity.at(x, temp(i)))
            .fold(0.0, f64::max);
        if let Some(th) = &p.thermal {
            // The thermal diffusivity k / (rho_s (c_s + c_w X)) sets the first step too.
            for (i, &m) in p.cell_material.iter().enumerate() {
                let c = p.materials[m].density
                    * (th.specific_heat[m]
                        + super::problem::WATER_SPECIFIC_HEAT * self.x.moisture[i]);
                d_max = d_max.max(th.conductivity[m] / c);
            }
        }
        let h = p.mesh.min_width();
        let cell_time = if d_max > 0.0 {
            1e-1 * h * h / d_max
        } else {
            p.end_time
        };
        self.dt = cell_time.min(p.end_time * 1e-3).max(p.end_time * 1e-12);
        self.newton_cap = f64::INFINITY;
    }

    /// Attempts a step of `dt` from the current state; returns (scaled error, what crossed the
    /// faces). The end state is the method's candidate.
    fn attempt(&mut self, dt: f64) -> Result<(f64, Exchanged), flux::NewtonFailure> {
        let scheduled = self.scheduled();
        let a = self
            .method
            .attempt(self.model.as_mut(), &scheduled, self.t, dt, &self.x);
        let a = match a {
            Ok(a) => a,
            Err(e) => {
                // A failed solve leaves no Jacobian worth reusing.
                self.model.invalidate_jacobian();
                return Err(e);
            }
        };
        self.stats.newton_iterations += a.newton_iterations as u64;
        Ok((a.error, a.exchanged))
    }

    fn accept(&mut self, dt: f64, exchanged: Exchanged) {
        // The start of the step, kept for dense output.
        self.prev.clone_from(&self.x);
        self.prev_t = self.t;
        self.t += dt;
        self.method.accept(&mut self.x, self.t, dt);
        self.exchanged = self.exchanged.plus(exchanged);
        self.stats.accepted += 1;
        self.newton_cap *= NEWTON_CAP_GROWTH;
    }

    fn check_step(&self, dt: f64) -> Result<(), SolveError> {
        let attempts = self.stats.accepted + self.stats.rejected + self.stats.newton_failures;
        if attempts >= MAX_ATTEMPTS {
            return Err(SolveError::TooManySteps {
                hours: self.t / 3600.0,
                steps: attempts,
            });
        }
        if dt < self.problem.end_time * MIN_STEP_FRACTION || !dt.is_finite() {
            return Err(SolveError::StepTooSmall {
                hours: self.t / 3600.0,
                dt,
            });
        }
        Ok(())
    }

    /// The trigger crossed between mean moisture `before` and `after`, if any (the nearest).
    fn crossed(&self, before: f64, after: f64) -> Option<(usize, f64)> {
        let mut best: Option<(usize, f64, f64)> = None;
        for (i, level) in self.triggers.iter().enumerate() {
            let Some(level) = *level else { continue };
            let (a, b) = (before - level, after - level);
            if a == 0.0 || a.signum() != b.signum() || b == 0.0 {
                let fraction = if a == b { 0.0 } else { a / (a - b) };
                if best.is_none_or(|(_, _, f)| fraction < f) {
                    best = Some((i, level, fraction));
                }
            }
        }
        best.map(|(i, level, _)| (i, level))
    }

    /// Takes one step and says why it stopped.
    pub fn step(&mut self) -> Result<StopReason, SolveError> {
        let remaining = self.stop_time - self.t;
        if remaining <= 0.0 {
            return Ok(StopReason::StopTime);
        }
        let before = self.problem.mean(&self.x.moisture);
        if let Some((i, _)) = self.crossed(before, before) {
            return Ok(StopReason::Trigger(i));
        }
        loop {
            let remaining = self.stop_time - self.t;
            self.dt = self.dt.min(self.newton_cap);
            let lands = self.dt >= remaining * (1.0 - LANDING_MARGIN);
            let dt = if lands { remaining } else { self.dt };
            self.check_step(dt)?;
            let (err, outflow) = match self.attempt(dt) {
                Ok(r) => r,
                Err(_) => {
                    self.stats.newton_failures += 1;
                    self.dt = 0.25 * dt;
                    self.newton_cap = 0.5 * dt;
                    continue;
                }
            };
            if err > 1.0 {
                self.stats.rejected += 1;
                self.dt = self.controller.next(dt, err);
                continue;
            }
            let after = self.problem.mean(&self.method.candidate().moisture);
            if let Some((which, level)) = self.crossed(before, after) {
                return self.land_on_trigger(dt, err, outflow, before, after, which, level);
            }
            let next = self.controller.next(dt, err);
            self.accept(dt, outflow);
            if lands {
                // Keep the proposal of the untruncated step when the landing shortened it.
                self.dt = next.max(self.dt);
                self.t = self.stop_time;
                return Ok(StopReason::StopTime);
            }
            self.dt = next;
            return Ok(StopReason::Internal);
        }
    }

    /// Where the mean moisture of the method's dense output over the candidate step (of length
    /// `dt`, from mean `before`) crosses `level`, as a step length; `None` without a crossing.
    /// The dense output is as accurate as the steps, so the first trial step lands within
    /// about the tolerance of the level and the second within round-off (a quadratic through
    /// the ends and the end slope took three trials).
    fn interpolated_crossing(&self, before: f64, level: f64, dt: f64) -> Option<f64> {
        let w = self.method.candidate_gain();
        let dt_per_mass = dt / self.problem.total_dry_mass();
        let f =
            |s: f64| before - level + dt_per_mass * s * (w[0] + s * (w[1] + s * (w[2] + s * w[3])));
        let (f_lo, f_hi) = (f(0.0), f(1.0));
        if !(f_lo.signum() != f_hi.signum() && f_lo.is_finite() && f_hi.is_finite()) {
            return None;
        }
        let s = crate::analytic::brent(f, 0.0, 1.0, f_lo);
        (s > 0.0 && s < 1.0).then_some(s * dt)
    }

    /// Shortens the step until the mean moisture lands on `level` (Illinois secant on dt).
    #[allow(clippy::too_many_arguments)]
    fn land_on_trigger(
        &mut self,
        dt: f64,
        err: f64,
        outflow: Exchanged,
        before: f64,
        after: f64,
        which: usize,
        level: f64,
    ) -> Result<StopReason, SolveError> {
        let tol = 1e-9 * self.problem.moisture_scale.max(level.abs());
        let (mut lo, mut f_lo) = (0.0, before - level);
        let (mut hi, mut f_hi) = (dt, after - level);
        let (mut best_dt, mut best_out, mut best_err) = (dt, outflow, err);
        let mut side = 0i8;
        let mut buffers_hold_best = true;
        if f_hi.abs() > tol && f_lo.abs() > tol {
            for _ in 0..30 {
                // The crossing of the held candidate's interpolant first, else the secant, else
                // the middle of the bracket.
                let mut d = if buffers_hold_best {
                    self.interpolated_crossing(before, level, best_dt)
                        .unwrap_or(f64::NAN)
                } else {
                    f64::NAN
                };
                if !(d > lo && d < hi) {
                    d = hi - f_hi * (hi - lo) / (f_hi - f_lo);
                }
                if !(d > lo && d < hi) {
                    d = 0.5 * (lo + hi);
                }
                self.stats.trigger_refinements += 1;
                let Ok((e, out)) = self.attempt(d) else {
                    // Newton failed on this trial: keep the bracket, try nearer the start.
                    buffers_hold_best = false;
                    hi = 0.5 * (lo + d);
                    f_hi = f_lo.signum() * -f_hi.abs().max(tol);
                    continue;
                };
                let f = self.problem.mean(&self.method.candidate().moisture) - level;
                (best_dt, best_out, best_err) = (d, out, e);
                buffers_hold_best = true;
                if f.abs() <= tol || (hi - lo) <= 1e-12 * self.problem.end_time {
                    break;
                }
                if f.signum() == f_hi.signum() {
                    (hi, f_hi) = (d, f);
                    if side == 1 {
                        f_lo *= 0.5;
                    }
                    side = 1;
                } else {
                    (lo, f_lo) = (d, f);
                    if side == -1 {
                        f_hi *= 0.5;
                    }
                    side = -1;
                }
            }
        } else if f_lo.abs() <= tol {
            return Ok(StopReason::Trigger(which));
        }
        if !buffers_hold_best {
            let (e, out) = self
                .attempt(best_dt)
                .map_err(|_| SolveError::NewtonFailed {
                    hours: self.t / 3600.0,
                })?;
            (best_out, best_err) = (out, e);
        }
        let next = self.controller.next(best_dt, best_err.max(1e-12));
        self.accept(best_dt, best_out);
        self.dt = next.max(self.dt);
        Ok(StopReason::Trigger(which))
    }
}
