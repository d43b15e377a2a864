//! Face fluxes and their derivatives, and the Newton solve of one implicit stage.
//!
//! Face k lies between cell k-1 and cell k (face 0 is face A, face n is face B). The flux F_k
//! is positive in the direction of increasing position (from face A towards face B), per unit
//! normalised area. Each face reports F_k and its derivatives with respect to the cell on its
//! left and on its right; a stage's residual and its tridiagonal Jacobian are assembled from
//! those.

use super::problem::{FaceLaw, FaceSite, InnerFace, MaterialProps, Problem};
use super::workspace::Workspace;
use crate::physics::Diffusivity;

/// Maximum Newton iterations per stage solve before the step is rejected.
pub const MAX_NEWTON: usize = 25;

/// Conditions at the two exposed faces during one solve.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FaceLaws {
    /// Law at face A.
    pub a: FaceLaw,
    /// Law at face B.
    pub b: FaceLaw,
}

/// Outcome of one face evaluation: outflow through each exposed face and surface moisture.
#[derive(Debug, Clone, Copy, Default)]
pub struct Surfaces {
    /// Outflow rate through face A, kg/s per unit normalised area (positive = drying).
    pub out_a: f64,
    /// Outflow rate through face B.
    pub out_b: f64,
    /// Surface moisture at face A.
    pub x_a: f64,
    /// Surface moisture at face B.
    pub x_b: f64,
    /// Surface temperature at face A, degrees C (the air's in isothermal runs).
    pub t_a: f64,
    /// Surface temperature at face B, degrees C.
    pub t_b: f64,
}

impl Surfaces {
    /// Total outflow rate (area-weighted), kg/s per unit outer area.
    pub fn total_out(&self, problem: &Problem) -> f64 {
        problem.face_a.map_or(0.0, |f| f.area * self.out_a)
            + problem.face_b.map_or(0.0, |f| f.area * self.out_b)
    }
}

/// Fluxes across a run of faces inside one material, and their derivatives by the left and the
/// right cell: flux = conductance D(mean X) (X_l - X_r), with D(X) = D(X_ref) e^(b (X - X_ref))
/// (the temperature part is the run's one factor D(X_ref)). One plain loop over the faces, its
/// exponential inlined, which the compiler vectorises.
fn same_material_run(
    law: &Diffusivity,
    t_c: f64,
    conductance: &[f64],
    (left, right): (&[f64], &[f64]),
    flux: &mut [f64],
    d_left: &mut [f64],
    d_right: &mut [f64],
) {
    let at_ref = law.at(law.x_ref, t_c);
    let faces = flux
        .iter_mut()
        .zip(d_left.iter_mut().zip(d_right.iter_mut()))
        .zip(conductance.iter().zip(left.iter().zip(right)));
    if law.is_constant() {
        for ((f, (dl, dr)), (&g, (&xl, &xr))) in faces {
            let gd = g * at_ref;
            *f = gd * (xl - xr);
            *dl = gd;
            *dr = -gd;
        }
    } else {
        let (b, x_ref) = (law.moisture_coef, law.x_ref);
        super::wide::wide(
            #[inline(always)]
            || exponential_faces(faces, at_ref, b, x_ref),
        );
    }
}

