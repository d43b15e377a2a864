//! The face and cell physics behind one interface, so that the stepper (and later integrators,
//! fits and studies) drive any model the same way. A model has a block size: 1 unknown per cell
//! (moisture, isothermal: [`flux`]) or 2 (moisture and temperature: [`coupled`]).

use super::coupled::{self, CoupledWorkspace, HeatFaces};
use super::flux::{self, FaceLaws, NewtonFailure, NewtonSettings, Surfaces};
use super::problem::{InnerFace, Problem};
use super::state::State;
use super::workspace::Workspace;
use crate::case::Exchange;

/// What the exposed faces see at one moment.
#[derive(Debug, Clone, Copy)]
pub struct Conditions {
    /// The water law at each face.
    pub laws: FaceLaws,
    /// Air temperature, degrees C (the product's in isothermal runs).
    pub t_air: f64,
    /// The heat side of each face (coupled runs).
    pub heat: HeatFaces,
}

/// Rates through the exposed faces at one state, per m2 of face A (per second).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Rates {
    /// Water out, kg/(m2 s).
    pub water: f64,
    /// Heat from the air, h (T_air - T_s), W/m2 (coupled runs).
    pub convective: f64,
    /// Latent heat taken by the evaporating water, W/m2 (coupled runs).
    pub latent: f64,
    /// Energy into the body, W/m2 (coupled runs).
    pub energy_in: f64,
}

/// The physics of one model, as the time integrators see it: stored quantities `U(y)` (water, and
/// energy in coupled runs, per cell) change by their net inflow `G(y)`, and an implicit stage
/// solves `U(y) - c_dt G(y) = b`.
pub trait Model {
    /// Unknowns per cell: 1 (moisture) or 2 (moisture and temperature).
    fn block_size(&self) -> usize;

    /// The stored quantities of `state` into `u` (block-interleaved, n * block size).
    fn conserved(&self, state: &State, u: &mut [f64]);

    /// The net inflow of every cell at `state` into `g` (as `conserved`), and the face rates.
    fn inflow(&mut self, conditions: &Conditions, state: &State, g: &mut [f64]) -> Rates;

    /// Solves the stage `U(y) - c_dt G(y) = b` by Newton's method from the guess in `y`
    /// (`fallback` if the guess gives non-finite values); returns the face rates at the solution
    /// and the Newton iteration count. Afterwards [`Model::last_inflow`] is `G(y)`.
    fn solve_stage(
        &mut self,
        conditions: &Conditions,
        c_dt: f64,
        b: &[f64],
        y: &mut State,
        fallback: &State,
        settings: &NewtonSettings,
    ) -> Result<(Rates, usize), NewtonFailure>;

    /// The net inflow at the last stage solution.
    fn last_inflow(&self) -> &[f64];

    /// The time derivative of the unknowns at `state` from its net inflow `g` (dX/dt, and dT/dt
    /// in coupled runs), into `out`.
    fn state_rates(&self, state: &State, g: &[f64], out: &mut State);

    /// Solves `v` in place with the last stage's Newton matrix (`dU/dy - c_dt dG/dy`): an error in
    /// stored quantities becomes one in the unknowns, damped where the problem is stiff.
    fn filter(&mut self, v: &mut [f64]) -> bool;

    /// Forgets the reusable Jacobian (the face laws changed).
    fn invalidate_jacobian(&mut self);

    /// Whether every stage equation is linear (one Newton update solves it).
    fn is_linear(&self) -> bool;

    /// Surface figures of `state` (fills the model's face buffers).
    fn surfaces(&mut self, conditions: &Conditions, state: &State) -> Surfaces;

    /// Linear (tridiagonal or block) solves so far.
    fn linear_solves(&self) -> u64;

    /// Evaluations of the face derivatives (Jacobians) so far.
    fn jacobian_evaluations(&self) -> u64;
}

/// The model a problem asks for: coupled when it has thermal data, isothermal otherwise.
pub fn for_problem<'p>(problem: &'p Problem) -> Box<dyn Model + 'p> {
    let n = problem.len();
    match &problem.thermal {
        Some(_) => Box::new(HeatAndMoisture {
            problem,
            ws: CoupledWorkspace::new(n),
        }),
        None => Box::new(Moisture {
            problem,
            ws: Workspace::new(n),
            linear: linear_problem(problem),
        }),
    }
}

