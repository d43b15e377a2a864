//! Saturation pressure, humidity and latent heat against standards and handbook values.

use dampfront::physics::{
    STANDARD_PRESSURE_PA, humidity_ratio_from_rh, humidity_ratio_from_wet_bulb, latent_heat_j_kg,
    rh_from_wet_bulb, saturation_pressure_pa, saturation_pressure_slope_pa_k, vapour_density_kg_m3,
};

fn assert_rel(actual: f64, expected: f64, rel: f64, what: &str) {
    let err = ((actual - expected) / expected).abs();
    assert!(
        err <= rel,
        "{what}: got {actual}, expected {expected} (relative error {err:e} > {rel:e})"
    );
}

fn assert_abs(actual: f64, expected: f64, tol: f64, what: &str) {
    assert!(
        (actual - expected).abs() <= tol,
        "{what}: got {actual}, expected {expected} +- {tol}"
    );
}

#[test]
fn if97_region4_at_kiln_temperatures() {
    // IAPWS-IF97 region 4 (IAPWS R7-97, eq. 30) evaluated with the R7-97 constants, Pa,
    // printed to 0.01 Pa. Relative 1e-6, except that a value printed to 0.01 Pa cannot be
    // better than half that last digit (2e-6 relative at 20 C).
    for (t_c, p_ref) in [
        (20.0, 2339.21_f64),
        (40.0, 7384.43),
        (60.0, 19945.80),
        (80.0, 47414.72),
        (100.0, 101417.98),
    ] {
        let tol = (1e-6 * p_ref).max(0.005);
        assert_abs(
            saturation_pressure_pa(t_c),
            p_ref,
            tol,
            &format!("p_sat({t_c} C)"),
        );
    }
}

#[test]
fn if97_verification_values() {
    // IAPWS R7-97 (IAPWS-IF97), verification values for the region-4 saturation-pressure
    // equation, in MPa at T = 300, 500, 600 K.
    for (t_k, p_mpa) in [
        (300.0, 0.353658941e-2),
        (500.0, 0.263889776e1),
        (600.0, 0.123443146e2),
    ] {
        let p = saturation_pressure_pa(t_k - 273.15) / 1e6;
        assert_rel(p, p_mpa, 1e-8, &format!("IF97 p_sat({t_k} K)"));
    }
}

#[test]
fn ashrae_table_3_over_water() {
    // ASHRAE Handbook—Fundamentals 2017, ch. 1, Table 3 (saturation pressure over liquid
    // water), Pa; within 0.01 %.
    for (t_c, p_ref) in [
        (5.0, 872.6),
        (25.0, 3169.7),
        (50.0, 12351.3),
        (100.0, 101418.0),
        (150.0, 476101.4),
    ] {
        assert_rel(
            saturation_pressure_pa(t_c),
            p_ref,
            1e-4,
            &format!("p_sat({t_c} C)"),
        );
    }
}

#[test]
fn ashrae_table_3_over_ice() {
    // ASHRAE Handbook—Fundamentals 2017, ch. 1, Table 3 (over ice), Pa. ASHRAE states its
    // Hyland–Wexler formula is within 300 ppm of the tabulated values.
    for (t_c, p_ref) in [(-20.0, 103.24), (-5.0, 401.74)] {
        assert_rel(
            saturation_pressure_pa(t_c),
            p_ref,
            3e-4,
            &format!("p_sat({t_c} C)"),
        );
    }
}

#[test]
fn saturation_pressure_branches_meet_and_clamp() {
    // Ice and liquid branches at 0 C: 611.15 Pa (Hyland–Wexler) against 611.21 Pa (IF97).
    let below = saturation_pressure_pa(-1e-9);
    let above = saturation_pressure_pa(0.0);
    assert_rel(below, above, 2e-4, "p_sat either side of 0 C");
    // Held at the critical pressure 22.064 MPa (IAPWS) above the critical temperature.
    assert_rel(
        saturation_pressure_pa(373.946),
        22.064e6,
        1e-6,
        "p_sat at the critical point",
    );
    assert_eq!(
        saturation_pressure_pa(500.0),
        saturation_pressure_pa(373.946)
    );
    // Held at its -100 C value below the Hyland–Wexler range.
    assert_eq!(
        saturation_pressure_pa(-150.0),
        saturation_pressure_pa(-100.0)
    );
    // Rising throughout.
    let mut prev = 0.0;
    for i in 0..=470 {
        let t = -100.0 + i as f64;
        let p = saturation_pressure_pa(t);
        assert!(p > prev, "p_sat not rising at {t} C");
        prev = p;
    }
}

