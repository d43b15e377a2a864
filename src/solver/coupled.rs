//! The coupled heat-and-moisture model: two unknowns per cell (moisture X and temperature T),
//! face fluxes of water and energy with their 2x2 derivative blocks, and the Newton solve of one
//! implicit stage on the block-tridiagonal system.
//!
//! Per cell, in conservative form (per unit normalised area, m_i the cell's dry mass):
//!
//! - water:  m_i dX_i/dt = A_i F_i - A_{i+1} F_{i+1}
//! - energy: dE_i/dt = A_i Q_i - A_{i+1} Q_{i+1},  E_i = m_i (c_s + c_w X_i) T_i
//!
//! with F the water flux and Q the energy flux, both positive towards face B. Inside the body
//! Q = -k dT/ds + c_w T F: conduction plus the sensible heat the moving water carries (so that
//! the stored energy E, and with it the energy balance, is exact; for the temperature this is
//! rho_s (c_s + c_w X) dT/dt = div(k grad T) - c_w J.grad T, the usual equation with the small
//! advection term). At an exposed face the surface moisture X_s and temperature T_s satisfy
//!
//! - rho_s D (X_c - X_s) / delta = j(X_s, T_s)          (water reaching the surface leaves)
//! - k (T_s - T_c) / delta = h (T_air - T_s) - j L_v(T_s) (heat reaching the surface, less the
//!   latent heat of the water evaporating there, is conducted in)
//!
//! where delta is the half cell. The energy entering the body through the face is
//! h (T_air - T_s) - j (L_v(T_s) + c_w T_s): the vapour leaves with its latent heat and the
//! sensible heat of the liquid it came from. The stages advance the stored water and energy, so
//! both are conserved up to the faces' nonlinearity over the last Newton update, and the run
//! reports both balances.

use super::blocktri::{self, Block};
use super::flux::{self, Contraction, NewtonFailure, NewtonMemory, NewtonSettings};
use super::problem::{
    FaceLaw, FaceSite, InnerFace, MaterialProps, Problem, Thermal, WATER_SPECIFIC_HEAT,
    saturated_vapour_density,
};
use super::state::State;
use crate::physics::psychro::latent_heat_j_kg;

/// Maximum Newton iterations per coupled stage solve.
const MAX_NEWTON: usize = 25;

const CW: f64 = WATER_SPECIFIC_HEAT;

/// What one exposed face sees in a coupled run at one moment.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HeatFace {
    /// The water law (the air-side law's vapour density is taken at the surface temperature).
    pub law: FaceLaw,
    /// Heat transfer coefficient, W/(m2 K).
    pub h: f64,
    /// Air temperature, degrees C.
    pub t_air: f64,
}

/// Conditions at both exposed faces.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HeatFaces {
    /// Face A.
    pub a: HeatFace,
    /// Face B.
    pub b: HeatFace,
}

/// One exposed face, solved: its rates and their derivatives with respect to the cell next to it.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct FaceSolution {
    /// Water leaving the body, kg/(m2 s) (positive when drying).
    pub outflow: f64,
    /// Energy entering the body, W/m2.
    pub energy_in: f64,
    /// Heat the air gives the surface, h (T_air - T_s), W/m2.
    pub convective: f64,
    /// Latent heat taken by the evaporating water, j L_v(T_s), W/m2.
    pub latent: f64,
    /// Surface moisture, dry fraction.
    pub x_s: f64,
    /// Surface temperature, degrees C.
    pub t_s: f64,
    /// d outflow / d (X_c, T_c).
    pub d_outflow: [f64; 2],
    /// d energy_in / d (X_c, T_c).
    pub d_energy: [f64; 2],
}

impl FaceSolution {
    /// The rates of a face solved to (`x_s`, `t_s`) with outflow `j`: the energy in is the
    /// convection less the latent and sensible heat the leaving water takes. With `derivatives`
    /// (d j and d T_s by the cell's (X_c, T_c)), the rates' derivatives follow from those.
    fn at_surface(
        face: &HeatFace,
        j: f64,
        (x_s, t_s): (f64, f64),
        derivatives: Option<([f64; 2], [f64; 2])>,
    ) -> FaceSolution {
        let lv = latent_heat_j_kg(t_s);
        let convective = face.h * (face.t_air - t_s);
        let mut solution = FaceSolution {
            outflow: j,
            energy_in: convective - j * (lv + CW * t_s),
            convective,
            latent: j * lv,
            x_s,
            t_s,
            ..FaceSolution::default()
        };
        if let Some((dj, dts)) = derivatives {
            let et = 1e-4;
            let lv_t = (latent_heat_j_kg(t_s + et) - latent_heat_j_kg(t_s - et)) / (2.0 * et);
            solution.d_outflow = dj;
            for b in 0..2 {
                solution.d_energy[b] =
                    -face.h * dts[b] - (lv + CW * t_s) * dj[b] - j * (lv_t + CW) * dts[b];
            }
        }
        solution
    }
}

