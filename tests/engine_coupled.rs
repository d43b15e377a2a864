//! The coupled heat-and-moisture engine against what lies outside it: the exact transient
//! conduction series (Incropera & DeWitt), the wet-surface heat balance of psychrometry, energy
//! conservation, and the isothermal engine as the limit of very large k and h.

use dampfront::analytic::{Shape, conduction_centre_ratio};
use dampfront::case::{
    Case, Coupling, Exchange, Exposed, Geometry, Humidity, Material, Place, Step,
};
use dampfront::physics::psychro::{latent_heat_j_kg, saturation_pressure_pa, vapour_density_kg_m3};
use dampfront::physics::transfer::{air_properties, flat_plate_heat_coef, flat_plate_mass_coef};
use dampfront::physics::{Diffusivity, Isotherm, STANDARD_PRESSURE_PA};
use dampfront::solver::{self, RunResult};

const CW: f64 = 4186.0;

fn thermal_material(density: f64, d: f64, k: f64, cs: f64) -> Material {
    let mut m = Material::constant("m", density, d);
    m.conductivity = Some(k);
    m.specific_heat = Some(cs);
    m
}

/// Runs a coupled case and checks what every coupled run must satisfy: water and energy
/// conserved (energy to 1e-6 relative, as the summary reports it).
fn run(case: &Case) -> RunResult {
    let r = solver::solve(case).expect("case runs");
    assert!(
        r.mass_balance_error <= 1e-9,
        "mass {:e}",
        r.mass_balance_error
    );
    let e = r
        .energy_balance_error
        .expect("coupled runs report the energy balance");
    assert!(e <= 1e-6, "energy balance {e:e} for {}", case.title);
    r
}

/// A body at 20 C put into air at 80 C through h, with no moisture moving (the surface tends to
/// an equilibrium equal to the initial moisture).
fn conduction_case(geometry: Geometry, biot: f64) -> (Case, f64) {
    let (l, k, cs, rho, x0) = (0.02, 0.4, 1500.0, 500.0, 0.3);
    let mut step = Step::constant(
        80.0,
        Humidity::Unspecified,
        Exchange::SurfaceCoefficient(1e-7),
    );
    step.equilibrium_moisture = Some(x0);
    step.heat_coef = Some(biot * k / l);
    let mut case = Case::single_layer(
        geometry,
        Exposed::A,
        thermal_material(rho, 1e-9, k, cs),
        l,
        x0,
        vec![step],
        1.0,
    );
    case.coupling = Coupling::HeatAndMoisture;
    case.layers[0].initial_temp_c = 20.0;
    let alpha = k / (rho * (cs + CW * x0));
    case.end_time = 1.5 * l * l / alpha;
    case.output_every = Some(0.01 * l * l / alpha);
    case.title = format!("conduction {geometry:?} Bi {biot}");
    (case, alpha)
}

#[test]
fn pure_conduction_matches_the_exact_series_for_wall_cylinder_and_sphere() {
    // Incropera & DeWitt, Fundamentals of Heat and Mass Transfer (6th ed.), ch. 5: the exact
    // series for the centre temperature of a plane wall (eq. 5.39), an infinite cylinder
    // (5.47) and a sphere (5.48) exposed through h. The series is summed in
    // `analytic::conduction_centre_ratio`; its first terms are Table 5.1's.
    for (geometry, shape) in [
        (Geometry::Slab, Shape::Slab),
        (Geometry::Cylinder, Shape::Cylinder),
        (Geometry::Sphere, Shape::Sphere),
    ] {
        for biot in [0.1, 1.0, 10.0] {
            let (case, alpha) = conduction_case(geometry, biot);
            let r = run(&case);
            let l = case.layers[0].thickness;
            let mut worst: f64 = 0.0;
            for row in &r.curves {
                let fo = alpha * row.time / (l * l);
                if fo < 0.05 {
                    continue;
                }
                let theta = (row.centre_temp_c - 80.0) / (20.0 - 80.0);
                let exact = conduction_centre_ratio(shape, biot, fo);
                worst = worst.max((theta - exact).abs());
                // No moisture moves.
                assert!((row.mean - 0.3).abs() < 1e-12);
            }
            println!("{geometry:?} Bi {biot}: {worst:.2e}");
            assert!(worst <= 2e-3, "{geometry:?} Bi {biot}: {worst:e}");
        }
    }
}