#[test]
fn saturation_pressure_slope_matches_finite_difference() {
    for t in [
        -40.0, -5.0, 2.0, 20.0, 45.0, 80.0, 100.0, 150.0, 250.0, 350.0,
    ] {
        let dt = 1e-4;
        let fd = (saturation_pressure_pa(t + dt) - saturation_pressure_pa(t - dt)) / (2.0 * dt);
        assert_rel(
            saturation_pressure_slope_pa_k(t),
            fd,
            1e-6,
            &format!("dp_sat/dT at {t} C"),
        );
    }
    // Clausius–Clapeyron check (ideal vapour, liquid volume neglected): dp/dT ≈ L p / (R_v T²);
    // near 20 C the neglected terms are below 0.5 %.
    let t_k = 293.15;
    let cc = latent_heat_j_kg(20.0) * saturation_pressure_pa(20.0) / (461.5 * t_k * t_k);
    assert_rel(
        saturation_pressure_slope_pa_k(20.0),
        cc,
        5e-3,
        "Clausius–Clapeyron at 20 C",
    );
}

#[test]
fn vapour_density_of_saturated_steam() {
    // Saturated vapour at 20 C: specific volume 57.76 m3/kg in the steam tables (from memory),
    // i.e. 0.01731 kg/m3; the ideal gas is 0.13 % below the real gas there.
    let rho = vapour_density_kg_m3(saturation_pressure_pa(20.0), 20.0);
    assert_rel(rho, 1.0 / 57.76, 5e-3, "saturated vapour density at 20 C");
}

#[test]
fn humidity_ratio_from_relative_humidity() {
    // PsychroLib test suite (tests/test_psychrolib_si.py, value computed there from the ASHRAE
    // 2017 ch. 1 relation): W = 0.0213603998 at p_w = 3169.7 Pa (saturation at 25 C, ASHRAE
    // Table 3) and p = 95461 Pa. Our p_sat(25 C) is 3169.75 Pa, 1.5e-5 higher.
    assert_rel(
        humidity_ratio_from_rh(25.0, 1.0, 95_461.0),
        0.0213603998047487,
        1e-4,
        "W",
    );
    // RH is clamped to [0, 1].
    assert_eq!(
        humidity_ratio_from_rh(25.0, 1.5, 95_461.0),
        humidity_ratio_from_rh(25.0, 1.0, 95_461.0)
    );
    assert_eq!(humidity_ratio_from_rh(25.0, -0.2, 95_461.0), 0.0);
    // Saturated air above the boiling point is pure vapour.
    assert!(humidity_ratio_from_rh(120.0, 1.0, STANDARD_PRESSURE_PA).is_infinite());
}

#[test]
fn humidity_ratio_from_wet_bulb_matches_reference_computation() {
    // PsychroLib test suite (tests/test_psychrolib_si.py, computed there from ASHRAE HoF 2017
    // ch. 1 eqs. 33 and 35), p = 95461 Pa; relative 3e-4 as in that suite.
    let above = humidity_ratio_from_wet_bulb(30.0, 25.0, 95_461.0);
    assert_rel(above, 0.0192281274241096, 3e-4, "W(30 C, wet bulb 25 C)");
    let below = humidity_ratio_from_wet_bulb(-1.0, -5.0, 95_461.0);
    assert_rel(below, 0.00120399819933844, 3e-4, "W(-1 C, wet bulb -5 C)");
}

#[test]
fn ashrae_example_1() {
    // ASHRAE Handbook—Fundamentals 2017, ch. 1, Example 1: 40 C dry bulb, 20 C wet bulb,
    // 101.325 kPa gives W = 0.0065 and RH = 14 %. The handbook takes W*s from its Table 2, which
    // includes the enhancement factor (about 0.4 % higher), so W is checked to +-0.0001.
    let w = humidity_ratio_from_wet_bulb(40.0, 20.0, STANDARD_PRESSURE_PA);
    assert_abs(w, 0.0065, 1e-4, "W in ASHRAE example 1");
    let rh = rh_from_wet_bulb(40.0, 20.0, STANDARD_PRESSURE_PA);
    assert_abs(rh, 0.14, 0.01, "RH in ASHRAE example 1");
}