/// Buffers of the coupled Newton solve, sized once.
#[derive(Debug, Clone)]
pub struct CoupledWorkspace {
    /// Water flux at each face, n + 1.
    pub water: Vec<f64>,
    /// Energy flux at each face, n + 1.
    pub energy: Vec<f64>,
    /// Derivatives of each face's (water, energy) flux: rows water/energy, columns
    /// (X_left, T_left, X_right, T_right).
    pub deriv: Vec<[[f64; 4]; 2]>,
    lower: Vec<Block>,
    diag: Vec<Block>,
    upper: Vec<Block>,
    rhs: Vec<[f64; 2]>,
    scratch: Vec<Block>,
    delta: Vec<[f64; 2]>,
    /// Net (water, energy) inflow of each cell at the last evaluation, interleaved, 2n.
    pub inflow: Vec<f64>,
    /// Whether `deriv` holds derivative blocks that may be reused.
    pub jacobian_valid: bool,
    /// What the Newton iteration measured in the last stage solve.
    pub memory: NewtonMemory,
    /// Linear solves done.
    pub linear_solves: u64,
    /// Evaluations of the face derivative blocks.
    pub jacobian_evaluations: u64,
    /// The last solved (surface temperature, water-side unknown) of faces A and B.
    pub face_guess: [[f64; 2]; 2],
    /// d (water, energy) flux / d (X, T) of the second cell in, at faces A and B, as a block
    /// (their second-order gradient).
    pub face_far: [Block; 2],
}

impl CoupledWorkspace {
    /// Buffers for `n` cells.
    pub fn new(n: usize) -> CoupledWorkspace {
        CoupledWorkspace {
            water: vec![0.0; n + 1],
            energy: vec![0.0; n + 1],
            deriv: vec![[[0.0; 4]; 2]; n + 1],
            lower: vec![[0.0; 4]; n],
            diag: vec![[0.0; 4]; n],
            upper: vec![[0.0; 4]; n],
            rhs: vec![[0.0; 2]; n],
            scratch: vec![[0.0; 4]; n],
            delta: vec![[0.0; 2]; n],
            inflow: vec![0.0; 2 * n],
            jacobian_valid: false,
            memory: NewtonMemory::default(),
            linear_solves: 0,
            jacobian_evaluations: 0,
            face_guess: [[f64::NAN; 2]; 2],
            face_far: [[0.0; 4]; 2],
        }
    }
}

/// Surface figures of a coupled evaluation (area-weighted totals over the exposed faces).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct CoupledSurfaces {
    /// Face A, when exposed.
    pub a: Option<FaceSolution>,
    /// Face B, when exposed.
    pub b: Option<FaceSolution>,
}

/// Stored energy of cell `i` per unit normalised area, J/m2 (relative to liquid water and dry
/// solid at 0 C).
#[inline]
fn energy(problem: &Problem, thermal: &Thermal, i: usize, x: f64, t: f64) -> f64 {
    let cs = thermal.specific_heat[problem.cell_material[i]];
    problem.dry_mass[i] * (cs + CW * x) * t
}

/// Heat capacity of cell `i`, J/(m2 K).
#[inline]
fn capacity(problem: &Problem, thermal: &Thermal, i: usize, x: f64) -> f64 {
    let cs = thermal.specific_heat[problem.cell_material[i]];
    problem.dry_mass[i] * (cs + CW * x)
}

/// Water and energy flux across a face inside one material, with derivatives.
fn same_material(
    m: &MaterialProps,
    k: f64,
    distance: f64,
    (xl, tl): (f64, f64),
    (xr, tr): (f64, f64),
) -> (f64, f64, [[f64; 4]; 2]) {
    let (xm, tm) = (0.5 * (xl + xr), 0.5 * (tl + tr));
    let (d, dx) = m.diffusivity.at_with_slope_x(xm, tm);
    let dt = m.diffusivity.slope_t(xm, tm);
    let g = m.density / distance;
    let diff = xl - xr;
    let f = g * d * diff;
    let f_xl = g * (0.5 * dx * diff + d);
    let f_xr = g * (0.5 * dx * diff - d);
    let f_t = g * 0.5 * dt * diff;
    let kc = k / distance;
    let q = kc * (tl - tr) + CW * tm * f;
    let q_xl = CW * tm * f_xl;
    let q_xr = CW * tm * f_xr;
    let q_tl = kc + CW * (0.5 * f + tm * f_t);
    let q_tr = -kc + CW * (0.5 * f + tm * f_t);
    (f, q, [[f_xl, f_t, f_xr, f_t], [q_xl, q_tl, q_xr, q_tr]])
}

