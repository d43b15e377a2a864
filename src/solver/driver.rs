//! The run loop: walks the schedule, lands on output and profile times, records curves,
//! profiles and the summary figures. It only drives a [`Stepper`]; `verify`, batches and fits
//! use the same stepper through this loop.

use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

use super::SolveError;
use super::flux::Surfaces;
use super::observe::{CurveRecorder, Observer, ProfileRecorder, Sample};
use super::problem::{Air, Problem, StepPlan};
use super::schedule::{ScheduleWalker, StepEnd, StepRecord};
use super::stepper::{Stats, Stepper, StopReason};

/// One output row. Moistures are dry-basis fractions; temperatures in degrees C.
#[derive(Debug, Clone, PartialEq)]
pub struct CurveRow {
    /// Time, s.
    pub time: f64,
    /// Dry-mass weighted mean moisture.
    pub mean: f64,
    /// Moisture at the exposed surface (face A, or B when only B is exposed).
    pub surface: f64,
    /// Moisture at the centre.
    pub centre: f64,
    /// (mean - X_eq) / (X_0 - X_eq) with the current step's equilibrium, where known.
    pub moisture_ratio: Option<f64>,
    /// Mean product temperature.
    pub mean_temp_c: f64,
    /// Surface temperature.
    pub surface_temp_c: f64,
    /// Centre temperature.
    pub centre_temp_c: f64,
    /// Drying rate -d(mean)/dt, fraction per s (positive while drying).
    pub drying_rate: f64,
    /// Air temperature.
    pub air_temp_c: f64,
    /// Air relative humidity, fraction, where known.
    pub air_rh: Option<f64>,
    /// Schedule step index in force.
    pub step: usize,
    /// Mean moisture of each layer of a body of several layers; empty for one layer, whose
    /// mean is `mean` (no allocation per row in the common case). Read it with
    /// [`CurveRow::layer_means`].
    pub(crate) several_layer_means: Vec<f64>,
    /// The exposed surface's equilibrium moisture with the air in force, where known.
    pub equilibrium: Option<f64>,
    /// Water activity at the surface (from its material's isotherm), where known.
    pub surface_water_activity: Option<f64>,
    /// Water activity at the centre, where known.
    pub centre_water_activity: Option<f64>,
}

impl CurveRow {
    /// Mean moisture of each layer.
    pub fn layer_means(&self) -> &[f64] {
        if self.several_layer_means.is_empty() {
            std::slice::from_ref(&self.mean)
        } else {
            &self.several_layer_means
        }
    }
}

/// A whole moisture profile at one time.
#[derive(Debug, Clone, PartialEq)]
pub struct Profile {
    /// Time, s.
    pub time: f64,
    /// Moisture of each cell (dry fraction), `None` where the run ended before this time.
    pub moisture: Option<Vec<f64>>,
    /// Temperature of each cell (degrees C) in coupled runs, `None` otherwise or where the run
    /// ended before this time.
    pub temperature: Option<Vec<f64>>,
    /// Surface temperature at face A when it is exposed, in coupled runs.
    pub face_a_temp: Option<f64>,
    /// Surface temperature at face B when it is exposed, in coupled runs.
    pub face_b_temp: Option<f64>,
    /// Surface moisture at face A when it is exposed (and the profile was taken).
    pub face_a: Option<f64>,
    /// Surface moisture at face B when it is exposed (and the profile was taken).
    pub face_b: Option<f64>,
}

/// How a run ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RunStatus {
    /// Ran to the end, or reached the target.
    Ok,
    /// A target was set and the end time came first.
    TargetNotReached,
}

/// Everything a run produces.
#[derive(Debug, Clone)]
pub struct RunResult {
    /// Output rows, the first at time 0.
    pub curves: Vec<CurveRow>,
    /// Cell-centre positions from face A, m.
    pub positions: Vec<f64>,
    /// Profiles at the requested times.
    pub profiles: Vec<Profile>,
    /// How it ended.
    pub status: RunStatus,
    /// When the target was reached, s.
    pub drying_time: Option<f64>,
    /// Largest |surface - centre| seen at any step, dry fraction.
    pub max_surface_centre_difference: f64,
    /// The (surface, centre) moistures at that moment, dry fraction.
    pub max_surface_centre_difference_pair: Option<(f64, f64)>,
    /// Water removed per m2 of exposed surface, kg/m2.
    pub water_removed: f64,
    /// |change of water held + water out| / initial water held.
    pub mass_balance_error: f64,
    /// Coupled runs: |convective heat in - (change of stored energy + latent heat + sensible
    /// heat of the water that left)| / the largest of those terms. `None` when isothermal.
    pub energy_balance_error: Option<f64>,
    /// Cells.
    pub cells: usize,
    /// Solver work.
    pub stats: Stats,
    /// Wall-clock seconds of the solve.
    pub solve_seconds: f64,
    /// Times at which schedule steps began, s, with their index.
    pub step_starts: Vec<(f64, usize)>,
    /// Things the user should know (e.g. the schedule ran out).
    pub warnings: Vec<String>,
    /// Each schedule step that ran or was skipped, in order.
    pub steps: Vec<StepRecord>,
    /// When the largest surface-centre difference was seen, s.
    pub time_of_max_difference: Option<f64>,
    /// Latent heat taken up by the water removed, kJ per m2 of exposed surface: coupled runs
    /// only, `None` for isothermal runs.
    pub evaporation_energy: Option<f64>,
    /// Distance from face A to face B (the radius of a cylinder or sphere), m.
    pub thickness: f64,
}

