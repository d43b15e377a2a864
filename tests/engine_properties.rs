//! Properties of the engine for random cases (proptest): water is conserved in layered bodies,
//! a body in air drier than itself only dries, a single material stays between its initial and
//! its equilibrium moisture, and a slab exposed on both faces dries symmetrically.
//!
//! These follow from the diffusion equation itself (J. Crank, The Mathematics of Diffusion,
//! 2nd ed., 1975, ch. 1: conservation and the maximum principle; a symmetric problem has a
//! symmetric solution), so no number here is taken from the program.

use dampfront::case::{Case, Exchange, Exposed, Geometry, Humidity, Layer, Material, Step};
use dampfront::physics::Isotherm;
use dampfront::solver::{self, RunResult};
use proptest::prelude::*;

/// A GAB material with constant D.
#[derive(Debug, Clone)]
struct Mat {
    density: f64,
    d: f64,
    xm: f64,
    c: f64,
    k: f64,
}

impl Mat {
    fn isotherm(&self) -> Isotherm {
        Isotherm::Gab {
            xm: self.xm,
            c: self.c,
            k: self.k,
        }
    }

    fn material(&self, name: &str) -> Material {
        let mut m = Material::constant(name, self.density, self.d);
        m.isotherm = self.isotherm();
        m
    }

    /// Equilibrium moisture (dry fraction) at water activity `aw`.
    fn moisture_at(&self, aw: f64, t_c: f64) -> f64 {
        self.isotherm()
            .equilibrium_moisture(aw, t_c)
            .expect("GAB has an equilibrium moisture")
    }
}

fn mat() -> impl Strategy<Value = Mat> {
    (
        200.0..1500.0f64,
        -11.0..-8.5f64,
        0.03..0.15f64,
        3.0..30.0f64,
        0.6..0.9f64,
    )
        .prop_map(|(density, log_d, xm, c, k)| Mat {
            density,
            d: 10f64.powf(log_d),
            xm,
            c,
            k,
        })
}

/// One layer: its material, thickness (m) and initial water activity.
fn layer() -> impl Strategy<Value = (Mat, f64, f64)> {
    (mat(), 0.002..0.015f64, 0.6..0.9f64)
}

/// Air: temperature (C), relative humidity (fraction), content-based surface coefficient (m/s).
fn air() -> impl Strategy<Value = (f64, f64, f64)> {
    (20.0..70.0f64, 0.1..0.5f64, -8.0..-6.0f64)
        .prop_map(|(t, rh, log_b)| (t, rh, 10f64.powf(log_b)))
}

fn case(layers: &[(Mat, f64, f64)], air: (f64, f64, f64), exposed: Exposed, hours: f64) -> Case {
    let (t, rh, beta) = air;
    let step = Step {
        label: String::from("dry"),
        duration: None,
        until_moisture: None,
        dry_bulb_c: t,
        humidity: Humidity::Relative(rh),
        equilibrium_moisture: None,
        exchange: Exchange::SurfaceCoefficient(beta),
        heat_coef: None,
        ramp: false,
    };
    let (m0, h0, aw0) = &layers[0];
    let mut case = Case::single_layer(
        Geometry::Slab,
        exposed,
        m0.material("m1"),
        *h0,
        m0.moisture_at(*aw0, t),
        vec![step],
        hours * 3600.0,
    );
    case.cells_per_layer = 12;
    for (i, (m, h, aw)) in layers.iter().enumerate().skip(1) {
        case.materials.push(m.material(&format!("m{}", i + 1)));
        case.layers.push(Layer {
            name: format!("layer {}", i + 1),
            material: i,
            thickness: *h,
            initial_moisture: m.moisture_at(*aw, t),
            initial_temp_c: t,
        });
    }
    case.layers[0].initial_temp_c = t;
    case
}