/// The faces of a run with D = D(X_ref) e^(b (X - X_ref)): `faces` zips (flux, (d_left,
/// d_right)) with (conductance, (X_l, X_r)).
#[inline(always)]
fn exponential_faces<'a>(
    faces: impl Iterator<
        Item = (
            (&'a mut f64, (&'a mut f64, &'a mut f64)),
            (&'a f64, (&'a f64, &'a f64)),
        ),
    >,
    at_ref: f64,
    b: f64,
    x_ref: f64,
) {
    for ((f, (dl, dr)), (&g, (&xl, &xr))) in faces {
        let gd = g * at_ref * super::exp::exp(b * (0.5 * (xl + xr) - x_ref));
        let diff = xl - xr;
        // dD/dX = b D, and each side moves the mean by half its change.
        let half_slope = 0.5 * b * gd * diff;
        *f = gd * diff;
        *dl = half_slope + gd;
        *dr = half_slope - gd;
    }
}

fn activity(m: &MaterialProps, x: f64, t_c: f64) -> f64 {
    m.isotherm.water_activity(x, t_c).unwrap_or(0.0)
}

/// The moisture potential that is continuous across a boundary between materials: the water
/// activity below the moisture where the isotherm reaches aw = 1, and above it (free water) the
/// moisture relative to that saturation moisture, u = X / X_sat >= 1. Both sides of a boundary
/// that hold free water thus share their degree of saturation; below it they share aw. u rises
/// strictly with X, so the interface balance always has exactly one root.
fn potential(m: &MaterialProps, x: f64, t_c: f64) -> f64 {
    match m.isotherm.saturation_moisture(t_c) {
        Some(sat) if sat.is_finite() && sat > 0.0 && x >= sat => x / sat,
        _ => m.isotherm.water_activity(x, t_c).unwrap_or(0.0),
    }
}

/// The moisture of `m` at potential `u` (the inverse of [`potential`]); +∞ where an isotherm
/// that never reaches aw = 1 (Oswin, Henderson) is asked for u >= 1.
fn moisture_at_potential(m: &MaterialProps, u: f64, t_c: f64) -> f64 {
    let sat = m.isotherm.saturation_moisture(t_c).unwrap_or(f64::INFINITY);
    if u >= 1.0 {
        return if sat.is_finite() {
            u * sat
        } else {
            f64::INFINITY
        };
    }
    match m.isotherm.equilibrium_moisture(u, t_c) {
        Some(x) if x.is_finite() => x.min(sat),
        _ => f64::INFINITY,
    }
}

/// Flux across a boundary between materials: the interface potential u* (see [`potential`])
/// makes the flux on both sides equal,
/// flux_l = rho_l D_l (X_l - X_l(u*)) / d_l = rho_r D_r (X_r(u*) - X_r) / d_r.
///
/// Where one side's isotherm never reaches aw = 1, its flux grows without bound as u* nears 1;
/// the root search treats such infinite values by their sign.
pub(crate) fn interface_flux(
    ml: &MaterialProps,
    mr: &MaterialProps,
    dl: f64,
    dr: f64,
    xl: f64,
    xr: f64,
    t_c: f64,
) -> f64 {
    let side_flux = |m: &MaterialProps, x: f64, xs: f64, d: f64| {
        if !xs.is_finite() {
            return f64::NEG_INFINITY;
        }
        let f = m.density * m.diffusivity.at(0.5 * (x + xs), t_c) * (x - xs) / d;
        if f.is_nan() { 0.0 } else { f }
    };
    let left = |u: f64| side_flux(ml, xl, moisture_at_potential(ml, u, t_c), dl);
    // The right side's flux runs from the interface into it, so its sign is reversed.
    let right = |u: f64| -side_flux(mr, xr, moisture_at_potential(mr, u, t_c), dr);
    let (ul, ur) = (potential(ml, xl, t_c), potential(mr, xr, t_c));
    if (ul - ur).abs() < 1e-15 {
        return 0.0;
    }
    let (lo, hi) = if ul < ur { (ul, ur) } else { (ur, ul) };
    let u = bracketed_root(|u| left(u) - right(u), lo, hi, 1e-15);
    let (fl, fr) = (left(u), right(u));
    // At the root both sides agree; take the finite one if round-off left one side unbounded.
    if fl.is_finite() { fl } else { fr }
}

/// Root of `f` in [lo, hi] where f changes sign, by the Illinois variant of regula falsi
/// (superlinear, never leaves the bracket). Infinite values count by their sign (the step then
/// bisects). Returns the bracket end with the smaller |f| when the ends do not bracket a root.
pub fn bracketed_root(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64, tol: f64) -> f64 {
    let mut flo = f(lo);
    let mut fhi = f(hi);
    if flo == 0.0 {
        return lo;
    }
    if fhi == 0.0 {
        return hi;
    }
    if flo.signum() == fhi.signum() || flo.is_nan() || fhi.is_nan() {
        return if flo.abs() <= fhi.abs() { lo } else { hi };
    }
    let mut side = 0i8;
    for _ in 0..200 {
        let mut x = (lo * fhi - hi * flo) / (fhi - flo);
        if !x.is_finite() || x <= lo.min(hi) || x >= lo.max(hi) {
            x = 0.5 * (lo + hi);
        }
        let fx = f(x);
        if fx == 0.0 || (hi - lo).abs() <= tol * (1.0 + x.abs()) {
            return x;
        }
        if fx.signum() == fhi.signum() {
            hi = x;
            fhi = fx;
            if side == 1 {
                flo *= 0.5;
            }
            side = 1;
        } else {
            lo = x;
            flo = fx;
            if side == -1 {
                fhi *= 0.5;
            }
            side = -1;
        }
    }
    0.5 * (lo + hi)
}

/// Outflow through an exposed face from the value `xc` at distance `reach` from it (the cell's
/// value over the half cell, or the extrapolated X* of a [`super::problem::SurfaceGradient`]):
/// (outflow, d outflow / d xc, surface moisture). The surface moisture balances conduction over
/// `reach` against the face law.
pub fn face_outflow(
    m: &MaterialProps,
    reach: f64,
    law: FaceLaw,
    xc: f64,
    t_c: f64,
) -> (f64, f64, f64) {
    let (j, dj, xs, _) = face_outflow_from(m, reach, law, xc, t_c, f64::NAN);
    (j, dj, xs)
}

/// [`face_outflow`] started from `guess` (NaN for none): returns (outflow, d outflow / d xc,
/// surface moisture, the solved unknown to start the next call from).
///
/// - Fixed surface: closed form.
/// - Content-based law k (X_s - X_eq): closed form with a constant diffusivity,
///   X_s = (g D X_c + k X_eq) / (g D + k) with g = rho / reach; otherwise Newton on X_s
///   inside the bracket [X_eq, X_c].
/// - Air-side law hm (aw c_sat - rho_v): the unknown is the surface water activity aw, so the
///   isotherm is only evaluated forward (X(aw) and its slope, no inversion): Newton on
///   conduction(X(aw)) = hm (aw c_sat - rho_v) inside [0, 1]. Where the cell holds free water and
///   could feed more than the air takes at aw = 1, the surface is wet: the outflow is
///   hm (c_sat - rho_v) and X_s >= the saturation moisture solves conduction(X_s) = that.
///
/// Each Newton iteration keeps a bracket and bisects when a step would leave it, so the warm
/// start only speeds things up. Derivatives follow from the implicit-function theorem.
pub fn face_outflow_from(
    m: &MaterialProps,
    reach: f64,
    law: FaceLaw,
    xc: f64,
    t_c: f64,
    guess: f64,
) -> (f64, f64, f64, f64) {
    let g = m.density / reach;
    // Conduction over `reach` towards the surface, and its partial derivatives.
    let conduction = |xs: f64| {
        let xm = 0.5 * (xc + xs);
        let (d, dd) = m.diffusivity.at_with_slope_x(xm, t_c);
        let diff = xc - xs;
        (
            g * d * diff,
            g * (0.5 * dd * diff + d),
            g * (0.5 * dd * diff - d),
        )
    };
    match law {
        FaceLaw::Sealed => (0.0, 0.0, xc, f64::NAN),
        FaceLaw::Fixed(xs) => {
            let (j, dj_dxc, _) = conduction(xs);
            (j, dj_dxc, xs, xs)
        }
        FaceLaw::Linear { k, x_eq } => {
            if m.diffusivity.is_constant() {
                let gd = g * m.diffusivity.at(xc, t_c);
                let xs = (gd * xc + k * x_eq) / (gd + k);
                return (k * (xs - x_eq), k * gd / (gd + k), xs, xs);
            }
            let (lo, hi) = if xc > x_eq { (x_eq, xc) } else { (xc, x_eq) };
            // The partial derivatives at the last point evaluated, within round-off of the root
            // Newton stops at (its last step was below 1e-8): good for the Jacobian without one
            // more exponential.
            let partials = std::cell::Cell::new((f64::NAN, f64::NAN));
            let xs = newton_in_bracket(
                |xs| {
                    let (c, c_c, c_s) = conduction(xs);
                    partials.set((c_c, c_s));
                    (c - k * (xs - x_eq), c_s - k)
                },
                lo,
                hi,
                guess,
            );
            let (c_c, c_s) = match partials.get() {
                (c_c, c_s) if c_c.is_finite() && c_s.is_finite() => (c_c, c_s),
                _ => {
                    let (_, c_c, c_s) = conduction(xs);
                    (c_c, c_s)
                }
            };
            let dxs = -c_c / (c_s - k);
            (k * (xs - x_eq), k * dxs, xs, xs)
        }
        FaceLaw::AirSide {
            hm,
            c_sat,
            rho_v_air,
            t_c: ts,
        } => {
            let iso = &m.isotherm;
            if xc <= 0.0 || !xc.is_finite() || iso.moisture_and_slope(0.5, ts).is_none() {
                return air_side_by_moisture(m, law, xc, ts, conduction);
            }
            let wet = hm * (c_sat - rho_v_air);
            if let Some(sat) = iso.saturation_moisture(ts).filter(|x| x.is_finite())
                && xc > sat
                && conduction(sat).0 >= wet
            {
                let xs = newton_in_bracket(
                    |xs| {
                        let (c, _, c_s) = conduction(xs);
                        (c - wet, c_s)
                    },
                    sat,
                    xc,
                    guess,
                );
                return (wet, 0.0, xs, xs);
            }
            let balance = |aw: f64| match iso.moisture_and_slope(aw, ts) {
                Some((xs, slope)) => {
                    let (c, _, c_s) = conduction(xs);
                    (c - hm * (aw * c_sat - rho_v_air), c_s * slope - hm * c_sat)
                }
                None => (f64::NAN, f64::NAN),
            };
            let aw = newton_in_bracket(balance, 0.0, 1.0, guess);
            let Some((xs, slope)) = iso.moisture_and_slope(aw, ts) else {
                return air_side_by_moisture(m, law, xc, ts, conduction);
            };
            let (_, c_c, c_s) = conduction(xs);
            let denom = c_s * slope - hm * c_sat;
            let daw = if denom != 0.0 && denom.is_finite() {
                -c_c / denom
            } else {
                0.0
            };
            (hm * (aw * c_sat - rho_v_air), hm * c_sat * daw, xs, aw)
        }
    }
}

/// The air-side face solved for the surface moisture with the isotherm inverted (the general
/// fallback where the forward form cannot be used, such as a cell without water).
fn air_side_by_moisture(
    m: &MaterialProps,
    law: FaceLaw,
    xc: f64,
    ts: f64,
    conduction: impl Fn(f64) -> (f64, f64, f64),
) -> (f64, f64, f64, f64) {
    let FaceLaw::AirSide {
        hm,
        c_sat,
        rho_v_air,
        ..
    } = law
    else {
        return (0.0, 0.0, xc, f64::NAN);
    };
    let external = |xs: f64| {
        let aw = activity(m, xs, ts);
        let slope = m.isotherm.water_activity_slope(xs, ts).unwrap_or(0.0);
        (hm * (aw * c_sat - rho_v_air), hm * c_sat * slope)
    };
    let rh = if c_sat > 0.0 { rho_v_air / c_sat } else { 0.0 };
    let x_eq = (rh < 1.0)
        .then(|| m.isotherm.equilibrium_moisture(rh, ts))
        .flatten()
        .filter(|x| x.is_finite());
    let (j, dj, xs) = surface_balance(conduction, external, xc, x_eq);
    (j, dj, xs, f64::NAN)
}

/// Root of a decreasing `f` (value, derivative) in [lo, hi], where f(lo) >= 0 >= f(hi), by
/// Newton's method from `guess` (the middle when it is outside the bracket or NaN), keeping the
/// bracket and bisecting whenever a step would leave it or the derivative is unusable.
fn newton_in_bracket(f: impl Fn(f64) -> (f64, f64), mut lo: f64, mut hi: f64, guess: f64) -> f64 {
    if hi <= lo || hi.is_nan() || lo.is_nan() {
        return lo;
    }
    let mut x = if guess > lo && guess < hi {
        guess
    } else {
        0.5 * (lo + hi)
    };
    for _ in 0..100 {
        let (v, d) = f(x);
        if v == 0.0 {
            return x;
        }
        if v > 0.0 {
            lo = x;
        } else if v < 0.0 {
            hi = x;
        }
        let newton = x - v / d;
        let scale = 1.0 + x.abs();
        // Newton converges quadratically: after a Newton step below 1e-8 the error left is of
        // order its square, below round-off, so no further evaluation is needed. This comes
        // before the bracket test: from a start at the root within round-off the step is below
        // an ulp, the new point rounds onto the bracket end just set, and bisecting from there
        // cost some forty evaluations.
        if d < 0.0 && newton.is_finite() && (newton - x).abs() <= 1e-8 * scale {
            return newton.clamp(lo, hi);
        }
        let next = if d < 0.0 && newton.is_finite() && newton > lo && newton < hi {
            newton
        } else {
            0.5 * (lo + hi)
        };
        let step = (next - x).abs();
        x = next;
        if step <= 1e-14 * scale || hi - lo <= 1e-14 * scale {
            return x;
        }
    }
    x
}

/// Solves conduction(xs) = external(xs) for the surface moisture xs and returns (outflow,
/// d outflow / d xc, xs) by the implicit-function theorem.
fn surface_balance(
    conduction: impl Fn(f64) -> (f64, f64, f64),
    external: impl Fn(f64) -> (f64, f64),
    xc: f64,
    x_eq: Option<f64>,
) -> (f64, f64, f64) {
    let h = |xs: f64| conduction(xs).0 - external(xs).0;
    let h_c = h(xc);
    if h_c == 0.0 {
        let (_, dc, ds) = conduction(xc);
        let (_, de) = external(xc);
        return (0.0, de * dc / (de - ds).max(f64::MIN_POSITIVE), xc);
    }
    // h decreases with xs; h(xc) < 0 means drying (surface below xc).
    let far = match x_eq {
        Some(x) if (x - xc) * h_c >= 0.0 => x,
        _ => {
            // Expand from xc until h changes sign; the linear estimate sets the first reach.
            let stiffness = conduction(xc).1.abs().max(f64::MIN_POSITIVE);
            let mut reach = (external(xc).0.abs() / stiffness).max(1e-9);
            let dir = -h_c.signum();
            let mut x = xc - dir * reach;
            for _ in 0..80 {
                x = xc - dir * reach;
                if h(x).signum() != h_c.signum() {
                    break;
                }
                reach *= 2.0;
            }
            x
        }
    };
    let (lo, hi) = if far < xc { (far, xc) } else { (xc, far) };
    let xs = bracketed_root(h, lo, hi, 1e-15);
    let (_, dc_dxc, dc_dxs) = conduction(xs);
    let (j, dj_dxs) = external(xs);
    // d/dxc of h(xs(xc), xc) = 0: dxs/dxc = -dc_dxc / (dc_dxs - dj_dxs)
    let denom = dc_dxs - dj_dxs;
    let dxs = if denom != 0.0 { -dc_dxc / denom } else { 0.0 };
    (j, dj_dxs * dxs, xs)
}

/// Evaluates every face flux and derivative at state `x` into the workspace, and returns the
/// surface figures.
pub fn evaluate_faces(
    problem: &Problem,
    laws: &FaceLaws,
    t_c: f64,
    x: &[f64],
    ws: &mut Workspace,
) -> Surfaces {
    evaluate_faces_with(problem, laws, t_c, x, ws, true)
}

/// Evaluates every face flux at state `x` into the workspace with the derivatives that come with
/// it at no extra cost (inside one material, analytic; exposed faces, from the solved surface),
/// and the derivatives of material boundaries (central differences, four more interface solves
/// each) only when `derivatives` is set; otherwise those stored are kept, for a reused Jacobian.
/// Returns the surface figures. Fresh exposed-face derivatives keep the Newton update's water
/// balance exact to first order whatever interior derivatives it uses: those cancel between
/// neighbouring cells.
pub fn evaluate_faces_with(
    problem: &Problem,
    laws: &FaceLaws,
    t_c: f64,
    x: &[f64],
    ws: &mut Workspace,
    derivatives: bool,
) -> Surfaces {
    let n = x.len();
    // The derivatives are about to be rewritten, for whatever laws and temperature these are.
    ws.derivatives_for = None;
    for run in &problem.runs {
        let f = run.faces.clone();
        same_material_run(
            &problem.materials[run.material].diffusivity,
            t_c,
            &run.conductance,
            (&x[f.start - 1..f.end - 1], &x[f.clone()]),
            &mut ws.flux[f.clone()],
            &mut ws.d_left[f.clone()],
            &mut ws.d_right[f],
        );
    }
    for &k in &problem.interfaces {
        let InnerFace::Interface {
            left,
            right,
            left_half,
            right_half,
        } = problem.inner[k - 1]
        else {
            continue;
        };
        let (xl, xr) = (x[k - 1], x[k]);
        let (ml, mr) = (&problem.materials[left], &problem.materials[right]);
        let flux = |a: f64, b: f64| interface_flux(ml, mr, left_half, right_half, a, b, t_c);
        ws.flux[k] = flux(xl, xr);
        if derivatives {
            let el = 1e-7 * (xl.abs() + problem.moisture_scale);
            let er = 1e-7 * (xr.abs() + problem.moisture_scale);
            ws.d_left[k] = (flux(xl + el, xr) - flux(xl - el, xr)) / (2.0 * el);
            ws.d_right[k] = (flux(xl, xr + er) - flux(xl, xr - er)) / (2.0 * er);
        }
    }
    let mut s = Surfaces {
        x_a: x[0],
        x_b: x[n - 1],
        t_a: t_c,
        t_b: t_c,
        ..Surfaces::default()
    };
    ws.flux[0] = 0.0;
    ws.flux[n] = 0.0;
    ws.d_left[0] = 0.0;
    ws.d_right[0] = 0.0;
    ws.d_left[n] = 0.0;
    ws.d_right[n] = 0.0;
    ws.face_far = [0.0; 2];
    for (side, site, law) in [(0, &problem.face_a, laws.a), (1, &problem.face_b, laws.b)] {
        let Some(site) = site else { continue };
        let (j, [near, far], xs) =
            solve_exposed(problem, site, law, t_c, x, &mut ws.face_guess[side]);
        if side == 0 {
            // Outflow at face A runs towards -s.
            ws.flux[0] = -j;
            ws.d_right[0] = -near;
            ws.face_far[0] = -far;
            (s.out_a, s.x_a) = (j, xs);
        } else {
            ws.flux[n] = j;
            ws.d_left[n] = near;
            ws.face_far[1] = far;
            (s.out_b, s.x_b) = (j, xs);
        }
    }
    s
}

/// One exposed face at state `x`, from its second-order gradient: (outflow, its derivatives by
/// the face's cell and by the second cell in, surface moisture). Updates the face's warm start.
fn solve_exposed(
    problem: &Problem,
    site: &FaceSite,
    law: FaceLaw,
    t_c: f64,
    x: &[f64],
    guess: &mut FaceGuess,
) -> (f64, [f64; 2], f64) {
    let m = &problem.materials[site.material];
    let (xv, w1, w2) = site.gradient.extrapolate(x, site.cell, law.uses_isotherm());
    let (j, dj, xs, u) = face_outflow_from(m, site.gradient.reach, law, xv, t_c, guess.at(xv));
    guess.record(xv, u, unknown_slope(law, dj));
    (j, [dj * w1, dj * w2], xs)
}

/// The warm start of an exposed face's solve: its last two solutions (X*, unknown), newest
/// first, and the newest one's slope d unknown / d X* (NaN where unknown). The parabola through
/// the two with that slope at the newest predicts the unknown at the next X*: its error is of
/// third order in the change of X*, where the secant's is of second order, so the face's Newton
/// iteration (with a moisture-dependent D or an isotherm) usually stops after one update where
/// the secant's start needed two or three (P3: 3.1 evaluations per face solve).
#[derive(Debug, Clone, Copy)]
pub struct FaceGuess {
    last: [(f64, f64); 2],
    slope: f64,
}

impl Default for FaceGuess {
    fn default() -> Self {
        FaceGuess {
            last: [(f64::NAN, f64::NAN); 2],
            slope: f64::NAN,
        }
    }
}

impl FaceGuess {
    /// The unknown predicted at `xv` (NaN when none is known).
    fn at(&self, xv: f64) -> f64 {
        let [(x1, u1), (x0, u0)] = self.last;
        let dx = x0 - x1;
        let (h, s) = (xv - x1, self.slope);
        // Too close a pair gives a slope or curvature of round-off; then less of the pair.
        let apart = dx.abs() > 1e-9 * (x1.abs() + 1e-9);
        let predicted = match (s.is_finite(), apart) {
            (true, true) => {
                let curvature = (u0 - u1 - s * dx) / (dx * dx);
                u1 + h * (s + curvature * h)
            }
            (true, false) => u1 + s * h,
            (false, true) => u1 + (u0 - u1) / dx * h,
            (false, false) => u1,
        };
        if predicted.is_finite() { predicted } else { u1 }
    }

    /// Keeps the solution `u` at `xv` with its slope (a repeat of the newest X* replaces it).
    fn record(&mut self, xv: f64, u: f64, slope: f64) {
        if xv != self.last[0].0 {
            self.last[1] = self.last[0];
        }
        self.last[0] = (xv, u);
        self.slope = slope;
    }
}

/// How the unknown of an exposed face's solve moves with X*, from the outflow's: the outflow is
/// linear in the unknown (k (X_s - X_eq) for a content-based law, hm (aw c_sat - rho_v) for an
/// air-side law), so du/dX* = (dj/dX*) / (dj/du). NaN where that does not hold: a fixed or
/// sealed face, and a wet air-side surface, whose outflow does not depend on it.
fn unknown_slope(law: FaceLaw, dj: f64) -> f64 {
    match law {
        FaceLaw::Linear { k, .. } if k > 0.0 && dj != 0.0 => dj / k,
        FaceLaw::AirSide { hm, c_sat, .. } if hm * c_sat > 0.0 && dj != 0.0 => dj / (hm * c_sat),
        _ => f64::NAN,
    }
}

/// The surface figures of state `x` alone (only the exposed faces are solved; the interior
/// fluxes in the workspace are left as they are).
pub fn exposed_surfaces(
    problem: &Problem,
    laws: &FaceLaws,
    t_c: f64,
    x: &[f64],
    ws: &mut Workspace,
) -> Surfaces {
    let n = x.len();
    let mut s = Surfaces {
        x_a: x[0],
        x_b: x[n - 1],
        t_a: t_c,
        t_b: t_c,
        ..Surfaces::default()
    };
    for (side, site, law) in [(0, &problem.face_a, laws.a), (1, &problem.face_b, laws.b)] {
        if let Some(site) = site {
            let (j, _, xs) = solve_exposed(problem, site, law, t_c, x, &mut ws.face_guess[side]);
            if side == 0 {
                (s.out_a, s.x_a) = (j, xs);
            } else {
                (s.out_b, s.x_b) = (j, xs);
            }
        }
    }
    s
}

/// Why a stage solve failed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NewtonFailure {
    /// No convergence within [`MAX_NEWTON`] iterations.
    NotConverged,
    /// A singular matrix or a non-finite value.
    Breakdown,
}