#[test]
fn psychrometric_chart_point() {
    // Sea-level psychrometric chart: 25 C dry bulb with 20 C wet bulb lies near the 63 % RH
    // line (from memory; +-2 % RH for reading a chart).
    let rh = rh_from_wet_bulb(25.0, 20.0, STANDARD_PRESSURE_PA);
    assert_abs(rh, 0.63, 0.02, "RH at 25/20 C");
}

#[test]
fn wet_bulb_equal_to_dry_bulb_is_saturated() {
    // At saturation the wet bulb equals the dry bulb (definition of the thermodynamic wet bulb).
    for t in [5.0, 20.0, 45.0, 70.0, 90.0] {
        assert_abs(
            rh_from_wet_bulb(t, t, STANDARD_PRESSURE_PA),
            1.0,
            1e-12,
            "RH at t* = t",
        );
    }
}

#[test]
fn wet_bulb_round_trip_satisfies_energy_balance() {
    // Adiabatic saturation, per kg dry air (ASHRAE HoF ch. 1): air at (t, W) plus liquid water
    // (W*s − W) at t* leaves saturated at t*:
    //   h(t, W) + (W*s − W) h_w(t*) = h(t*, W*s),
    //   h(t, W) = 1.006 t + W (2501 + 1.86 t) kJ/kg, h_w(t*) = 4.186 t* kJ/kg.
    // RH comes from the wet bulb; W is then recomputed from RH alone and must close the balance.
    let p = STANDARD_PRESSURE_PA;
    let h = |t: f64, w: f64| 1.006 * t + w * (2501.0 + 1.86 * t);
    for t in [30.0, 45.0, 60.0, 75.0, 90.0] {
        for depression in [1.0, 5.0, 10.0, 15.0] {
            let ts = t - depression;
            let rh = rh_from_wet_bulb(t, ts, p);
            assert!(rh > 0.0 && rh < 1.0, "RH {rh} at {t}/{ts}");
            let w = humidity_ratio_from_rh(t, rh, p);
            let ws = humidity_ratio_from_rh(ts, 1.0, p);
            let lhs = h(t, w) + (ws - w) * 4.186 * ts;
            let rhs = h(ts, ws);
            assert_rel(lhs, rhs, 1e-10, &format!("energy balance at {t}/{ts} C"));
        }
    }
}

#[test]
fn wet_bulb_clamps() {
    // A depression too large for any air gives W < 0: RH is clamped to 0.
    assert_eq!(rh_from_wet_bulb(100.0, 10.0, STANDARD_PRESSURE_PA), 0.0);
    // A wet bulb above the dry bulb is impossible air: clamped to 1.
    assert_eq!(rh_from_wet_bulb(30.0, 35.0, STANDARD_PRESSURE_PA), 1.0);
    // Wet bulb at or above the boiling point: saturated (superheated-steam drying).
    assert_eq!(rh_from_wet_bulb(150.0, 101.0, STANDARD_PRESSURE_PA), 1.0);
}

#[test]
fn latent_heat_against_steam_tables() {
    // Saturated-water steam tables based on IAPWS-95, h_fg in kJ/kg (from memory);
    // 0.05 % allows for a remembered last digit.
    for (t_c, h_fg) in [
        (0.01, 2500.9),
        (25.0, 2441.7),
        (50.0, 2382.0),
        (100.0, 2256.4),
        (150.0, 2113.8),
    ] {
        assert_rel(
            latent_heat_j_kg(t_c) / 1e3,
            h_fg,
            5e-4,
            &format!("h_fg({t_c} C)"),
        );
    }
    // Vanishes at the critical point and is held at the triple point below it.
    assert_eq!(latent_heat_j_kg(400.0), 0.0);
    assert_eq!(latent_heat_j_kg(-10.0), latent_heat_j_kg(0.01));
}

#[test]
fn nan_in_nan_out() {
    // A missing value must not turn into a plausible number.
    assert!(saturation_pressure_pa(f64::NAN).is_nan());
    assert!(saturation_pressure_slope_pa_k(f64::NAN).is_nan());
    assert!(latent_heat_j_kg(f64::NAN).is_nan());
    assert!(rh_from_wet_bulb(f64::NAN, 20.0, STANDARD_PRESSURE_PA).is_nan());
    assert!(rh_from_wet_bulb(40.0, f64::NAN, STANDARD_PRESSURE_PA).is_nan());
}