/// Water and energy flux across a boundary between materials: temperature continuous (the
/// interface temperature from the two half-cell conductances in series), water activity
/// continuous at that temperature (see `flux::interface_flux`).
#[allow(clippy::too_many_arguments)]
fn interface(
    ml: &MaterialProps,
    mr: &MaterialProps,
    (kl, kr): (f64, f64),
    (dl, dr): (f64, f64),
    (xl, tl): (f64, f64),
    (xr, tr): (f64, f64),
    scale: f64,
    derivatives: bool,
) -> (f64, f64, [[f64; 4]; 2]) {
    let (gl, gr) = (kl / dl, kr / dr);
    let wl = gl / (gl + gr);
    let series = gl * gr / (gl + gr);
    let water = |xl: f64, tl: f64, xr: f64, tr: f64| {
        let ti = wl * tl + (1.0 - wl) * tr;
        flux::interface_flux(ml, mr, dl, dr, xl, xr, ti)
    };
    let ti = wl * tl + (1.0 - wl) * tr;
    let f = water(xl, tl, xr, tr);
    let q = series * (tl - tr) + CW * ti * f;
    if !derivatives {
        return (f, q, [[0.0; 4]; 2]);
    }
    let (ex_l, ex_r) = (1e-7 * (xl.abs() + scale), 1e-7 * (xr.abs() + scale));
    let (et_l, et_r) = (1e-6 * (tl.abs() + 1.0), 1e-6 * (tr.abs() + 1.0));
    let f_xl = (water(xl + ex_l, tl, xr, tr) - water(xl - ex_l, tl, xr, tr)) / (2.0 * ex_l);
    let f_tl = (water(xl, tl + et_l, xr, tr) - water(xl, tl - et_l, xr, tr)) / (2.0 * et_l);
    let f_xr = (water(xl, tl, xr + ex_r, tr) - water(xl, tl, xr - ex_r, tr)) / (2.0 * ex_r);
    let f_tr = (water(xl, tl, xr, tr + et_r) - water(xl, tl, xr, tr - et_r)) / (2.0 * et_r);
    let q_xl = CW * ti * f_xl;
    let q_xr = CW * ti * f_xr;
    let q_tl = series + CW * (wl * f + ti * f_tl);
    let q_tr = -series + CW * ((1.0 - wl) * f + ti * f_tr);
    (f, q, [[f_xl, f_tl, f_xr, f_tr], [q_xl, q_tl, q_xr, q_tr]])
}

/// The water law of a face with its vapour density taken at the surface temperature `t_s`.
fn law_at(law: FaceLaw, t_s: f64) -> FaceLaw {
    match law {
        FaceLaw::AirSide { hm, rho_v_air, .. } => FaceLaw::AirSide {
            hm,
            c_sat: saturated_vapour_density(t_s),
            rho_v_air,
            t_c: t_s,
        },
        other => other,
    }
}

/// Water leaving through the face by its law, at surface state (x_s, t_s).
fn law_flux(m: &MaterialProps, law: FaceLaw, x_s: f64, t_s: f64) -> f64 {
    match law {
        FaceLaw::Sealed | FaceLaw::Fixed(_) => 0.0,
        FaceLaw::Linear { k, x_eq } => k * (x_s - x_eq),
        FaceLaw::AirSide { hm, rho_v_air, .. } => {
            let aw = m.isotherm.water_activity(x_s, t_s).unwrap_or(0.0);
            hm * (aw * saturated_vapour_density(t_s) - rho_v_air)
        }
    }
}

/// Water conducted over the half cell from the cell centre (x_c, t_c) to the surface.
fn half_cell_flux(m: &MaterialProps, half: f64, x_c: f64, t_c: f64, x_s: f64, t_s: f64) -> f64 {
    m.density * m.diffusivity.at(0.5 * (x_c + x_s), 0.5 * (t_c + t_s)) * (x_c - x_s) / half
}

/// The two surface equations g(s; c) = 0 for s = (X_s, T_s) and the cell c = (X_c, T_c); also
/// the water leaving.
fn surface_equations(
    m: &MaterialProps,
    k: f64,
    site: &FaceSite,
    face: &HeatFace,
    s: [f64; 2],
    c: [f64; 2],
) -> ([f64; 2], f64) {
    let [x_s, t_s] = s;
    let [x_c, t_c] = c;
    let (g1, j) = match face.law {
        FaceLaw::Sealed => (x_s - x_c, 0.0),
        FaceLaw::Fixed(x) => (
            x_s - x,
            half_cell_flux(m, site.half_width, x_c, t_c, x_s, t_s),
        ),
        law => {
            let j = law_flux(m, law, x_s, t_s);
            (
                half_cell_flux(m, site.half_width, x_c, t_c, x_s, t_s) - j,
                j,
            )
        }
    };
    let g2 =
        k * (t_s - t_c) / site.half_width - face.h * (face.t_air - t_s) + j * latent_heat_j_kg(t_s);
    ([g1, g2], j)
}

/// Solves an exposed face: for a trial surface temperature the water balance gives X_s (the
/// isothermal face solver, robust for every law); the heat balance, which rises with T_s, is
/// then solved for T_s by a bracketed root. Derivatives follow from the implicit-function
/// theorem with finite-difference partials of the two surface equations.
pub fn solve_face(
    m: &MaterialProps,
    k: f64,
    site: &FaceSite,
    face: &HeatFace,
    x_c: f64,
    t_c: f64,
    scale: f64,
) -> FaceSolution {
    solve_face_with(m, k, site, face, (x_c, t_c), scale, true, [f64::NAN; 2]).0
}