/// How a stage's Newton iteration stops (see [`solve_stage`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NewtonSettings {
    /// Largest remaining error of the Newton iterate accepted, per unknown kind: moisture (dry
    /// fraction) and temperature (K). A fraction [`NEWTON_FRACTION`] of the step's error
    /// tolerance, so the iteration error stays well below the time error the step control
    /// allows.
    pub tol: [f64; 2],
    /// The stage equations are linear in the unknowns (constant diffusivity, one material,
    /// fixed or content-based faces, isothermal): one Newton update solves them exactly.
    pub linear: bool,
}

/// The Newton iterate is accepted when its estimated remaining error is below this fraction of
/// the time-error tolerance (in the same scaled norm). 0.03 sits in the usual 0.01-0.1 range for
/// implicit Runge-Kutta codes: far enough below 1 that the iteration error does not disturb the
/// error estimate, not so far that iterations are wasted.
pub const NEWTON_FRACTION: f64 = 0.03;

/// Above this contraction rate a reused (modified-Newton) Jacobian is refreshed.
const REFRESH_RATE: f64 = 0.3;

/// Newton's stopping and refresh test, shared by the moisture and the coupled stage solves.
/// Updates are in the error norm's units (1 = the tolerance).
pub(super) struct Contraction {
    last_update: f64,
}

