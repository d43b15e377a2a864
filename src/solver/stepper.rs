//! The time stepper: extrapolated backward Euler with step-doubling error control, exact
//! landing on stop times, and mean-moisture triggers.
//!
//! Each step takes one backward-Euler step of size dt (`full`) and two of size dt/2
//! (`two_halves`). Their difference estimates the local error of backward Euler; the accepted
//! state is the Richardson extrapolation 2 * two_halves - full, which is second-order accurate
//! and, like backward Euler, L-stable (its stability function 2/(1 - z/2)^2 - 1/(1 - z) tends
//! to 0 as z -> -inf), so sharp starts such as a suddenly fixed surface do not ring. Every
//! candidate is a linear combination of mass-conserving states, so water is conserved to the
//! Newton tolerance.

use std::fmt;

use super::SolveError;
use super::coupled::{HeatFace, HeatFaces};
use super::flux::{self, FaceLaws, Surfaces};
use super::model::{self, Conditions, Model, Rates};
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
    /// Rates held for `dt` seconds.
    fn over(rates: Rates, dt: f64) -> Exchanged {
        Exchanged {
            water: rates.water * dt,
            convective: rates.convective * dt,
            latent: rates.latent * dt,
            energy_in: rates.energy_in * dt,
        }
    }

    fn scaled(self, f: f64) -> Exchanged {
        Exchanged {
            water: f * self.water,
            convective: f * self.convective,
            latent: f * self.latent,
            energy_in: f * self.energy_in,
        }
    }

    fn plus(self, o: Exchanged) -> Exchanged {
        Exchanged {
            water: self.water + o.water,
            convective: self.convective + o.convective,
            latent: self.latent + o.latent,
            energy_in: self.energy_in + o.energy_in,
        }
    }
}

/// Step-size control from the step-doubling error estimate.
///
/// With `err` = max over cells of |two_halves - full| / (tolerance * moisture scale), a step
/// is accepted when `err <= 1`. The next step is `dt * clamp(safety * err^(-1/2), min_factor,
/// max_factor)`: the exponent is 1/2 because the local error of backward Euler grows as dt^2.
/// A factor between 1 and `dead_zone` keeps dt unchanged, which avoids needless changes.
/// Defaults: safety 0.9 (the usual margin so that the next step is not rejected), factors 0.2
/// and 4 (fast growth from the tiny first step, a firm cut on rejection), dead zone 1.2.
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
}

impl Default for Controller {
    fn default() -> Self {
        Controller {
            safety: 0.9,
            min_factor: 0.2,
            max_factor: 4.0,
            dead_zone: 1.2,
        }
    }
}

impl Controller {
    /// The next step size after a step of `dt` with scaled error `err`.
    pub fn next(&self, dt: f64, err: f64) -> f64 {
        let raw = if err > 0.0 {
            self.safety / err.sqrt()
        } else {
            self.max_factor
        };
        let factor = raw.clamp(self.min_factor, self.max_factor);
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
    /// Newton iterations over all backward-Euler solves.
    pub newton_iterations: u64,
    /// Tridiagonal solves.
    pub linear_solves: u64,
    /// Extra attempts spent landing on a moisture trigger.
    pub trigger_refinements: u64,
}

impl fmt::Display for Stats {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{} steps accepted, {} rejected (error), {} rejected (Newton), {} Newton iterations, \
             {} linear solves, {} trigger refinements",
            self.accepted,
            self.rejected,
            self.newton_failures,
            self.newton_iterations,
            self.linear_solves,
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

/// Trial states of one step.
#[derive(Debug, Clone)]
struct Trial {
    full: State,
    half: State,
    two_halves: State,
    candidate: State,
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
    model: Box<dyn Model + 'p>,
    trial: Trial,
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
            model: model::for_problem(problem),
            trial: Trial {
                full: State::zeros(n, coupled),
                half: State::zeros(n, coupled),
                two_halves: State::zeros(n, coupled),
                candidate: State::zeros(n, coupled),
            },
            controller: Controller::default(),
            stats: Stats::default(),
            exchanged: Exchanged::default(),
            prev: State::zeros(n, coupled),
            prev_t: 0.0,
            newton_cap: f64::INFINITY,
        };
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
        match self.problem.steps.get(self.step_index) {
            Some(step) => step.air_at(t - self.step_start),
            None => Air {
                dry_bulb_c: 20.0,
                rh: None,
            },
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
        let (laws, t_air) = self.laws_at(t);
        Conditions {
            laws,
            t_air,
            heat: self.heat_faces(&laws, t),
        }
    }