/// As [`solve_face`], with the derivatives (zero in the result) skipped unless `derivatives`,
/// started from `guess` (the surface temperature and the water-side unknown of an earlier solve,
/// NaN for none); returns the solution and the solved (temperature, unknown) for the next call.
/// The surface temperature is found by the secant method from the guess (superlinear, a few
/// evaluations when the guess is close), and by a widened bracket and the Illinois method when
/// the secant steps stray; each evaluation's water side starts from the last one's unknown.
#[allow(clippy::too_many_arguments)]
fn solve_face_with(
    m: &MaterialProps,
    k: f64,
    site: &FaceSite,
    face: &HeatFace,
    (x_c, t_c): (f64, f64),
    scale: f64,
    derivatives: bool,
    guess: [f64; 2],
) -> (FaceSolution, [f64; 2]) {
    if let Some(solved) = air_side_newton(m, k, site, face, (x_c, t_c), guess) {
        return solved;
    }
    let unknown = std::cell::Cell::new(guess[1]);
    let water_at = |t_s: f64| {
        let (j, _, x_s, u) = flux::face_outflow_from(
            m,
            site.half_width,
            law_at(face.law, t_s),
            x_c,
            0.5 * (t_c + t_s),
            unknown.get(),
        );
        if u.is_finite() {
            unknown.set(u);
        }
        (j, x_s)
    };
    let heat = |t_s: f64| {
        let (j, _) = water_at(t_s);
        k * (t_s - t_c) / site.half_width - face.h * (face.t_air - t_s) + j * latent_heat_j_kg(t_s)
    };
    let t_s = secant_from(&heat, guess[0]).unwrap_or_else(|| bracketed_surface(&heat, t_c, face));
    let solution = face_solution(
        m,
        k,
        site,
        face,
        (x_c, t_c),
        scale,
        derivatives,
        t_s,
        water_at,
    );
    (solution, [t_s, unknown.get()])
}

/// The face equations at one (a, T_s): residuals, their 2x2 matrix in (a, T_s), their
/// derivatives with respect to the cell (X_c, T_c), and (j, dj/da, dj/dT_s, X_s).
type FaceSystem = ([f64; 2], [[f64; 2]; 2], [[f64; 2]; 2], [f64; 4]);

/// An air-side face solved by Newton's method on both surface unknowns at once, the water
/// activity a and the temperature T_s, from the face's last solution (the isotherm evaluated
/// forward, X_s = X(a, T_s)), with analytic derivatives (finite differences only for the
/// temperature slopes of the isotherm and of the saturated vapour density):
///
/// - g1 = rho D (X_c - X_s) / delta - hm (a c_sat(T_s) - rho_v) = 0
/// - g2 = k (T_s - T_c) / delta - h (T_air - T_s) + j L_v(T_s) = 0
///
/// The rates' derivatives with respect to the cell follow from the same 2x2 matrix
/// (implicit-function theorem). `None` (the caller then uses the bracketed solve) for other laws,
/// without a guess, when an iterate leaves 0 < a < 1 (the surface may be wet) or the iteration does
/// not converge in a few steps.
fn air_side_newton(
    m: &MaterialProps,
    k: f64,
    site: &FaceSite,
    face: &HeatFace,
    (x_c, t_c): (f64, f64),
    guess: [f64; 2],
) -> Option<(FaceSolution, [f64; 2])> {
    let FaceLaw::AirSide { hm, rho_v_air, .. } = face.law else {
        return None;
    };
    let [mut t_s, mut a] = guess;
    if !(t_s.is_finite() && a > 0.0 && a < 1.0) {
        return None;
    }
    let delta = site.half_width;
    let g = m.density / delta;
    // Everything at (a, T_s): residuals, their 2x2 matrix, the cell derivatives and the rates.
    let evaluate = |a: f64, t_s: f64| -> Option<FaceSystem> {
        let (x_s, x_a) = m.isotherm.moisture_and_slope(a, t_s)?;
        let et = 1e-4;
        let x_t = (m.isotherm.equilibrium_moisture(a, t_s + et)?
            - m.isotherm.equilibrium_moisture(a, t_s - et)?)
            / (2.0 * et);
        let c_sat = saturated_vapour_density(t_s);
        let c_sat_t =
            (saturated_vapour_density(t_s + et) - saturated_vapour_density(t_s - et)) / (2.0 * et);
        let (xm, tm) = (0.5 * (x_c + x_s), 0.5 * (t_c + t_s));
        let (d, d_x) = m.diffusivity.at_with_slope_x(xm, tm);
        let d_t = m.diffusivity.slope_t(xm, tm);
        let diff = x_c - x_s;
        let cond = g * d * diff;
        let c_s = g * (0.5 * d_x * diff - d);
        let c_c = g * (0.5 * d_x * diff + d);
        let c_tm = g * d_t * diff;
        let j = hm * (a * c_sat - rho_v_air);
        let (j_a, j_t) = (hm * c_sat, hm * a * c_sat_t);
        let lv = latent_heat_j_kg(t_s);
        let lv_t = (latent_heat_j_kg(t_s + et) - latent_heat_j_kg(t_s - et)) / (2.0 * et);
        let r = [
            cond - j,
            k * (t_s - t_c) / delta - face.h * (face.t_air - t_s) + j * lv,
        ];
        let gs = [
            [c_s * x_a - j_a, c_s * x_t + 0.5 * c_tm - j_t],
            [j_a * lv, k / delta + face.h + j_t * lv + j * lv_t],
        ];
        let gc = [[c_c, 0.5 * c_tm], [0.0, -k / delta]];
        Some((r, gs, gc, [j, j_a, j_t, x_s]))
    };
    let solve = |m2: &[[f64; 2]; 2], r: [f64; 2]| -> Option<[f64; 2]> {
        let det = m2[0][0] * m2[1][1] - m2[0][1] * m2[1][0];
        if det == 0.0 || !det.is_finite() {
            return None;
        }
        Some([
            (m2[1][1] * r[0] - m2[0][1] * r[1]) / det,
            (m2[0][0] * r[1] - m2[1][0] * r[0]) / det,
        ])
    };
    for _ in 0..8 {
        let (r, gs, _, _) = evaluate(a, t_s)?;
        let [da, dt] = solve(&gs, r)?;
        a -= da;
        t_s -= dt;
        if !(a > 0.0 && a < 1.0 && t_s.is_finite()) {
            return None;
        }
        if da.abs() <= 1e-13 && dt.abs() <= 1e-11 * (1.0 + t_s.abs()) {
            let (_, gs, gc, [j, j_a, j_t, x_s]) = evaluate(a, t_s)?;
            // ds/dc = -Gs^-1 Gc, column by column.
            let col = |b: usize| solve(&gs, [gc[0][b], gc[1][b]]).map(|v| [-v[0], -v[1]]);
            let (d_x, d_t) = (col(0)?, col(1)?);
            let dj = [d_x, d_t].map(|ds| j_a * ds[0] + j_t * ds[1]);
            let dts = [d_x[1], d_t[1]];
            let solution = FaceSolution::at_surface(face, j, (x_s, t_s), Some((dj, dts)));
            return Some((solution, [t_s, a]));
        }
    }
    None
}