#[test]
fn the_conduction_series_reproduces_the_published_check_value() {
    // Plane wall, Bi = 1, Fo = 0.2: full series 0.950642 (computed; see references, Table 5.1
    // note 3), against the one-term value C1 exp(-zeta1^2 Fo) = 1.1191 exp(-0.8603^2 * 0.2).
    let full = conduction_centre_ratio(Shape::Slab, 1.0, 0.2);
    assert!((full - 0.950642).abs() < 1e-6, "{full}");
    // At Fo = 1 the one-term form (Incropera & DeWitt Table 5.1: zeta1 0.8603, C1 1.1191) is
    // within its table rounding of the series.
    let one_term = 1.1191 * (-0.8603_f64 * 0.8603 * 1.0).exp();
    assert!((conduction_centre_ratio(Shape::Slab, 1.0, 1.0) - one_term).abs() < 2e-4);
}

/// Air vapour density at `t_c` and RH `rh`, kg/m3.
fn vapour_density(t_c: f64, rh: f64) -> f64 {
    vapour_density_kg_m3(rh * saturation_pressure_pa(t_c), t_c)
}

/// The wet-surface temperature where h (Ta - Ts) = hm Lv (rho_sat(Ts) - rho_v,air), by bisection.
fn wet_surface_temperature(t_air: f64, rh: f64, h: f64, hm: f64) -> f64 {
    let rho_air = vapour_density(t_air, rh);
    let g = |ts: f64| {
        h * (t_air - ts) - hm * latent_heat_j_kg(ts) * (vapour_density(ts, 1.0) - rho_air)
    };
    let (mut lo, mut hi) = (0.0, t_air);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if g(mid) > 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// A wet slab (GAB far above its aw = 1 moisture, high D) under constant air.
fn wet_slab(exchange: Exchange, h: Option<f64>) -> Case {
    let mut m = thermal_material(200.0, 1e-7, 0.5, 1500.0);
    m.isotherm = Isotherm::Gab {
        xm: 0.08,
        c: 12.0,
        k: 0.77,
    };
    let mut step = Step::constant(60.0, Humidity::Relative(0.2), exchange);
    step.heat_coef = h;
    let mut case = Case::single_layer(
        Geometry::Slab,
        Exposed::A,
        m,
        0.005,
        4.0,
        vec![step],
        3.0 * 3600.0,
    );
    case.coupling = Coupling::HeatAndMoisture;
    case.layers[0].initial_temp_c = 25.0;
    case.title = "wet slab".into();
    case
}

fn settled(r: &RunResult) -> (f64, f64) {
    let last = r.last().expect("rows");
    (last.surface_temp_c, last.drying_rate)
}

#[test]
fn a_wet_slab_settles_at_the_wet_surface_temperature() {
    let (h, hm) = (25.0, 0.02);
    let case = wet_slab(Exchange::AirSide(hm), Some(h));
    let r = run(&case);
    let expected = wet_surface_temperature(60.0, 0.2, h, hm);
    let (ts, rate) = settled(&r);
    println!("surface {ts:.3} C, balance {expected:.3} C");
    assert!((ts - expected).abs() <= 0.5, "{ts} vs {expected}");
    // Constant-rate period: the flux equals h (Ta - Ts) / Lv.
    let dry_mass = 200.0 * 0.005;
    let flux = rate * dry_mass;
    let expected_flux = h * (60.0 - expected) / latent_heat_j_kg(expected);
    assert!(
        (flux - expected_flux).abs() <= 0.02 * expected_flux,
        "{flux} vs {expected_flux}"
    );
}

#[test]
fn with_an_air_velocity_the_wet_slab_settles_where_the_correlations_put_it() {
    let case = wet_slab(Exchange::AirVelocity(2.0), None);
    let r = run(&case);
    // h and hm from the flat-plate correlation (Incropera & DeWitt ch. 7) over the case's
    // flow length, with air properties at the air temperature.
    let air = air_properties(60.0, STANDARD_PRESSURE_PA);
    let h = flat_plate_heat_coef(2.0, case.flow_length, &air);
    let hm = flat_plate_mass_coef(2.0, case.flow_length, &air);
    let expected = wet_surface_temperature(60.0, 0.2, h, hm);
    let (ts, _) = settled(&r);
    assert!((ts - expected).abs() <= 0.6, "{ts} vs {expected}");
}

#[test]
fn very_large_k_and_h_reproduce_the_isothermal_engine() {
    // The largest values the plausibility ranges accept: k 500 W/(m K), h 1e5 W/(m2 K).
    let mut m = thermal_material(500.0, 2e-10, 500.0, 1500.0);
    m.isotherm = Isotherm::Oswin { a: 0.12, b: 0.5 };
    m.diffusivity = Diffusivity {
        activation_energy_j_mol: 30_000.0,
        moisture_coef: 2.0,
        ..Diffusivity::constant(2e-10)
    };
    let mut step = Step::constant(
        50.0,
        Humidity::Relative(0.3),
        Exchange::SurfaceCoefficient(5e-8),
    );
    step.heat_coef = Some(1e5);
    let mut iso = Case::single_layer(
        Geometry::Slab,
        Exposed::A,
        m,
        0.01,
        0.8,
        vec![step],
        200.0 * 3600.0,
    );
    iso.layers[0].initial_temp_c = 50.0;
    let mut coupled = iso.clone();
    coupled.coupling = Coupling::HeatAndMoisture;
    let a = solver::solve(&iso).expect("isothermal");
    let b = run(&coupled);
    let x_eq = Isotherm::Oswin { a: 0.12, b: 0.5 }
        .equilibrium_moisture(0.3, 50.0)
        .expect("eq");
    let mr = |x: f64| (x - x_eq) / (0.8 - x_eq);
    assert_eq!(a.curves.len(), b.curves.len());
    for (ra, rb) in a.curves.iter().zip(&b.curves) {
        assert!(
            (mr(ra.mean) - mr(rb.mean)).abs() <= 1e-3,
            "{} {}",
            ra.mean,
            rb.mean
        );
    }
}

#[test]
fn hotter_air_dries_an_arrhenius_material_faster() {
    let mean_after = |t_air: f64| {
        let mut m = thermal_material(500.0, 2e-10, 0.3, 1500.0);
        m.isotherm = Isotherm::Oswin { a: 0.12, b: 0.5 };
        m.diffusivity.activation_energy_j_mol = 35_000.0;
        let step = Step::constant(t_air, Humidity::Relative(0.2), Exchange::AirVelocity(2.0));
        let mut case = Case::single_layer(
            Geometry::Slab,
            Exposed::A,
            m,
            0.01,
            0.8,
            vec![step],
            24.0 * 3600.0,
        );
        case.coupling = Coupling::HeatAndMoisture;
        run(&case).last().expect("rows").mean
    };
    let (cool, hot) = (mean_after(40.0), mean_after(70.0));
    assert!(hot < cool - 0.02, "{hot} vs {cool}");
}

#[test]
fn implausible_thermal_values_are_refused_at_their_cells() {
    // A conductivity in mW/(m K), a specific heat in kJ/(kg K), an h of 1e9: unit slips.
    let mut m = thermal_material(500.0, 1e-9, 150.0e3, 1.5);
    m.isotherm = Isotherm::Oswin { a: 0.1, b: 0.5 };
    let mut step = Step::constant(60.0, Humidity::Relative(0.3), Exchange::AirSide(0.02));
    step.heat_coef = Some(1e9);
    let mut case = Case::single_layer(Geometry::Slab, Exposed::A, m, 0.01, 0.5, vec![step], 3600.0);
    case.coupling = Coupling::HeatAndMoisture;
    let problems = case.validate();
    for column in ["conductivity_w_mk", "specific_heat_j_kgk"] {
        assert!(
            problems
                .iter()
                .any(|p| p.place == Place::Material { index: 0, column }),
            "{column}: {problems:?}"
        );
    }
    assert!(
        problems.iter().any(|p| p.place
            == Place::Step {
                index: 0,
                column: "h_w_m2k"
            }),
        "{problems:?}"
    );
}