impl Contraction {
    pub(super) fn new() -> Contraction {
        Contraction {
            last_update: f64::INFINITY,
        }
    }

    /// After update number `iteration` of scaled size `update`: whether the iterate is
    /// accepted, and whether the Jacobian should be rebuilt before the next update. `memory`
    /// carries what was measured from one solve to the next.
    pub(super) fn judge(
        &mut self,
        iteration: usize,
        update: f64,
        memory: &mut NewtonMemory,
        linear: bool,
        quadratic_start: bool,
    ) -> (bool, bool) {
        let rate = if iteration > 0 && self.last_update > 0.0 {
            // Measured from the second update on.
            let rate = update / self.last_update;
            memory.rate = rate;
            memory.quadratic = rate / self.last_update;
            rate
        } else {
            // Before a rate is measured: Newton's method with fresh derivatives contracts
            // quadratically, the next update about K u² with K of the last solve (so the rate
            // is K u), taken twice for safety; without a K, the last rate seen, raised a little.
            let guess = memory.rate.max(1e-3).powf(0.8);
            if quadratic_start && memory.quadratic.is_finite() {
                (2.0 * memory.quadratic * update).min(guess)
            } else {
                guess
            }
        };
        self.last_update = update;
        let converged = linear
            || update <= NEWTON_FRACTION * 1e-2
            || (rate < 1.0 && rate / (1.0 - rate) * update <= NEWTON_FRACTION);
        let refresh = !converged && (rate > REFRESH_RATE || iteration >= 4);
        (converged, refresh)
    }
}