/// The root of the increasing `f` by the secant method from `guess`, or `None` when the guess is
/// missing or the steps stray (too long, not finite, or not converged in a few).
fn secant_from(f: &impl Fn(f64) -> f64, guess: f64) -> Option<f64> {
    if !guess.is_finite() {
        return None;
    }
    let (mut x0, mut f0) = (guess, f(guess));
    if f0 == 0.0 {
        return Some(x0);
    }
    let mut x1 = guess + 1e-3 * (1.0 + guess.abs());
    let mut f1 = f(x1);
    for _ in 0..12 {
        let slope = (f1 - f0) / (x1 - x0);
        if !(slope > 0.0 && slope.is_finite()) {
            return None;
        }
        let x2 = x1 - f1 / slope;
        if !x2.is_finite() || (x2 - guess).abs() > 50.0 {
            return None;
        }
        if (x2 - x1).abs() <= 1e-12 * (1.0 + x2.abs()) {
            return Some(x2);
        }
        (x0, f0) = (x1, f1);
        x1 = x2;
        f1 = f(x1);
        if f1 == 0.0 {
            return Some(x1);
        }
    }
    None
}

/// The surface temperature from a bracket widened from the span of cell and air temperatures.
fn bracketed_surface(heat: &impl Fn(f64) -> f64, t_c: f64, face: &HeatFace) -> f64 {
    let (mut lo, mut hi) = (t_c.min(face.t_air), t_c.max(face.t_air));
    let mut step = 1.0_f64.max(0.1 * (hi - lo));
    for _ in 0..40 {
        if heat(lo) <= 0.0 || lo < -150.0 {
            break;
        }
        lo -= step;
        step *= 2.0;
    }
    step = 1.0_f64.max(0.1 * (hi - lo));
    for _ in 0..40 {
        if heat(hi) >= 0.0 || hi > 600.0 {
            break;
        }
        hi += step;
        step *= 2.0;
    }
    if hi > lo {
        flux::bracketed_root(heat, lo, hi, 1e-13)
    } else {
        lo
    }
}