fn solve(case: &Case) -> RunResult {
    let problems = case.validate();
    assert!(problems.is_empty(), "{problems:?}");
    solver::solve(case).expect("the case runs")
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 24, ..ProptestConfig::default() })]

    #[test]
    fn water_is_conserved_in_layered_bodies(
        layers in prop::collection::vec(layer(), 1..4),
        air in air(),
        both in any::<bool>(),
    ) {
        let exposed = if both { Exposed::Both } else { Exposed::A };
        let c = case(&layers, air, exposed, 24.0);
        let r = solve(&c);
        // Water that left through the faces equals the change of water held, to round-off.
        prop_assert!(r.mass_balance_error <= 1e-8, "mass balance error {:e}", r.mass_balance_error);
        // The summary's largest surface-centre difference covers every row, those between
        // steps included (the tracker ignores rises below 1e-3 x tolerance x the moisture
        // scale, the range of initial and equilibrium moistures: here below the largest
        // initial moisture plus 1).
        let scale = 1.0 + c.layers.iter().map(|l| l.initial_moisture).fold(0.0, f64::max);
        let noise = 1e-3 * c.tolerance * scale;
        for row in &r.curves {
            let d = (row.surface - row.centre).abs();
            prop_assert!(
                d <= r.max_surface_centre_difference * (1.0 + 1e-9) + noise,
                "row at {} s: {d} above the summary's {}", row.time, r.max_surface_centre_difference
            );
        }
    }

    #[test]
    fn a_body_in_drier_air_only_dries(
        layers in prop::collection::vec(layer(), 1..4),
        air in air(),
    ) {
        // Every layer starts at a water activity of at least 0.6, the air is at most 0.5.
        let c = case(&layers, air, Exposed::A, 24.0);
        let r = solve(&c);
        let first = r.curves.first().map(|c| c.mean).unwrap_or_default();
        let last = r.last().map(|c| c.mean).unwrap_or_default();
        prop_assert!(last < first, "no drying: {first} -> {last}");
        // The time steps and their dense output are not monotone: near equilibrium a step may
        // carry a deviation as large as the error control admits (tolerance x the range dried).
        // Rows between steps come from each cell's own limited cubic (kept between its step's
        // ends), which tracks the water held only as closely as the cells' own changes allow:
        // where layers start apart, water moving across their boundaries changes cells far more
        // than the mean, so that spread counts too. A real wetting would be far larger.
        let x0 = c.layers.iter().map(|l| l.initial_moisture);
        let spread = x0.clone().fold(f64::NEG_INFINITY, f64::max) - x0.fold(f64::INFINITY, f64::min);
        let allowed = c.tolerance * (first - last + spread);
        for pair in r.curves.windows(2) {
            let (a, b) = (pair[0].mean, pair[1].mean);
            prop_assert!(b <= a + allowed, "mean rose from {a} to {b} at {} s", pair[1].time);
        }
    }

    #[test]
    fn a_single_material_stays_between_its_start_and_its_equilibrium(
        l in layer(),
        air in air(),
    ) {
        let (t, rh, _) = air;
        let c = case(std::slice::from_ref(&l), air, Exposed::A, 48.0);
        let x0 = c.layers[0].initial_moisture;
        let x_eq = l.0.moisture_at(rh, t);
        let (lo, hi) = (x0.min(x_eq), x0.max(x_eq));
        let r = solve(&c);
        // The integrator is accurate to the local error tolerance but not bound-preserving: its
        // stability function is >= 0 for linear decays, but nonlinear diffusivities and
        // isotherms, and the cubic dense output, can carry a small deviation past the
        // equilibrium. The error test bounds that by the tolerance times the moisture swing per
        // step, so that is the slack.
        let slack = c.tolerance * (hi - lo);
        for p in &r.profiles {
            for &x in p.moisture.iter().flatten() {
                prop_assert!(x >= lo - slack && x <= hi + slack, "{x} outside [{lo}, {hi}] at {} s", p.time);
            }
        }
        for row in &r.curves {
            for x in [row.mean, row.surface, row.centre] {
                prop_assert!(x >= lo - slack && x <= hi + slack, "{x} outside [{lo}, {hi}]");
            }
        }
    }

    #[test]
    fn a_slab_exposed_on_both_faces_dries_symmetrically(
        l in layer(),
        air in air(),
    ) {
        let c = case(std::slice::from_ref(&l), air, Exposed::Both, 24.0);
        let thickness = c.layers[0].thickness;
        let r = solve(&c);
        let n = r.positions.len();
        for i in 0..n {
            let mirrored = r.positions[i] + r.positions[n - 1 - i];
            prop_assert!((mirrored - thickness).abs() <= 1e-12 * thickness, "mesh not symmetric at {i}");
        }
        let scale = c.layers[0].initial_moisture;
        for p in &r.profiles {
            let Some(x) = &p.moisture else { continue };
            for i in 0..x.len() {
                let d = (x[i] - x[x.len() - 1 - i]).abs();
                prop_assert!(d <= 1e-8 * scale, "asymmetry {d:e} at cell {i}, {} s", p.time);
            }
        }
    }
}