impl RunResult {
    /// The last output row.
    pub fn last(&self) -> Option<&CurveRow> {
        self.curves.last()
    }
}

/// Hooks for a caller: cancellation and progress.
#[derive(Default)]
pub struct RunControl<'a> {
    /// Set to stop the run early with [`SolveError::Cancelled`].
    pub cancel: Option<&'a AtomicBool>,
    /// Called now and then with the fraction of the end time reached.
    pub progress: Option<&'a dyn Fn(f64)>,
    /// Stop with [`SolveError::OutOfTime`] once this instant has passed (the budget, s).
    pub deadline: Option<(Instant, f64)>,
}

/// Runs a problem from start to end (or target).
pub fn run(problem: &Problem, control: &RunControl<'_>) -> Result<RunResult, SolveError> {
    let started = Instant::now();
    let mut d = Driver::new(problem);
    d.run(control)?;
    Ok(d.finish(started.elapsed().as_secs_f64()))
}

struct Driver<'p> {
    p: &'p Problem,
    stepper: Stepper<'p>,
    curves: CurveRecorder<'p>,
    profiles: ProfileRecorder<'p>,
    initial_mean: f64,
    initial_water: f64,
    initial_energy: f64,
    /// An interpolated (or copied) state for output rows and profiles.
    scratch: super::state::State,
    max_difference: f64,
    max_pair: Option<(f64, f64)>,
    drying_time: Option<f64>,
    status: RunStatus,
    walker: ScheduleWalker,
    warnings: Vec<String>,
    time_of_max: Option<f64>,
}

/// The exposed surface's equilibrium moisture under `air` in `step`: a fixed surface value,
/// the given equilibrium, or the surface material's isotherm at the air's humidity.
pub(super) fn surface_equilibrium(p: &Problem, step: &StepPlan, air: Air) -> Option<f64> {
    if let crate::case::Exchange::FixedSurface(x) = step.exchange {
        return Some(x);
    }
    let site = p.face_a.or(p.face_b)?;
    step.equilibrium_moisture.or_else(|| {
        let iso = p.materials[site.material].isotherm;
        air.rh
            .and_then(|rh| iso.equilibrium_moisture(rh, air.dry_bulb_c))
            .filter(|x| x.is_finite())
    })
}

/// Time comparisons tolerate this relative round-off.
pub(super) fn same_time(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * a.abs().max(b.abs()).max(1.0)
}