/// The face's rates at the solved surface temperature `t_s`, with their derivatives when asked.
#[allow(clippy::too_many_arguments)]
fn face_solution(
    m: &MaterialProps,
    k: f64,
    site: &FaceSite,
    face: &HeatFace,
    (x_c, t_c): (f64, f64),
    scale: f64,
    derivatives: bool,
    t_s: f64,
    water_at: impl Fn(f64) -> (f64, f64),
) -> FaceSolution {
    let (_, x_s) = water_at(t_s);
    // Implicit-function theorem: ds/dc = -Gs^-1 Gc.
    let s = [x_s, t_s];
    let c = [x_c, t_c];
    let (_, j) = surface_equations(m, k, site, face, s, c);
    if !derivatives {
        return FaceSolution::at_surface(face, j, (x_s, t_s), None);
    }
    let eps = [1e-7 * (x_s.abs() + scale), 1e-6 * (t_s.abs() + 1.0)];
    let eps_c = [1e-7 * (x_c.abs() + scale), 1e-6 * (t_c.abs() + 1.0)];
    let mut gs = [[0.0; 2]; 2];
    let mut gc = [[0.0; 2]; 2];
    let mut js = [0.0; 2];
    let mut jc = [0.0; 2];
    for v in 0..2 {
        let (mut sp, mut sm) = (s, s);
        sp[v] += eps[v];
        sm[v] -= eps[v];
        let (gp, jp) = surface_equations(m, k, site, face, sp, c);
        let (gm, jm) = surface_equations(m, k, site, face, sm, c);
        for e in 0..2 {
            gs[e][v] = (gp[e] - gm[e]) / (2.0 * eps[v]);
        }
        js[v] = (jp - jm) / (2.0 * eps[v]);
        let (mut cp, mut cm) = (c, c);
        cp[v] += eps_c[v];
        cm[v] -= eps_c[v];
        let (gp, jp) = surface_equations(m, k, site, face, s, cp);
        let (gm, jm) = surface_equations(m, k, site, face, s, cm);
        for e in 0..2 {
            gc[e][v] = (gp[e] - gm[e]) / (2.0 * eps_c[v]);
        }
        jc[v] = (jp - jm) / (2.0 * eps_c[v]);
    }
    let det = gs[0][0] * gs[1][1] - gs[0][1] * gs[1][0];
    let mut ds = [[0.0; 2]; 2]; // ds[s][c]
    if det != 0.0 && det.is_finite() {
        let inv = [
            [gs[1][1] / det, -gs[0][1] / det],
            [-gs[1][0] / det, gs[0][0] / det],
        ];
        for (a, row) in ds.iter_mut().enumerate() {
            for (b, entry) in row.iter_mut().enumerate() {
                *entry = -(inv[a][0] * gc[0][b] + inv[a][1] * gc[1][b]);
            }
        }
    }
    let dj = [0, 1].map(|b| jc[b] + js[0] * ds[0][b] + js[1] * ds[1][b]);
    let dts = ds[1];
    FaceSolution::at_surface(face, j, (x_s, t_s), Some((dj, dts)))
}

/// Evaluates every face's water and energy flux and derivative blocks at `state` into the
/// workspace, and returns the exposed faces' solutions.
pub fn evaluate_faces(
    problem: &Problem,
    thermal: &Thermal,
    faces: &HeatFaces,
    state: &State,
    ws: &mut CoupledWorkspace,
) -> CoupledSurfaces {
    evaluate_faces_with(problem, thermal, faces, state, ws, true)
}

/// As [`evaluate_faces`], with the derivative blocks of material boundaries (central differences,
/// eight more interface solves each) computed only when `derivatives` is set (otherwise those
/// stored are kept, for a reused Jacobian); blocks inside one material come with the fluxes. The exposed faces'
/// blocks are always fresh: they keep the Newton update's water and energy balance exact to
/// first order, whatever interior blocks it uses (those cancel between neighbouring cells).
pub fn evaluate_faces_with(
    problem: &Problem,
    thermal: &Thermal,
    faces: &HeatFaces,
    state: &State,
    ws: &mut CoupledWorkspace,
    derivatives: bool,
) -> CoupledSurfaces {
    let x = &state.moisture;
    let t = &state.temperature;
    let n = x.len();
    let scale = problem.moisture_scale;
    for (k, face) in problem.inner.iter().enumerate() {
        let k = k + 1;
        let left = (x[k - 1], t[k - 1]);
        let right = (x[k], t[k]);
        let (f, q, d) = match *face {
            InnerFace::Same { material, distance } => same_material(
                &problem.materials[material],
                thermal.conductivity[material],
                distance,
                left,
                right,
            ),
            InnerFace::Interface {
                left: ml,
                right: mr,
                left_half,
                right_half,
            } => interface(
                &problem.materials[ml],
                &problem.materials[mr],
                (thermal.conductivity[ml], thermal.conductivity[mr]),
                (left_half, right_half),
                left,
                right,
                scale,
                derivatives,
            ),
        };
        ws.water[k] = f;
        ws.energy[k] = q;
        // Inside one material the blocks come with the fluxes; a boundary's only when asked.
        if derivatives || matches!(face, InnerFace::Same { .. }) {
            ws.deriv[k] = d;
        }
    }
    for k in [0, n] {
        ws.water[k] = 0.0;
        ws.energy[k] = 0.0;
        ws.deriv[k] = [[0.0; 4]; 2];
    }
    ws.face_far = [[0.0; 4]; 2];
    let mut out = CoupledSurfaces::default();
    for (side, site, heat) in [
        (0, &problem.face_a, &faces.a),
        (1, &problem.face_b, &faces.b),
    ] {
        let Some(site) = site else { continue };
        let m = &problem.materials[site.material];
        let kc = thermal.conductivity[site.material];
        // The face sees the values extrapolated to second order (`SurfaceGradient`), moisture
        // and temperature alike, at the gradient's reach; its derivatives by them spread over
        // the face's cell and the next one in.
        let g = &site.gradient;
        let (xv, wx1, wx2) = g.extrapolate(x, site.cell, heat.law.uses_isotherm());
        let (tv, wt1, wt2) = g.extrapolate(t, site.cell, false);
        let at_reach = FaceSite {
            half_width: g.reach,
            ..*site
        };
        let (s, guess) = solve_face_with(
            m,
            kc,
            &at_reach,
            heat,
            (xv, tv),
            scale,
            true,
            ws.face_guess[side],
        );
        ws.face_guess[side] = guess;
        // Face fluxes run towards +s. At face A (k = 0) water out runs towards -s and energy in
        // towards +s; at face B (k = n) the other way round. The cell beside the face is to its
        // right at A (the block's second pair), to its left at B.
        let sign = if side == 0 { -1.0 } else { 1.0 };
        let water = [sign * s.d_outflow[0], sign * s.d_outflow[1]];
        let energy = [-sign * s.d_energy[0], -sign * s.d_energy[1]];
        let k = if side == 0 { 0 } else { n };
        ws.water[k] = sign * s.outflow;
        ws.energy[k] = -sign * s.energy_in;
        let near = [
            [water[0] * wx1, water[1] * wt1],
            [energy[0] * wx1, energy[1] * wt1],
        ];
        ws.face_far[side] = [
            water[0] * wx2,
            water[1] * wt2,
            energy[0] * wx2,
            energy[1] * wt2,
        ];
        ws.deriv[k] = if side == 0 {
            [
                [0.0, 0.0, near[0][0], near[0][1]],
                [0.0, 0.0, near[1][0], near[1][1]],
            ]
        } else {
            [
                [near[0][0], near[0][1], 0.0, 0.0],
                [near[1][0], near[1][1], 0.0, 0.0],
            ]
        };
        if side == 0 {
            out.a = Some(s);
        } else {
            out.b = Some(s);
        }
    }
    out
}