/// Whether an isothermal problem's stage equations are linear: one material of constant
/// diffusivity (no interfaces) and faces that are sealed, fixed or content-based in every step.
fn linear_problem(p: &Problem) -> bool {
    p.thermal.is_none()
        && p.inner.iter().all(|f| matches!(f, InnerFace::Same { .. }))
        && p.materials.iter().all(|m| m.diffusivity.is_constant())
        && p.steps.iter().all(|s| {
            matches!(
                s.exchange,
                Exchange::Unspecified | Exchange::FixedSurface(_) | Exchange::SurfaceCoefficient(_)
            )
        })
}

fn rates_of(p: &Problem, s: &Surfaces) -> Rates {
    Rates {
        water: s.total_out(p),
        ..Rates::default()
    }
}

/// Isothermal moisture diffusion (block size 1).
struct Moisture<'p> {
    problem: &'p Problem,
    ws: Workspace,
    linear: bool,
}

impl Model for Moisture<'_> {
    fn block_size(&self) -> usize {
        1
    }

    fn conserved(&self, state: &State, u: &mut [f64]) {
        for ((u, m), x) in u
            .iter_mut()
            .zip(&self.problem.dry_mass)
            .zip(&state.moisture)
        {
            *u = m * x;
        }
    }

    fn inflow(&mut self, c: &Conditions, state: &State, g: &mut [f64]) -> Rates {
        let p = self.problem;
        let s =
            flux::evaluate_faces_with(p, &c.laws, c.t_air, &state.moisture, &mut self.ws, false);
        let areas = &p.mesh.areas;
        for (i, g) in g.iter_mut().enumerate() {
            *g = areas[i] * self.ws.flux[i] - areas[i + 1] * self.ws.flux[i + 1];
        }
        rates_of(p, &s)
    }

    fn solve_stage(
        &mut self,
        c: &Conditions,
        c_dt: f64,
        b: &[f64],
        y: &mut State,
        fallback: &State,
        settings: &NewtonSettings,
    ) -> Result<(Rates, usize), NewtonFailure> {
        let p = self.problem;
        let (water_out, iterations) = flux::solve_stage(
            p,
            &c.laws,
            c.t_air,
            c_dt,
            b,
            &mut y.moisture,
            &fallback.moisture,
            &mut self.ws,
            settings,
        )?;
        let rates = Rates {
            water: water_out,
            ..Rates::default()
        };
        Ok((rates, iterations))
    }

    fn last_inflow(&self) -> &[f64] {
        &self.ws.inflow
    }

    fn state_rates(&self, _state: &State, g: &[f64], out: &mut State) {
        for ((o, g), m) in out.moisture.iter_mut().zip(g).zip(&self.problem.dry_mass) {
            *o = g / m;
        }
    }

    fn filter(&mut self, v: &mut [f64]) -> bool {
        flux::filter(&mut self.ws, v)
    }

    fn invalidate_jacobian(&mut self) {
        self.ws.jacobian_valid = false;
    }

    fn is_linear(&self) -> bool {
        self.linear
    }

    fn surfaces(&mut self, c: &Conditions, state: &State) -> Surfaces {
        flux::exposed_surfaces(
            self.problem,
            &c.laws,
            c.t_air,
            &state.moisture,
            &mut self.ws,
        )
    }

    fn linear_solves(&self) -> u64 {
        self.ws.linear_solves
    }

    fn jacobian_evaluations(&self) -> u64 {
        self.ws.jacobian_evaluations
    }
}

/// Coupled heat and moisture (block size 2).
struct HeatAndMoisture<'p> {
    problem: &'p Problem,
    ws: CoupledWorkspace,
}

impl HeatAndMoisture<'_> {
    fn rates(&self, s: &coupled::CoupledSurfaces) -> Rates {
        let p = self.problem;
        let mut rates = Rates::default();
        for (site, f) in [(p.face_a, s.a), (p.face_b, s.b)] {
            if let (Some(site), Some(f)) = (site, f) {
                rates.water += site.area * f.outflow;
                rates.convective += site.area * f.convective;
                rates.latent += site.area * f.latent;
                rates.energy_in += site.area * f.energy_in;
            }
        }
        rates
    }
}