/// What a Newton iteration measured, carried to the next stage solve: the last contraction
/// rate (next update over this one) and the last quadratic constant K (next update over this
/// one squared), both in the error norm's units.
#[derive(Debug, Clone, Copy)]
pub struct NewtonMemory {
    /// The last measured contraction rate.
    pub rate: f64,
    /// The last measured K; NaN before one is measured.
    pub quadratic: f64,
}

impl Default for NewtonMemory {
    fn default() -> Self {
        NewtonMemory {
            rate: 1.0,
            quadratic: f64::NAN,
        }
    }
}

/// Solves one implicit stage `m_i x_i - c_dt * inflow_i(x) = b_i` for every cell (b in kg of
/// water per unit normalised area) by Newton's method, starting from the guess in `x` (`fallback`
/// when the guess gives non-finite values). The face derivatives are reused from an earlier
/// evaluation while the iteration contracts well (modified Newton) and refreshed when it does
/// not. The iteration stops when the estimated error of the iterate, `rate / (1 - rate)` times
/// the last update, is below `settings.tol` (before a rate is measured, Newton's quadratic
/// contraction with the last solve's constant gives it; linear stages stop after one update);
/// `finish_stage` then takes the inflow from the stage equation, so `ws.inflow` belongs to the
/// state returned, and returns the water that left, -sum G, so the water balance closes to
/// round-off. While the iteration contracts well the next update reuses the elimination of the
/// one before (simplified Newton).
#[allow(clippy::too_many_arguments)]
pub fn solve_stage(
    problem: &Problem,
    laws: &FaceLaws,
    t_c: f64,
    c_dt: f64,
    b: &[f64],
    x: &mut [f64],
    fallback: &[f64],
    ws: &mut Workspace,
    settings: &NewtonSettings,
) -> Result<(f64, usize), NewtonFailure> {
    if settings.linear {
        // A linear problem's matrix stays the same while c dt, the temperature and the face
        // laws do (every stage of a step shares c dt, and the controller keeps the step size
        // within its dead zone): its elimination is reused, and solved directly.
        let key = (c_dt, t_c, *laws);
        if ws.factored_for != Some(key) && ws.derivatives_for == Some((t_c, *laws)) {
            // A new step size only: the derivatives of a linear problem stay as they were.
            assemble_and_factor(problem, c_dt, ws)?;
            ws.factored_for = Some(key);
        }
        if ws.factored_for == Some(key) {
            return solve_factored_linear_stage(problem, laws, t_c, c_dt, b, fallback, x, ws);
        }
    }
    let n = x.len();
    let areas = &problem.mesh.areas;
    let mass = &problem.dry_mass;
    let tol = settings.tol[0];
    let mut previous = f64::INFINITY;
    let mut backtracks = 0;
    let mut restarted = false;
    let mut contraction = Contraction::new();
    let mut keep_elimination = false;
    for iteration in 0..=MAX_NEWTON {
        let fresh = !ws.jacobian_valid;
        evaluate_faces_with(problem, laws, t_c, x, ws, fresh);
        if fresh {
            ws.jacobian_valid = true;
            ws.jacobian_evaluations += 1;
        }
        // Zipped slices of one length: no bounds checks in the loop.
        let cells = ws
            .inflow
            .iter_mut()
            .zip(ws.rhs.iter_mut())
            .zip(areas[..n].iter().zip(&areas[1..=n]))
            .zip(ws.flux[..n].iter().zip(&ws.flux[1..=n]))
            .zip(mass.iter().zip(x.iter()).zip(b));
        for ((((g, rhs), (a_in, a_out)), (f_in, f_out)), ((&m, &xi), &bi)) in cells {
            let inflow = a_in * f_in - a_out * f_out;
            *g = inflow;
            *rhs = bi + c_dt * inflow - m * xi;
        }
        // The largest residual as a change of moisture (a NaN anywhere counts as not finite).
        let worst = super::sums::max_abs_scaled(&ws.rhs, problem.inverse_dry_mass());
        if !worst.is_finite() {
            if iteration == 0 && !restarted {
                // The predicted guess left the laws' domain: start from the fallback.
                x.copy_from_slice(fallback);
                restarted = true;
                continue;
            }
            if iteration > 0 && backtracks < 4 {
                for (v, d) in x.iter_mut().zip(ws.delta.iter_mut()) {
                    *d *= 0.5;
                    *v -= *d;
                }
                backtracks += 1;
                continue;
            }
            return Err(NewtonFailure::Breakdown);
        }
        if iteration == MAX_NEWTON {
            break;
        }
        // An update that made the residual clearly worse is halved, a few times at most:
        // strongly nonlinear isotherms can overshoot a full Newton step.
        if iteration > 0 && worst > 2.0 * previous && backtracks < 4 {
            for (v, d) in x.iter_mut().zip(ws.delta.iter_mut()) {
                *d *= 0.5;
                *v -= *d;
            }
            backtracks += 1;
            ws.jacobian_valid = false;
            keep_elimination = false;
            continue;
        }
        previous = worst;
        backtracks = 0;
        // After an update that contracted well the elimination of the iterate before is kept
        // (simplified Newton): the derivatives moved by about the update, so the next update
        // is as good as a fresh one to well below the tolerance, without the assembly and
        // elimination. A linear stage gets here only when its elimination cannot be reused
        // (see the top).
        if !keep_elimination {
            assemble_and_factor(problem, c_dt, ws)?;
            ws.factored_for = settings.linear.then_some((c_dt, t_c, *laws));
            ws.derivatives_for = settings.linear.then_some((t_c, *laws));
        }
        if !ws.factors.solve(&mut ws.rhs) {
            return Err(NewtonFailure::Breakdown);
        }
        ws.linear_solves += 1;
        for ((v, d), r) in x.iter_mut().zip(ws.delta.iter_mut()).zip(&ws.rhs) {
            *d = *r;
            *v += r;
        }
        let update = super::sums::max_abs(&ws.rhs);
        let (converged, refresh) = contraction.judge(
            iteration,
            update / tol,
            &mut ws.memory,
            settings.linear,
            true,
        );
        if converged {
            return Ok((finish_stage(problem, c_dt, b, x, ws), iteration + 1));
        }
        keep_elimination = !refresh;
        if refresh {
            ws.jacobian_valid = false;
        }
    }
    ws.jacobian_valid = false;
    Err(NewtonFailure::NotConverged)
}