/// Solves one implicit stage of the coupled model, `U_i(u) - c_dt * G_i(u) = b_i` for every cell
/// (U the stored water and energy, G their net inflow; `b` interleaved water, energy), by Newton's
/// method on the 2x2 block-tridiagonal system from the guess in `new` (`fallback` when the guess
/// gives non-finite values). As in `flux::solve_stage`: the face derivative blocks are reused
/// while the iteration contracts well, it stops when the estimated remaining error is below
/// `settings.tol` (moisture, temperature), and the faces are evaluated at the state returned, so
/// `ws.inflow` belongs to it.
#[allow(clippy::too_many_arguments)]
pub fn solve_stage(
    problem: &Problem,
    thermal: &Thermal,
    faces: &HeatFaces,
    c_dt: f64,
    b: &[f64],
    new: &mut State,
    fallback: &State,
    ws: &mut CoupledWorkspace,
    settings: &NewtonSettings,
) -> Result<(CoupledSurfaces, usize), NewtonFailure> {
    let n = new.moisture.len();
    let areas = &problem.mesh.areas;
    let mass = &problem.dry_mass;
    let [tol_x, tol_t] = settings.tol;
    let mut previous = f64::INFINITY;
    let mut backtracks = 0;
    let mut restarted = false;
    let mut converged = false;
    let mut contraction = Contraction::new();
    for iteration in 0..=MAX_NEWTON {
        let fresh = !ws.jacobian_valid;
        let surfaces = evaluate_faces_with(problem, thermal, faces, new, ws, fresh);
        if fresh {
            ws.jacobian_valid = true;
            ws.jacobian_evaluations += 1;
        }
        let mut worst: f64 = 0.0;
        for i in 0..n {
            let (x, t) = (new.moisture[i], new.temperature[i]);
            let water_in = areas[i] * ws.water[i] - areas[i + 1] * ws.water[i + 1];
            let energy_in = areas[i] * ws.energy[i] - areas[i + 1] * ws.energy[i + 1];
            ws.inflow[2 * i] = water_in;
            ws.inflow[2 * i + 1] = energy_in;
            let rx = mass[i] * x - b[2 * i] - c_dt * water_in;
            let re = energy(problem, thermal, i, x, t) - b[2 * i + 1] - c_dt * energy_in;
            let cap = capacity(problem, thermal, i, x);
            worst = worst
                .max(rx.abs() / (mass[i] * tol_x))
                .max(re.abs() / (cap * tol_t));
            ws.rhs[i] = [-rx, -re];
        }
        if !worst.is_finite() {
            if iteration == 0 && !restarted {
                new.copy_from(fallback);
                restarted = true;
                continue;
            }
            if iteration > 0 && backtracks < 4 {
                halve_update(new, ws);
                backtracks += 1;
                converged = false;
                continue;
            }
            return Err(NewtonFailure::Breakdown);
        }
        if converged {
            return Ok((surfaces, iteration));
        }
        if iteration == MAX_NEWTON {
            break;
        }
        // A clearly worse residual halves the last update, a few times at most.
        if iteration > 0 && worst > 2.0 * previous && backtracks < 4 {
            halve_update(new, ws);
            backtracks += 1;
            ws.jacobian_valid = false;
            continue;
        }
        previous = worst;
        backtracks = 0;
        for i in 0..n {
            let (x, t) = (new.moisture[i], new.temperature[i]);
            let cs = thermal.specific_heat[problem.cell_material[i]];
            let left = &ws.deriv[i];
            let right = &ws.deriv[i + 1];
            // d(stored)/d(u_i): water m_i on X; energy m_i c_w T on X, m_i (c_s + c_w X) on T.
            let storage = [mass[i], 0.0, mass[i] * CW * t, mass[i] * (cs + CW * x)];
            // Face i's derivatives with respect to its right cell (this one) and face i+1's with
            // respect to its left cell (this one).
            ws.diag[i] = [
                storage[0] - c_dt * (areas[i] * left[0][2] - areas[i + 1] * right[0][0]),
                storage[1] - c_dt * (areas[i] * left[0][3] - areas[i + 1] * right[0][1]),
                storage[2] - c_dt * (areas[i] * left[1][2] - areas[i + 1] * right[1][0]),
                storage[3] - c_dt * (areas[i] * left[1][3] - areas[i + 1] * right[1][1]),
            ];
            ws.lower[i] = [
                -c_dt * areas[i] * left[0][0],
                -c_dt * areas[i] * left[0][1],
                -c_dt * areas[i] * left[1][0],
                -c_dt * areas[i] * left[1][1],
            ];
            ws.upper[i] = [
                c_dt * areas[i + 1] * right[0][2],
                c_dt * areas[i + 1] * right[0][3],
                c_dt * areas[i + 1] * right[1][2],
                c_dt * areas[i + 1] * right[1][3],
            ];
        }
        // The exposed faces' dependence on the second cell in: face A's fluxes enter cell 0's
        // row at cell 1, face B's cell n-1's row at cell n-2 (within the block band).
        if n >= 2 {
            for (b, far) in ws.face_far[0].iter().enumerate() {
                ws.upper[0][b] -= c_dt * areas[0] * far;
            }
            for (b, far) in ws.face_far[1].iter().enumerate() {
                ws.lower[n - 1][b] += c_dt * areas[n] * far;
            }
        }
        if !blocktri::solve_in_place(&ws.lower, &ws.diag, &ws.upper, &mut ws.rhs, &mut ws.scratch) {
            return Err(NewtonFailure::Breakdown);
        }
        ws.linear_solves += 1;
        let mut update: f64 = 0.0;
        for i in 0..n {
            ws.delta[i] = ws.rhs[i];
            new.moisture[i] += ws.rhs[i][0];
            new.temperature[i] += ws.rhs[i][1];
            update = update
                .max(ws.rhs[i][0].abs() / tol_x)
                .max(ws.rhs[i][1].abs() / tol_t);
        }
        let refresh;
        (converged, refresh) =
            contraction.judge(iteration, update, &mut ws.memory, settings.linear, false);
        if refresh {
            ws.jacobian_valid = false;
        }
    }
    ws.jacobian_valid = false;
    Err(NewtonFailure::NotConverged)
}

