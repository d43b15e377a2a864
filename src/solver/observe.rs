//! Observers: what records a run, at times of its own choosing. The run loop lands its steps
//! only on schedule changes, triggers and the end; an observer names the next time it wants to
//! see, and the loop hands it the stepper's dense output there (and the state at every landing).
//! The `curves` rows and the profiles are observers; fits add values at measured times the
//! same way.

use super::driver::{CurveRow, Profile, same_time, surface_equilibrium};
use super::flux::Surfaces;
use super::problem::{Air, Problem};
use super::state::State;

/// One look at the run: a state at a time, what its exposed faces see, and the air in force.
#[derive(Debug, Clone, Copy)]
pub struct Sample<'a> {
    /// Time, s.
    pub time: f64,
    /// Moisture (and temperature) of every cell.
    pub state: &'a State,
    /// Surface values and rates of the exposed faces.
    pub surfaces: &'a Surfaces,
    /// Air in force.
    pub air: Air,
    /// Schedule step in force.
    pub step: usize,
}

/// Something that records a run.
pub trait Observer {
    /// The next time this observer wants to see, if any.
    fn next_time(&self) -> Option<f64>;
    /// A sample at that time, or at a landing of the run (a step change, a trigger, the end).
    fn observe(&mut self, sample: &Sample<'_>);
}

/// The `curves` rows: one at every multiple of the output spacing and one at every landing.
#[derive(Debug, Clone)]
pub struct CurveRecorder<'p> {
    p: &'p Problem,
    initial_mean: f64,
    /// Dry mass of each layer.
    layer_mass: Vec<f64>,
    next: u64,
    /// Rows so far, the first at time 0.
    pub rows: Vec<CurveRow>,
}

impl<'p> CurveRecorder<'p> {
    /// A recorder whose next wanted time is the first output time after 0.
    pub fn new(p: &'p Problem) -> CurveRecorder<'p> {
        CurveRecorder {
            p,
            initial_mean: p.mean(&p.initial),
            layer_mass: (p.mesh.layer_cells.iter())
                .map(|r| super::sums::sum(&p.dry_mass[r.clone()]))
                .collect(),
            next: 1,
            // Room for the rows a run to its end time writes (up to a bound): no regrowth and
            // copying of the rows as they come.
            rows: Vec::with_capacity((p.end_time / p.output_every).clamp(0.0, 4096.0) as usize + 2),
        }
    }

    fn output_time(&self, k: u64) -> f64 {
        self.p.output_every * k as f64
    }
}

impl Observer for CurveRecorder<'_> {
    fn next_time(&self) -> Option<f64> {
        Some(self.output_time(self.next))
    }

    fn observe(&mut self, s: &Sample<'_>) {
        let p = self.p;
        let t = s.time;
        let x = &s.state.moisture;
        let mean = p.mean(x);
        let surface = p.surface_value(s.surfaces);
        let air = s.air;
        let moisture_ratio = p.steps.get(s.step).and_then(|step| {
            let eq = p.equilibrium_mean(step, air)?;
            let span = self.initial_mean - eq;
            (span.abs() > 1e-12 * self.initial_mean.abs().max(1e-12)).then(|| (mean - eq) / span)
        });
        let several_layer_means = if let [_] = p.mesh.layer_cells[..] {
            Vec::new()
        } else {
            (p.mesh.layer_cells.iter().zip(&self.layer_mass))
                .map(|(r, m)| super::sums::dot(&p.dry_mass[r.clone()], &x[r.clone()]) / m)
                .collect()
        };
        let temps = &s.state.temperature;
        let (mean_temp_c, surface_temp_c, centre_temp_c) = if temps.is_empty() {
            (air.dry_bulb_c, air.dry_bulb_c, air.dry_bulb_c)
        } else {
            (
                p.mean(temps),
                p.surface_temperature(s.surfaces),
                p.centre_value(temps),
            )
        };
        let centre = p.centre_value(x);
        let surface_material = p
            .face_a
            .or(p.face_b)
            .map_or(p.cell_material[0], |f| f.material);
        let [(i, wi), (j, wj)] = p.centre;
        let centre_material = p.cell_material[if wi >= wj { i } else { j }];
        let activity = |material: usize, x: f64, t_c: f64| {
            p.materials[material]
                .isotherm
                .water_activity(x, t_c)
                .filter(|a| a.is_finite())
        };
        let equilibrium = p
            .steps
            .get(s.step)
            .and_then(|step| surface_equilibrium(p, step, air));
        let row = CurveRow {
            time: t,
            mean,
            surface,
            centre,
            moisture_ratio,
            mean_temp_c,
            surface_temp_c,
            centre_temp_c,
            drying_rate: s.surfaces.total_out(p) / p.total_dry_mass(),
            air_temp_c: air.dry_bulb_c,
            air_rh: air.rh,
            step: s.step,
            several_layer_means,
            equilibrium,
            surface_water_activity: activity(surface_material, surface, surface_temp_c),
            centre_water_activity: activity(centre_material, centre, centre_temp_c),
        };
        if self.rows.last().is_some_and(|r| same_time(r.time, t)) {
            self.rows.pop();
        }
        self.rows.push(row);
        while same_time(t, self.output_time(self.next)) || self.output_time(self.next) < t {
            self.next += 1;
        }
    }
}

/// Whole profiles at the problem's profile times.
#[derive(Debug, Clone)]
pub struct ProfileRecorder<'p> {
    p: &'p Problem,
    /// Index of the next profile time.
    pub next: usize,
    /// Profiles so far.
    pub profiles: Vec<Profile>,
}

impl<'p> ProfileRecorder<'p> {
    /// A recorder at the first profile time.
    pub fn new(p: &'p Problem) -> ProfileRecorder<'p> {
        ProfileRecorder {
            p,
            next: 0,
            profiles: Vec::new(),
        }
    }

    /// The profile of `s`, taken as the one for time `time`.
    pub fn profile_of(&self, s: &Sample<'_>, time: f64) -> Profile {
        let p = self.p;
        let coupled = p.thermal.is_some();
        Profile {
            time,
            moisture: Some(s.state.moisture.clone()),
            temperature: coupled.then(|| s.state.temperature.clone()),
            face_a: p.face_a.map(|_| s.surfaces.x_a),
            face_b: p.face_b.map(|_| s.surfaces.x_b),
            face_a_temp: p.face_a.filter(|_| coupled).map(|_| s.surfaces.t_a),
            face_b_temp: p.face_b.filter(|_| coupled).map(|_| s.surfaces.t_b),
        }
    }
}

impl Observer for ProfileRecorder<'_> {
    fn next_time(&self) -> Option<f64> {
        self.p.profile_times.get(self.next).copied()
    }

    /// Takes every profile time at or before the sample's time (at a landing there is at most
    /// the one at the landing itself; times before it were sampled on the way).
    fn observe(&mut self, s: &Sample<'_>) {
        while let Some(pt) = self.next_time() {
            if !(same_time(pt, s.time) || pt < s.time) {
                break;
            }
            let profile = self.profile_of(s, pt);
            self.profiles.push(profile);
            self.next += 1;
        }
    }
}