/// A linear stage whose matrix `m - c_dt J` is already factored (an earlier stage of the step, or
/// an earlier step of the same size), solved directly: the interior faces are homogeneous in the
/// unknowns, so the stage equation `(m - c_dt J) x = b + c_dt g0` needs only the exposed faces'
/// constant parts g0, read off their (exact) linearisation at `at` (any finite state: the step's
/// start, so the stage needs no guess). This skips the evaluation of every interior face that a
/// Newton update would make: the same result to round-off, one sweep of the cells instead of
/// three.
#[allow(clippy::too_many_arguments)]
fn solve_factored_linear_stage(
    problem: &Problem,
    laws: &FaceLaws,
    t_c: f64,
    c_dt: f64,
    b: &[f64],
    at: &[f64],
    x: &mut [f64],
    ws: &mut Workspace,
) -> Result<(f64, usize), NewtonFailure> {
    let n = x.len();
    let areas = &problem.mesh.areas;
    x.copy_from_slice(b);
    for (side, site, law) in [(0, &problem.face_a, laws.a), (1, &problem.face_b, laws.b)] {
        let Some(site) = site else { continue };
        let (j, [near, far], _) =
            solve_exposed(problem, site, law, t_c, at, &mut ws.face_guess[side]);
        // The outflow's part that does not depend on the unknowns; it leaves the face's cell.
        let constant = j - near * at[site.cell] - far * at[site.gradient.inner];
        let area = if side == 0 { areas[0] } else { areas[n] };
        x[site.cell] -= c_dt * area * constant;
    }
    if !ws.factors.solve(x) {
        return Err(NewtonFailure::Breakdown);
    }
    ws.linear_solves += 1;
    Ok((finish_stage(problem, c_dt, b, x, ws), 1))
}

