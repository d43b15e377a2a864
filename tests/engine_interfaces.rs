//! Boundaries between materials where one side holds free water (moisture above the isotherm's
//! aw = 1 value). Regression tests for issue 10, items 1 and 2: such bodies used to keep their
//! free water for ever (zero flux across the boundary) or stall the time step.

use dampfront::case::{Case, Exchange, Exposed, Geometry, Humidity, Layer, Material, Step};
use dampfront::physics::{Diffusivity, Isotherm};
use dampfront::solver::{self, RunResult};

/// GAB constants whose aw = 1 moisture is 34.15 % (X_sat = Xm C K / ((1 - K)(1 - K + C K))).
const FREE_WATER_GAB: Isotherm = Isotherm::Gab {
    xm: 0.08,
    c: 12.0,
    k: 0.771_385_6,
};

fn material(name: &str, density: f64, d: f64, coef: f64, isotherm: Isotherm) -> Material {
    let mut m = Material::constant(name, density, d);
    m.diffusivity = Diffusivity {
        moisture_coef: coef,
        ..Diffusivity::constant(d)
    };
    m.isotherm = isotherm;
    m
}

/// A layer as (material, thickness in mm, initial moisture as a dry fraction).
type LayerSpec = (Material, f64, f64);

fn two_layers(
    outer: LayerSpec,
    inner: LayerSpec,
    step: Step,
    hours: f64,
    exposed: Exposed,
) -> Case {
    let mut case = Case::single_layer(
        Geometry::Slab,
        exposed,
        outer.0,
        outer.1 / 1000.0,
        outer.2,
        vec![step],
        hours * 3600.0,
    );
    case.materials.push(inner.0);
    case.layers.push(Layer {
        name: "inner".into(),
        material: 1,
        thickness: inner.1 / 1000.0,
        initial_moisture: inner.2,
        initial_temp_c: 20.0,
    });
    case
}

fn run(case: &Case) -> RunResult {
    let r = solver::solve(case).expect("case runs");
    assert!(
        r.mass_balance_error <= 1e-9,
        "mass balance {:e}",
        r.mass_balance_error
    );
    // "Well under a second" in work, not in time (no timed tests): a single-layer case of this
    // size takes a few hundred steps.
    assert!(
        r.stats.accepted < 5_000,
        "too many steps: {}",
        r.stats.accepted
    );
    r
}

fn layer_mean_at(r: &RunResult, layer: usize, hours: f64) -> f64 {
    let row = r
        .curves
        .iter()
        .min_by(|a, b| {
            (a.time - hours * 3600.0)
                .abs()
                .total_cmp(&(b.time - hours * 3600.0).abs())
        })
        .expect("rows");
    row.layer_means()[layer]
}

#[test]
fn free_water_dries_out_through_a_skin_whose_diffusivity_rises_with_moisture() {
    let sat = FREE_WATER_GAB.saturation_moisture(50.0).expect("finite");
    assert!((sat - 0.3415).abs() < 1e-5, "{sat}");
    let skin = material(
        "skin",
        400.0,
        2e-10,
        2.0,
        Isotherm::Oswin { a: 0.15, b: 0.55 },
    );
    let flesh = material("flesh", 300.0, 5e-10, 0.0, FREE_WATER_GAB);
    let step = Step::constant(
        50.0,
        Humidity::Relative(0.35),
        Exchange::SurfaceCoefficient(6e-8),
    );
    let case = two_layers(
        (skin, 6.0, 0.35),
        (flesh, 9.0, 0.35),
        step,
        1000.0,
        Exposed::A,
    );
    let r = run(&case);
    let (at_100, at_1000) = (layer_mean_at(&r, 1, 100.0), layer_mean_at(&r, 1, 1000.0));
    // The inner layer must lose its free water and keep drying towards the air's equilibrium.
    assert!(at_100 < sat - 0.05, "inner layer at 100 h: {at_100}");
    assert!(at_1000 < at_100 - 0.05, "inner layer at 1000 h: {at_1000}");
    // Drying stops at the inner material's own equilibrium with the air (one water activity).
    let eq = FREE_WATER_GAB
        .equilibrium_moisture(0.35, 50.0)
        .expect("gab");
    assert!(at_1000 > eq, "below the inner equilibrium {eq}: {at_1000}");
}