    /// The state at time `t` within the last accepted step, written into `out` (dense output,
    /// so that output times never force a step). The quadratic through the step's start, its
    /// half-step solution and its end: the half step carries the same backward-Euler error the
    /// step control bounds, so the interpolant is as accurate as the tolerance asks. Outside the
    /// last step, the nearest end.
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
        let s = (t - self.prev_t) / dt;
        let (l0, l1, l2) = (
            2.0 * (s - 0.5) * (s - 1.0),
            -4.0 * s * (s - 1.0),
            2.0 * s * (s - 0.5),
        );
        out.clone_from(&self.x);
        let half = &self.trial.half;
        for ((o, a), b) in out
            .moisture
            .iter_mut()
            .zip(&self.prev.moisture)
            .zip(&half.moisture)
        {
            *o = l0 * a + l1 * b + l2 * *o;
        }
        for ((o, a), b) in out
            .temperature
            .iter_mut()
            .zip(&self.prev.temperature)
            .zip(&half.temperature)
        {
            *o = l0 * a + l1 * b + l2 * *o;
        }
    }

    /// The coupled faces' conditions for the water laws `laws` at time `t`.
    fn heat_faces(&self, laws: &FaceLaws, t: f64) -> HeatFaces {
        let air = self.air_at(t);
        let h = self
            .problem
            .steps
            .get(self.step_index)
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

    fn laws_at(&self, t: f64) -> (FaceLaws, f64) {
        let air = self.air_at(t);
        let p = self.problem;
        let law =
            |site: Option<super::problem::FaceSite>| match (site, p.steps.get(self.step_index)) {
                (Some(site), Some(step)) => p.face_law(step, air, site.material),
                _ => super::problem::FaceLaw::Sealed,
            };
        (
            FaceLaws {
                a: law(p.face_a),
                b: law(p.face_b),
            },
            air.dry_bulb_c,
        )
    }

    /// A first step small against the diffusion time of the smallest cell, so that a sudden
    /// change of surface conditions is resolved.
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
            1e-2 * h * h / d_max
        } else {
            p.end_time
        };
        self.dt = cell_time.min(p.end_time * 1e-3).max(p.end_time * 1e-12);
        self.newton_cap = f64::INFINITY;
    }

    /// One backward-Euler solve at `t` over `dt` from the current state (`from_current`) or from
    /// the trial's half step; returns what crossed the faces.
    fn solve_be(
        &mut self,
        t: f64,
        dt: f64,
        which: fn(&mut Trial) -> &mut State,
        from_current: bool,
    ) -> Result<Exchanged, flux::NewtonFailure> {
        let conditions = self.conditions_at(t + dt);
        // The half step's result is the start of the second half: move it out of the way.
        let mut new = std::mem::take(which(&mut self.trial));
        let old = if from_current {
            &self.x
        } else {
            &self.trial.half
        };
        let result = self
            .model
            .backward_euler(&conditions, dt, old, &mut new)
            .map(|(rates, iterations)| (Exchanged::over(rates, dt), iterations));
        *which(&mut self.trial) = new;
        let (exchanged, iterations) = result?;
        self.stats.newton_iterations += iterations as u64;
        Ok(exchanged)
    }

    /// Computes the extrapolated candidate for a step of `dt`; returns (scaled error, what
    /// crossed the faces).
    fn attempt(&mut self, dt: f64) -> Result<(f64, Exchanged), flux::NewtonFailure> {
        let t = self.t;
        let full = self.solve_be(t, dt, |tr| &mut tr.full, true)?;
        let h1 = self.solve_be(t, 0.5 * dt, |tr| &mut tr.half, true)?;
        let h2 = self.solve_be(t + 0.5 * dt, 0.5 * dt, |tr| &mut tr.two_halves, false)?;
        let scale = self.problem.tolerance * self.problem.moisture_scale;
        let tr = &mut self.trial;
        let mut err: f64 = 0.0;
        for i in 0..tr.candidate.moisture.len() {
            let (a, b) = (tr.full.moisture[i], tr.two_halves.moisture[i]);
            err = err.max((b - a).abs() / scale);
            tr.candidate.moisture[i] = 2.0 * b - a;
        }
        if let Some(th) = &self.problem.thermal {
            let t_scale = self.problem.tolerance * th.temperature_scale;
            for i in 0..tr.candidate.temperature.len() {
                let (a, b) = (tr.full.temperature[i], tr.two_halves.temperature[i]);
                err = err.max((b - a).abs() / t_scale);
                tr.candidate.temperature[i] = 2.0 * b - a;
            }
        }
        if !err.is_finite() {
            return Err(flux::NewtonFailure::Breakdown);
        }
        Ok((err, h1.plus(h2).scaled(2.0).plus(full.scaled(-1.0))))
    }

    fn accept(&mut self, dt: f64, exchanged: Exchanged) {
        // The start of the step, kept with the trial's half step for dense output.
        self.prev.clone_from(&self.x);
        self.prev_t = self.t;
        std::mem::swap(&mut self.x, &mut self.trial.candidate);
        self.t += dt;
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
            let after = self.problem.mean(&self.trial.candidate.moisture);
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
                let mut d = hi - f_hi * (hi - lo) / (f_hi - f_lo);
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
                let f = self.problem.mean(&self.trial.candidate.moisture) - level;
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