/// The end of a stage solve at its accepted iterate `x`: the inflow from the stage equation,
/// G = (m x - b) / c_dt, rather than from the faces again (exact for a linear stage's one
/// update, within the Newton tolerance otherwise, and it enters every later use multiplied by a
/// time step). Returns the water leaving through the exposed faces, -sum G (the interior fluxes
/// cancel in the sum; kg/s per unit outer area), so the water balance closes to round-off
/// whatever the Newton iteration left over. The faces themselves are not solved again: only
/// their total enters the balance.
fn finish_stage(problem: &Problem, c_dt: f64, b: &[f64], x: &[f64], ws: &mut Workspace) -> f64 {
    let mass = &problem.dry_mass;
    let per_time = 1.0 / c_dt;
    for ((g, (&m, &v)), &bi) in ws.inflow.iter_mut().zip(mass.iter().zip(x)).zip(b) {
        *g = (m * v - bi) * per_time;
    }
    if problem.face_a.is_none() && problem.face_b.is_none() {
        // Sealed all round: nothing leaves (the sum would be round-off).
        return 0.0;
    }
    -super::sums::sum(&ws.inflow)
}

/// Builds the stage matrix `m - c_dt J` from the face derivatives in the workspace and factors it.
fn assemble_and_factor(
    problem: &Problem,
    c_dt: f64,
    ws: &mut Workspace,
) -> Result<(), NewtonFailure> {
    let areas = &problem.mesh.areas;
    let n = problem.dry_mass.len();
    // Zipped slices of one length (no bounds checks): each cell with its two faces.
    let rows = (ws.lower.iter_mut())
        .zip(ws.diag.iter_mut().zip(ws.upper.iter_mut()))
        .zip(
            problem
                .dry_mass
                .iter()
                .zip(areas[..n].iter().zip(&areas[1..=n])),
        )
        .zip(
            (ws.d_left[..n].iter().zip(&ws.d_left[1..=n]))
                .zip(ws.d_right[..n].iter().zip(&ws.d_right[1..=n])),
        );
    for (((lower, (diag, upper)), (&m, (&a_in, &a_out))), ((&dl_in, &dl_out), (&dr_in, &dr_out))) in
        rows
    {
        *lower = -c_dt * a_in * dl_in;
        *diag = m - c_dt * (a_in * dr_in - a_out * dl_out);
        *upper = c_dt * a_out * dr_out;
    }
    add_far_face_terms(ws, areas, c_dt);
    if !ws.factors.factor(&ws.lower, &ws.diag, &ws.upper) {
        ws.factored_for = None;
        return Err(NewtonFailure::Breakdown);
    }
    Ok(())
}