/// Undoes half of the last Newton update.
fn halve_update(new: &mut State, ws: &mut CoupledWorkspace) {
    for i in 0..new.moisture.len() {
        ws.delta[i][0] *= 0.5;
        ws.delta[i][1] *= 0.5;
        new.moisture[i] -= ws.delta[i][0];
        new.temperature[i] -= ws.delta[i][1];
    }
}

/// Solves `v` (interleaved water, energy per cell) in place with the block matrix of the last
/// Newton update: turns errors in stored water and energy into moisture and temperature errors.
pub fn filter(ws: &mut CoupledWorkspace, v: &mut [f64]) -> bool {
    for (i, r) in ws.rhs.iter_mut().enumerate() {
        *r = [v[2 * i], v[2 * i + 1]];
    }
    let ok = blocktri::solve_in_place(&ws.lower, &ws.diag, &ws.upper, &mut ws.rhs, &mut ws.scratch);
    for (i, r) in ws.rhs.iter().enumerate() {
        v[2 * i] = r[0];
        v[2 * i + 1] = r[1];
    }
    ok
}

/// Stored water and energy of every cell (interleaved), per unit normalised area.
pub fn conserved(problem: &Problem, thermal: &Thermal, state: &State, u: &mut [f64]) {
    for i in 0..state.moisture.len() {
        let (x, t) = (state.moisture[i], state.temperature[i]);
        u[2 * i] = problem.dry_mass[i] * x;
        u[2 * i + 1] = energy(problem, thermal, i, x, t);
    }
}

/// Stored energy of the whole body, J per m2 of face A (relative to 0 C).
pub fn stored_energy(problem: &Problem, thermal: &Thermal, state: &State) -> f64 {
    (0..state.moisture.len())
        .map(|i| energy(problem, thermal, i, state.moisture[i], state.temperature[i]))
        .sum()
}
