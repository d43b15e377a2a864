//! The face and cell physics behind one interface, so that the stepper (and later integrators,
//! fits and studies) drive any model the same way. A model has a block size: 1 unknown per cell
//! (moisture, isothermal: [`flux`]) or 2 (moisture and temperature: [`coupled`]).

use super::coupled::{self, CoupledWorkspace, HeatFaces};
use super::flux::{self, FaceLaws, NewtonFailure, Surfaces};
use super::problem::Problem;
use super::state::State;
use super::workspace::Workspace;

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

/// The physics of one model.
pub trait Model {
    /// Unknowns per cell: 1 (moisture) or 2 (moisture and temperature).
    fn block_size(&self) -> usize;

    /// One backward-Euler step from `old` over `dt` into `new` by Newton's method; returns the
    /// face rates at the converged state and the Newton iteration count.
    fn backward_euler(
        &mut self,
        conditions: &Conditions,
        dt: f64,
        old: &State,
        new: &mut State,
    ) -> Result<(Rates, usize), NewtonFailure>;

    /// Surface figures of `state` (fills the model's face buffers).
    fn surfaces(&mut self, conditions: &Conditions, state: &State) -> Surfaces;

    /// Linear (tridiagonal or block) solves so far.
    fn linear_solves(&self) -> u64;
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
        }),
    }
}

/// Isothermal moisture diffusion (block size 1).
struct Moisture<'p> {
    problem: &'p Problem,
    ws: Workspace,
}

impl Model for Moisture<'_> {
    fn block_size(&self) -> usize {
        1
    }

    fn backward_euler(
        &mut self,
        c: &Conditions,
        dt: f64,
        old: &State,
        new: &mut State,
    ) -> Result<(Rates, usize), NewtonFailure> {
        let p = self.problem;
        let (surfaces, iterations) = flux::backward_euler(
            p,
            &c.laws,
            c.t_air,
            dt,
            &old.moisture,
            &mut new.moisture,
            &mut self.ws,
        )?;
        let rates = Rates {
            water: surfaces.total_out(p),
            ..Rates::default()
        };
        Ok((rates, iterations))
    }

    fn surfaces(&mut self, c: &Conditions, state: &State) -> Surfaces {
        flux::evaluate_faces(
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
}

/// Coupled heat and moisture (block size 2).
struct HeatAndMoisture<'p> {
    problem: &'p Problem,
    ws: CoupledWorkspace,
}

impl Model for HeatAndMoisture<'_> {
    fn block_size(&self) -> usize {
        2
    }

    fn backward_euler(
        &mut self,
        c: &Conditions,
        dt: f64,
        old: &State,
        new: &mut State,
    ) -> Result<(Rates, usize), NewtonFailure> {
        let p = self.problem;
        let Some(thermal) = &p.thermal else {
            return Err(NewtonFailure::Breakdown);
        };
        let (s, iterations) =
            coupled::backward_euler(p, thermal, &c.heat, dt, old, new, &mut self.ws)?;
        let mut rates = Rates::default();
        for (site, f) in [(p.face_a, s.a), (p.face_b, s.b)] {
            if let (Some(site), Some(f)) = (site, f) {
                rates.water += site.area * f.outflow;
                rates.convective += site.area * f.convective;
                rates.latent += site.area * f.latent;
                rates.energy_in += site.area * f.energy_in;
            }
        }
        Ok((rates, iterations))
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
        let faces = coupled::evaluate_faces(p, thermal, &c.heat, state, &mut self.ws);
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
}