impl<'p> Driver<'p> {
    fn new(p: &'p Problem) -> Driver<'p> {
        let stepper = Stepper::new(p);
        let initial_mean = p.mean(&p.initial);
        let initial_energy = p.thermal.as_ref().map_or(0.0, |th| {
            super::coupled::stored_energy(p, th, stepper.state())
        });
        Driver {
            p,
            stepper,
            curves: CurveRecorder::new(p),
            profiles: ProfileRecorder::new(p),
            initial_mean,
            initial_water: p.water(&p.initial),
            initial_energy,
            scratch: super::state::State::default(),
            max_difference: 0.0,
            max_pair: None,
            drying_time: None,
            status: RunStatus::Ok,
            walker: ScheduleWalker::new(),
            warnings: Vec::new(),
            time_of_max: None,
        }
    }

    /// End of the schedule step in force, if it has a duration.
    fn step_end(&self) -> Option<f64> {
        self.walker.step_end(self.p, &self.stepper)
    }

    fn close_step(&mut self, ended_by: StepEnd) {
        self.walker.close(self.p, &self.stepper, ended_by);
    }

    /// Puts the first schedule step in force (skipping it when its trigger is already met).
    fn enter_step(&mut self) {
        self.walker.start(self.p, &mut self.stepper);
        self.track_difference();
    }

    /// Moves to the next schedule step (skipping those whose trigger is already met).
    fn advance_schedule(&mut self) {
        self.walker.advance(self.p, &mut self.stepper);
        self.track_difference();
    }

    fn run(&mut self, control: &RunControl<'_>) -> Result<(), SolveError> {
        if let Some(target) = self.p.target
            && (same_time(self.initial_mean, target) || self.initial_mean == target)
        {
            self.record_row();
            self.track_difference();
            self.take_profiles();
            self.close_step(StepEnd::Target);
            self.drying_time = Some(0.0);
            return Ok(());
        }
        self.enter_step();
        self.record_row();
        self.take_profiles();
        let end = self.p.end_time;
        let mut last_progress = 0.0;
        loop {
            if control.cancel.is_some_and(|c| c.load(Ordering::Relaxed)) {
                return Err(SolveError::Cancelled {
                    hours: self.stepper.time() / 3600.0,
                });
            }
            if let Some((deadline, seconds)) = control.deadline
                && Instant::now() >= deadline
            {
                return Err(SolveError::OutOfTime {
                    hours: self.stepper.time() / 3600.0,
                    end_hours: end / 3600.0,
                    seconds,
                });
            }
            // Steps land only on the end, schedule changes and triggers; output rows and
            // profiles between steps come from the stepper's dense output.
            let mut stop = end;
            if let Some(t) = self.step_end() {
                stop = stop.min(t);
            }
            self.stepper.set_stop_time(stop);
            let reason = self.stepper.step()?;
            self.track_difference();
            let t = self.stepper.time();
            self.emit_before(t);
            if let Some(progress) = control.progress
                && t - last_progress > 1e-3 * end
            {
                progress(t / end);
                last_progress = t;
            }
            match reason {
                StopReason::Internal => {}
                StopReason::StopTime => {
                    // A landing: the end or the step's end, each gets a row.
                    self.record_row();
                    self.take_profiles();
                    if same_time(t, end) || t >= end {
                        let own_end = self.step_end().is_some_and(|e| same_time(t, e) || e < t);
                        self.close_step(if own_end { StepEnd::Time } else { StepEnd::End });
                        if self.p.target.is_some() {
                            self.status = RunStatus::TargetNotReached;
                        }
                        return Ok(());
                    }
                    if self.step_end().is_some_and(|e| same_time(t, e) || e < t) {
                        self.close_step(StepEnd::Time);
                        self.advance_schedule();
                    }
                }
                StopReason::Trigger(0) => {
                    self.record_row();
                    self.take_profiles();
                    self.close_step(StepEnd::Target);
                    self.drying_time = Some(t);
                    return Ok(());
                }
                StopReason::Trigger(_) => {
                    self.record_row();
                    self.take_profiles();
                    self.close_step(StepEnd::Moisture);
                    self.advance_schedule();
                }
            }
        }
    }

    fn track_difference(&mut self) {
        let surfaces = self.stepper.surfaces();
        let x = self.stepper.moisture();
        let surface = self.p.surface_value(&surfaces);
        let centre = self.p.centre_value(x);
        self.note_difference(self.stepper.time(), surface, centre);
    }

    /// Keeps the largest surface-centre difference (at step ends and at the rows between them,
    /// so a peak inside a long step still counts).
    fn note_difference(&mut self, t: f64, surface: f64, centre: f64) {
        let d = (surface - centre).abs();
        // The time of the largest difference is when it was first reached: a plateau (the
        // centre untouched while a fixed surface holds) is lifted only by round-off and by the
        // time steps' far smaller wobble (a few 1e-9 of the value at the default tolerance, a
        // ten-thousandth of what the error control resolves), which must not move that time.
        let noise = 1e-3 * self.p.tolerance * self.p.moisture_scale;
        if d > self.max_difference * (1.0 + 1e-9) + noise || self.max_pair.is_none() {
            self.max_difference = d;
            self.max_pair = Some((surface, centre));
            self.time_of_max = Some(t);
        }
        self.walker.note_difference(d, (surface, centre));
    }

    /// The surfaces, air and schedule step of the state in `scratch` at time `t`.
    fn describe_scratch(&mut self, t: f64) -> (Surfaces, Air, usize) {
        let surfaces = self.stepper.surfaces_at(&self.scratch, t);
        (
            surfaces,
            self.stepper.air_at(t),
            self.stepper.schedule_step().0,
        )
    }

    /// Hands each observer the stepper's dense output at the times it wants inside the last
    /// step (before its end), in time order.
    fn emit_before(&mut self, t: f64) {
        loop {
            let wanted = [self.curves.next_time(), self.profiles.next_time()]
                .into_iter()
                .flatten()
                .filter(|&at| at < t && !same_time(at, t))
                .min_by(f64::total_cmp);
            let Some(at) = wanted else {
                break;
            };
            self.stepper.interpolate_into(at, &mut self.scratch);
            let (surfaces, air, step) = self.describe_scratch(at);
            let (surface, centre) = (
                self.p.surface_value(&surfaces),
                self.p.centre_value(&self.scratch.moisture),
            );
            self.note_difference(at, surface, centre);
            let sample = Sample {
                time: at,
                state: &self.scratch,
                surfaces: &surfaces,
                air,
                step,
            };
            let observers: [&mut dyn Observer; 2] = [&mut self.curves, &mut self.profiles];
            for observer in observers {
                if observer
                    .next_time()
                    .is_some_and(|n| same_time(n, at) || n < at)
                {
                    observer.observe(&sample);
                }
            }
        }
    }

    /// The current state, as a sample in `scratch`.
    fn sample_now(&mut self) -> (f64, Surfaces, Air, usize) {
        let t = self.stepper.time();
        self.scratch.clone_from(self.stepper.state());
        let (surfaces, air, step) = self.describe_scratch(t);
        (t, surfaces, air, step)
    }

    /// A `curves` row of the current state (a landing).
    fn record_row(&mut self) {
        let (time, surfaces, air, step) = self.sample_now();
        self.curves.observe(&Sample {
            time,
            state: &self.scratch,
            surfaces: &surfaces,
            air,
            step,
        });
    }

    /// Profiles due at the current time (a landing).
    fn take_profiles(&mut self) {
        let (time, surfaces, air, step) = self.sample_now();
        self.profiles.observe(&Sample {
            time,
            state: &self.scratch,
            surfaces: &surfaces,
            air,
            step,
        });
    }

    fn finish(mut self, solve_seconds: f64) -> RunResult {
        let t = self.stepper.time();
        let p = self.p;
        // Profiles the run did not reach: empty columns where the user asked for them, and
        // the final state where the times were defaults.
        for &pt in &p.profile_times[self.profiles.next.min(p.profile_times.len())..] {
            if p.profile_times_given {
                self.profiles.profiles.push(Profile {
                    time: pt,
                    moisture: None,
                    temperature: None,
                    face_a: None,
                    face_b: None,
                    face_a_temp: None,
                    face_b_temp: None,
                });
            }
        }
        if !p.profile_times_given
            && self
                .profiles
                .profiles
                .last()
                .is_none_or(|pr| !same_time(pr.time, t))
        {
            let (time, surfaces, air, step) = self.sample_now();
            let sample = Sample {
                time,
                state: &self.scratch,
                surfaces: &surfaces,
                air,
                step,
            };
            let profile = self.profiles.profile_of(&sample, t);
            self.profiles.profiles.push(profile);
        }
        if p.profile_times_given && self.profiles.next < p.profile_times.len() {
            self.warnings.push(format!(
                "the run ended at {:.3} h, before some profile_hours; those columns are empty",
                t / 3600.0
            ));
        }
        let water_now = p.water(self.stepper.moisture());
        let out = self.stepper.outflow();
        let mass_balance_error = if self.initial_water > 0.0 {
            ((self.initial_water - water_now) - out).abs() / self.initial_water
        } else {
            ((self.initial_water - water_now) - out).abs()
        };
        let (energy_balance_error, evaporation_energy) = match &p.thermal {
            Some(thermal) => {
                let e = self.stepper.exchanged();
                let stored = super::coupled::stored_energy(p, thermal, self.stepper.state())
                    - self.initial_energy;
                // convective = stored + latent + sensible heat of the water that left, where
                // the last is energy_in's remainder: convective - latent - energy_in.
                let residual = stored - e.energy_in;
                let size = e
                    .convective
                    .abs()
                    .max(stored.abs())
                    .max(e.latent.abs())
                    .max(f64::MIN_POSITIVE);
                // kJ per m2 of exposed surface.
                let per_area = if p.exposed_area > 0.0 {
                    e.latent / p.exposed_area / 1000.0
                } else {
                    0.0
                };
                (Some(residual.abs() / size), Some(per_area))
            }
            None => (None, None),
        };
        let water_removed = if p.exposed_area > 0.0 {
            out / p.exposed_area
        } else {
            0.0
        };
        RunResult {
            curves: self.curves.rows,
            positions: p.mesh.centres.clone(),
            profiles: self.profiles.profiles,
            status: self.status,
            drying_time: self.drying_time,
            max_surface_centre_difference: self.max_difference,
            max_surface_centre_difference_pair: self.max_pair,
            water_removed,
            mass_balance_error,
            energy_balance_error,
            cells: p.len(),
            stats: self.stepper.stats(),
            solve_seconds,
            step_starts: self.walker.starts,
            warnings: self
                .walker
                .warnings
                .into_iter()
                .chain(self.warnings)
                .collect(),
            steps: self.walker.records,
            time_of_max_difference: self.time_of_max,
            evaporation_energy,
            thickness: p.mesh.length,
        }
    }
}
