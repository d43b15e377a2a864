//! Convective transfer: flat-plate correlations against worked textbook examples, the
//! Chilton–Colburn analogy, and air properties against handbook values.

use dampfront::physics::{
    AirProperties, CRITICAL_REYNOLDS, STANDARD_PRESSURE_PA, air_properties, flat_plate_heat_coef,
    flat_plate_mass_coef, flat_plate_number, heat_coef_from_mass, mass_coef_from_heat,
};

fn assert_rel(actual: f64, expected: f64, rel: f64, what: &str) {
    let err = ((actual - expected) / expected).abs();
    assert!(
        err <= rel,
        "{what}: got {actual}, expected {expected} (relative error {err:e} > {rel:e})"
    );
}

/// Air given only by the properties a worked example states. The rest are NaN, so a result
/// that used any of them would be NaN and fail.
fn example_air(nu: f64, k: f64, pr: f64) -> AirProperties {
    AirProperties {
        density: f64::NAN,
        viscosity: f64::NAN,
        kinematic_viscosity: nu,
        conductivity: k,
        specific_heat: f64::NAN,
        vapour_diffusivity: f64::NAN,
        prandtl: pr,
        schmidt: f64::NAN,
    }
}

#[test]
fn som_example_7_2_mixed_boundary_layer() {
    // S.K. Som, Introduction to Heat Transfer, ch. 7, Example 7.2: air at 300 K, 30 m/s along a
    // 2 m plate; nu = 16.5e-6 m2/s, k = 0.026 W/(m K), Pr = 0.705. Re_L = 3.636e6, mixed
    // correlation: h = 65.79 W/(m2 K) (computed from the example's data and correlation).
    let air = example_air(16.5e-6, 0.026, 0.705);
    assert_rel(
        flat_plate_heat_coef(30.0, 2.0, &air),
        65.79,
        1e-3,
        "Som 7.2 h",
    );
}

#[test]
fn som_example_7_3_both_orientations() {
    // S.K. Som, Introduction to Heat Transfer, ch. 7, Example 7.3: air at 20 C, 5 m/s over a
    // 5 m x 1 m plate; nu = 2e-5 m2/s, k = 0.03 W/(m K), Pr = 0.706 (computed results):
    // (a) along the 5 m side, Re = 1.25e6 (mixed): h = 10.257 W/(m2 K);
    // (b) along the 1 m side, Re = 2.5e5 (laminar): h = 8.869 W/(m2 K).
    let air = example_air(2e-5, 0.03, 0.706);
    assert_rel(
        flat_plate_heat_coef(5.0, 5.0, &air),
        10.257,
        1e-3,
        "Som 7.3a h",
    );
    assert_rel(
        flat_plate_heat_coef(5.0, 1.0, &air),
        8.869,
        1e-3,
        "Som 7.3b h",
    );
    // Flow direction does not matter, only its speed.
    assert_eq!(
        flat_plate_heat_coef(-5.0, 1.0, &air),
        flat_plate_heat_coef(5.0, 1.0, &air)
    );
}

#[test]
fn laminar_and_mixed_correlations_meet_at_transition() {
    // 0.664 Re^(1/2) and 0.037 Re^(4/5) − 871 agree at Re = 5e5 within 0.1 % (Incropera &
    // DeWitt, ch. 7: the 871 is chosen so that they do).
    let below = flat_plate_number(CRITICAL_REYNOLDS * (1.0 - 1e-12), 0.7);
    let above = flat_plate_number(CRITICAL_REYNOLDS, 0.7);
    assert_rel(above, below, 1e-3, "Nu across the transition");
    assert_eq!(flat_plate_number(0.0, 0.7), 0.0);
}