/// The exposed faces' dependence on the second cell in (their second-order gradient, see
/// [`crate::solver::problem::SurfaceGradient`]): face A's outflow enters cell 0's row at cell
/// 1, face B's cell n-1's row at cell n-2. Both stay within the tridiagonal band.
fn add_far_face_terms(ws: &mut Workspace, areas: &[f64], c_dt: f64) {
    let n = ws.diag.len();
    if n < 2 {
        return;
    }
    ws.upper[0] -= c_dt * areas[0] * ws.face_far[0];
    ws.lower[n - 1] += c_dt * areas[n] * ws.face_far[1];
}

/// Solves `v` in place with the matrix of the last Newton update (`m - c_dt J`): turns an error
/// in water held (kg per unit normalised area per cell) into a moisture error, damping the stiff
/// components as the implicit stages do.
pub fn filter(ws: &mut Workspace, v: &mut [f64]) -> bool {
    ws.factors.solve(v)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The faces of a run with an exponential D, by the baseline loop and by the AVX2 loop where
    /// the processor has it: the same bits (no FMA, every operation rounds alike), and the
    /// baseline against the definition with the standard library's exponential.
    #[test]
    fn exponential_faces_agree_on_every_path() {
        let n = 37; // Not a multiple of the vector width: the loops' tails run too.
        let x: Vec<f64> = (0..=n)
            .map(|i| 0.05 + 0.8 * (0.37 * i as f64).sin().abs())
            .collect();
        let g: Vec<f64> = (0..n)
            .map(|i| 500.0 / (1e-4 * (1.0 + 0.01 * i as f64)))
            .collect();
        let (at_ref, b, x_ref) = (2e-10, 2.0, 0.1);
        let run = |wide: bool| {
            let (mut f, mut dl, mut dr) = (vec![0.0; n], vec![0.0; n], vec![0.0; n]);
            let faces = f
                .iter_mut()
                .zip(dl.iter_mut().zip(dr.iter_mut()))
                .zip(g.iter().zip(x[..n].iter().zip(&x[1..])));
            let body = || exponential_faces(faces, at_ref, b, x_ref);
            if wide {
                crate::solver::wide::wide(body);
            } else {
                crate::solver::wide::narrow(body);
            }
            (f, dl, dr)
        };
        let base = run(false);
        for k in 0..n {
            let (xl, xr) = (x[k], x[k + 1]);
            let d = at_ref * (b * (0.5 * (xl + xr) - x_ref)).exp();
            let expected = g[k] * d * (xl - xr);
            assert!((base.0[k] - expected).abs() <= 1e-14 * expected.abs().max(1e-300));
        }
        if crate::solver::wide::is_wide() {
            let wide = run(true);
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&base.0), bits(&wide.0));
            assert_eq!(bits(&base.1), bits(&wide.1));
            assert_eq!(bits(&base.2), bits(&wide.2));
        }
    }

    #[test]
    fn a_start_at_the_root_stops_after_one_evaluation() {
        // A decreasing function whose root is not a machine number: from the nearest machine
        // number the Newton step is below an ulp, and the search used to bisect from there.
        let root = 0.771_995_760_6_f64;
        for guess in [
            root,
            root * (1.0 + 2e-16),
            root * (1.0 - 2e-16),
            root + 1e-9,
        ] {
            let evaluations = std::cell::Cell::new(0);
            let f = |x: f64| {
                evaluations.set(evaluations.get() + 1);
                ((root - x) * (1.0 + x), -(1.0 + x) + (root - x))
            };
            let x = newton_in_bracket(f, 0.05, 0.8, guess);
            assert!((x - root).abs() <= 1e-15, "{x} against {root}");
            assert_eq!(evaluations.get(), 1, "from {guess}");
        }
    }

    #[test]
    fn the_face_guess_follows_a_parabola_exactly() {
        // u(x) = 0.3 + 0.9 x - 0.4 x² solved at 0.7 then 0.72 (slope known at the newest).
        let u = |x: f64| 0.3 + 0.9 * x - 0.4 * x * x;
        let slope = |x: f64| 0.9 - 0.8 * x;
        let mut guess = FaceGuess::default();
        assert!(guess.at(0.7).is_nan());
        guess.record(0.7, u(0.7), slope(0.7));
        assert!((guess.at(0.71) - (u(0.7) + 0.01 * slope(0.7))).abs() < 1e-15);
        guess.record(0.72, u(0.72), slope(0.72));
        for x in [0.69, 0.73, 0.75] {
            assert!((guess.at(x) - u(x)).abs() < 1e-14, "at {x}");
        }
        // Without a slope, the secant.
        guess.record(0.74, u(0.74), f64::NAN);
        let secant = u(0.74) + (u(0.74) - u(0.72)) / 0.02 * 0.01;
        assert!((guess.at(0.75) - secant).abs() < 1e-14);
    }
}