#[test]
fn green_wood_under_a_skin_dries() {
    let skin = material(
        "skin",
        500.0,
        1e-10,
        2.0,
        Isotherm::Oswin { a: 0.12, b: 0.5 },
    );
    let mut wood = material("wood", 450.0, 1e-9, 3.0, Isotherm::Wood);
    wood.diffusivity.activation_energy_j_mol = 30_000.0;
    let step = Step::constant(
        60.0,
        Humidity::Relative(0.4),
        Exchange::SurfaceCoefficient(5e-8),
    );
    let case = two_layers(
        (skin, 2.0, 0.12),
        (wood, 20.0, 0.9),
        step,
        500.0,
        Exposed::A,
    );
    let r = run(&case);
    assert!(
        layer_mean_at(&r, 1, 500.0) < 0.6,
        "{}",
        layer_mean_at(&r, 1, 500.0)
    );
}

/// A sealed body: the water must end where both sides share one potential (water activity below
/// saturation on both sides), with every drop kept.
fn sealed_pair(
    a: (Material, f64, f64),
    b: (Material, f64, f64),
    t_c: f64,
    hours: f64,
) -> RunResult {
    let step = Step::constant(t_c, Humidity::Unspecified, Exchange::Unspecified);
    let case = two_layers(a.clone(), b.clone(), step, hours, Exposed::None);
    let r = run(&case);
    let water = |m: &Material, mm: f64, x: f64| m.dry_density * mm * x;
    let before = water(&case.materials[0], a.1, a.2) + water(&case.materials[1], b.1, b.2);
    let last = r.last().expect("rows");
    let after = water(&case.materials[0], a.1, last.layer_means()[0])
        + water(&case.materials[1], b.1, last.layer_means()[1]);
    assert!(
        (after - before).abs() <= 1e-10 * before,
        "{before} -> {after}"
    );
    r
}

#[test]
fn free_water_beside_wood_below_saturation_settles_quickly() {
    let t = 60.0;
    let gab = material("gab", 300.0, 1e-9, 0.0, FREE_WATER_GAB);
    let wood = material("wood", 500.0, 2e-10, 2.0, Isotherm::Wood);
    let r = sealed_pair((gab, 5.0, 0.60), (wood, 10.0, 0.25), t, 2000.0);
    let last = r.last().expect("rows");
    let (x1, x2) = (last.layer_means()[0], last.layer_means()[1]);
    let aw1 = FREE_WATER_GAB.water_activity(x1, t).expect("aw");
    let aw2 = Isotherm::Wood.water_activity(x2, t).expect("aw");
    // Both sides end at one water activity (or, both holding free water, one saturation).
    let sat1 = FREE_WATER_GAB.saturation_moisture(t).expect("sat");
    let sat2 = Isotherm::Wood.saturation_moisture(t).expect("sat");
    if aw1 < 1.0 || aw2 < 1.0 {
        assert!((aw1 - aw2).abs() < 1e-3, "aw {aw1} vs {aw2}");
    } else {
        assert!((x1 / sat1 - x2 / sat2).abs() < 1e-3, "{x1} {x2}");
    }
    assert!(x1 < 0.60 && x2 > 0.25, "{x1} {x2}");
}

#[test]
fn two_wood_species_with_free_water_share_their_degree_of_saturation() {
    let t = 50.0;
    let oak = material("dense", 650.0, 1e-10, 3.0, Isotherm::Wood);
    let pine = material("light", 420.0, 4e-10, 3.0, Isotherm::Wood);
    let r = sealed_pair((oak, 10.0, 0.80), (pine, 10.0, 0.28), t, 3000.0);
    let last = r.last().expect("rows");
    let (x1, x2) = (last.layer_means()[0], last.layer_means()[1]);
    // Same isotherm on both sides: one potential means one moisture content.
    assert!((x1 - x2).abs() < 2e-3, "{x1} vs {x2}");
}

#[test]
fn an_apple_like_slice_with_a_skin_dries_in_few_steps() {
    let skin = material(
        "skin",
        600.0,
        5e-11,
        1.5,
        Isotherm::Gab {
            xm: 0.12,
            c: 6.0,
            k: 0.9,
        },
    );
    let flesh = material("flesh", 130.0, 4e-10, 0.5, FREE_WATER_GAB);
    let step = Step::constant(60.0, Humidity::Relative(0.2), Exchange::AirSide(0.02));
    let case = two_layers((skin, 0.3, 0.5), (flesh, 4.7, 6.0), step, 48.0, Exposed::A);
    let r = run(&case);
    assert!(
        layer_mean_at(&r, 1, 48.0) < 3.0,
        "{}",
        layer_mean_at(&r, 1, 48.0)
    );
}