impl Model for HeatAndMoisture<'_> {
    fn block_size(&self) -> usize {
        2
    }

    fn conserved(&self, state: &State, u: &mut [f64]) {
        if let Some(thermal) = &self.problem.thermal {
            coupled::conserved(self.problem, thermal, state, u);
        }
    }

    fn inflow(&mut self, c: &Conditions, state: &State, g: &mut [f64]) -> Rates {
        let p = self.problem;
        let Some(thermal) = &p.thermal else {
            return Rates::default();
        };
        let s = coupled::evaluate_faces_with(p, thermal, &c.heat, state, &mut self.ws, false);
        let areas = &p.mesh.areas;
        let ws = &self.ws;
        for i in 0..state.moisture.len() {
            g[2 * i] = areas[i] * ws.water[i] - areas[i + 1] * ws.water[i + 1];
            g[2 * i + 1] = areas[i] * ws.energy[i] - areas[i + 1] * ws.energy[i + 1];
        }
        self.rates(&s)
    }

    fn solve_stage(
        &mut self,
        c: &Conditions,
        c_dt: f64,
        b: &[f64],
        y: &mut State,
        fallback: &State,
        settings: &NewtonSettings,
    ) -> Result<(Rates, usize), NewtonFailure> {
        let p = self.problem;
        let Some(thermal) = &p.thermal else {
            return Err(NewtonFailure::Breakdown);
        };
        let (s, iterations) = coupled::solve_stage(
            p,
            thermal,
            &c.heat,
            c_dt,
            b,
            y,
            fallback,
            &mut self.ws,
            settings,
        )?;
        Ok((self.rates(&s), iterations))
    }

    fn last_inflow(&self) -> &[f64] {
        &self.ws.inflow
    }

    fn state_rates(&self, state: &State, g: &[f64], out: &mut State) {
        let p = self.problem;
        let Some(thermal) = &p.thermal else {
            return;
        };
        for i in 0..state.moisture.len() {
            // E = m (c_s + c_w X) T: dE/dt = m c_w T dX/dt + m (c_s + c_w X) dT/dt.
            let m = p.dry_mass[i];
            let (x, t) = (state.moisture[i], state.temperature[i]);
            let cs = thermal.specific_heat[p.cell_material[i]];
            let dx = g[2 * i] / m;
            out.moisture[i] = dx;
            out.temperature[i] = (g[2 * i + 1] - m * super::problem::WATER_SPECIFIC_HEAT * t * dx)
                / (m * (cs + super::problem::WATER_SPECIFIC_HEAT * x));
        }
    }

    fn filter(&mut self, v: &mut [f64]) -> bool {
        coupled::filter(&mut self.ws, v)
    }

    fn invalidate_jacobian(&mut self) {
        self.ws.jacobian_valid = false;
    }

    fn is_linear(&self) -> bool {
        false
    }

    fn surfaces(&mut self, c: &Conditions, state: &State) -> Surfaces {
        let p = self.problem;
        let n = state.moisture.len();
        let mut s = Surfaces {
            x_a: state.moisture[0],
            x_b: state.moisture[n - 1],
            t_a: state.temperature[0],
            t_b: state.temperature[n - 1],
            ..Surfaces::default()
        };
        let Some(thermal) = &p.thermal else {
            return s;
        };
        let faces = coupled::evaluate_faces_with(p, thermal, &c.heat, state, &mut self.ws, false);
        if let Some(f) = faces.a {
            (s.out_a, s.x_a, s.t_a) = (f.outflow, f.x_s, f.t_s);
        }
        if let Some(f) = faces.b {
            (s.out_b, s.x_b, s.t_b) = (f.outflow, f.x_s, f.t_s);
        }
        s
    }

    fn linear_solves(&self) -> u64 {
        self.ws.linear_solves
    }

    fn jacobian_evaluations(&self) -> u64 {
        self.ws.jacobian_evaluations
    }
}