#[test]
fn chilton_colburn_drying_air() {
    // Chilton–Colburn analogy h_m = h / (rho c_p Le^(2/3)) (Incropera & DeWitt §6.7) with air
    // near 300 K: rho = 1.1614 kg/m3, c_p = 1007 J/(kg K), alpha = 22.5e-6 m2/s,
    // D_AB = 0.26e-4 m2/s (handbook values from memory), Le = 0.865:
    // h = 25 W/(m2 K) gives h_m = 0.02354 m/s (computed).
    let (rho, cp, alpha, d_ab) = (1.1614, 1007.0, 22.5e-6, 0.26e-4);
    let air = AirProperties {
        density: rho,
        viscosity: f64::NAN,
        kinematic_viscosity: f64::NAN,
        conductivity: alpha * rho * cp,
        specific_heat: cp,
        vapour_diffusivity: d_ab,
        prandtl: f64::NAN,
        schmidt: f64::NAN,
    };
    let hm = mass_coef_from_heat(25.0, &air);
    assert_rel(hm, 0.02354, 2e-4, "h_m from h = 25");
    assert_rel(
        heat_coef_from_mass(hm, &air),
        25.0,
        1e-14,
        "h back from h_m",
    );
}

#[test]
fn air_properties_at_300_k() {
    // Air at 300 K and 1 atm, handbook values (from memory; Incropera & DeWitt Tables A.4 and
    // A.8), 2 % for remembered values and property fits:
    // rho 1.1614 kg/m3, c_p 1007 J/(kg K), mu 184.6e-7 Pa s, nu 15.89e-6 m2/s,
    // k 26.3e-3 W/(m K), alpha 22.5e-6 m2/s, Pr 0.707, D_AB(H2O–air) 0.26e-4 m2/s,
    // Sc 0.611, Le 0.865.
    let air = air_properties(300.0 - 273.15, STANDARD_PRESSURE_PA);
    let alpha = air.conductivity / (air.density * air.specific_heat);
    for (got, expected, name) in [
        (air.density, 1.1614, "density"),
        (air.specific_heat, 1007.0, "specific heat"),
        (air.viscosity, 184.6e-7, "viscosity"),
        (air.kinematic_viscosity, 15.89e-6, "kinematic viscosity"),
        (air.conductivity, 26.3e-3, "conductivity"),
        (alpha, 22.5e-6, "thermal diffusivity"),
        (air.prandtl, 0.707, "Prandtl"),
        (air.vapour_diffusivity, 0.26e-4, "vapour diffusivity"),
        (air.schmidt, 0.611, "Schmidt"),
        (alpha / air.vapour_diffusivity, 0.865, "Lewis"),
    ] {
        assert_rel(got, expected, 0.02, name);
    }
}

#[test]
fn air_properties_are_consistent() {
    let air = air_properties(70.0, 95_000.0);
    assert_rel(
        air.kinematic_viscosity,
        air.viscosity / air.density,
        1e-15,
        "nu",
    );
    assert_rel(
        air.prandtl,
        air.viscosity * air.specific_heat / air.conductivity,
        1e-15,
        "Pr",
    );
    assert_rel(
        air.schmidt,
        air.kinematic_viscosity / air.vapour_diffusivity,
        1e-15,
        "Sc",
    );
    // Ideal gas: density and vapour diffusivity scale with pressure as p and 1/p.
    let low = air_properties(70.0, 47_500.0);
    assert_rel(
        low.density,
        air.density / 2.0,
        1e-15,
        "density at half pressure",
    );
    assert_rel(
        low.vapour_diffusivity,
        air.vapour_diffusivity * 2.0,
        1e-15,
        "D_AB at half p",
    );
}

#[test]
fn plate_mass_coefficient_obeys_the_analogy() {
    // With Sh and Nu from the same correlation, Sh/Nu = (Sc/Pr)^(1/3), which is exactly the
    // Chilton–Colburn relation: both routes to h_m must agree for consistent properties.
    for (t, u, l) in [
        (20.0, 0.5, 0.1),
        (60.0, 3.0, 0.3),
        (90.0, 5.0, 2.0),
        (40.0, 20.0, 1.5),
    ] {
        let air = air_properties(t, STANDARD_PRESSURE_PA);
        let h = flat_plate_heat_coef(u, l, &air);
        let direct = flat_plate_mass_coef(u, l, &air);
        let via_h = mass_coef_from_heat(h, &air);
        assert_rel(
            direct,
            via_h,
            1e-12,
            &format!("h_m at {t} C, {u} m/s, {l} m"),
        );
    }
}
