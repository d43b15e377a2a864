//! The diffusivity law D(X, T) = d_ref exp(b (X − X_ref)) exp(−Ea/R (1/T − 1/T_ref)).

use dampfront::physics::Diffusivity;

fn assert_rel(actual: f64, expected: f64, rel: f64, what: &str) {
    let err = ((actual - expected) / expected).abs();
    assert!(
        err <= rel,
        "{what}: got {actual}, expected {expected} (relative error {err:e} > {rel:e})"
    );
}

#[test]
fn constant_diffusivity() {
    let d = Diffusivity::constant(3e-10);
    assert_eq!(d.t_ref_c, 25.0);
    assert_eq!(
        (d.x_ref, d.activation_energy_j_mol, d.moisture_coef),
        (0.0, 0.0, 0.0)
    );
    assert!(d.is_constant());
    // No temperature term without an activation energy, even at an absurd temperature.
    for (x, t) in [(0.0, 25.0), (0.8, 90.0), (0.3, -273.15)] {
        assert_eq!(d.at(x, t), 3e-10);
        assert_eq!(d.slope_x(x, t), 0.0);
        assert_eq!(d.slope_t(x, t), 0.0);
    }
}

#[test]
fn arrhenius_factor_by_hand() {
    // Ea = 38 kJ/mol, T_ref = 60 C, at 80 C: Ea/R = 38000/8.314 = 4570.60 K,
    // 1/353.15 − 1/333.15 = −1.69995e-4 1/K, factor exp(0.776985) = 2.174874 (computed by hand).
    let d = Diffusivity {
        d_ref: 1e-9,
        t_ref_c: 60.0,
        x_ref: 0.0,
        activation_energy_j_mol: 38_000.0,
        moisture_coef: 0.0,
    };
    assert_rel(d.at(0.5, 80.0), 2.174874e-9, 1e-6, "D at 80 C");
    assert_eq!(d.at(0.5, 60.0), 1e-9);
    assert!(d.is_constant(), "b = 0 counts as constant whatever Ea is");
}

#[test]
fn arrhenius_reproduces_bound_water_table() {
    // Wood Handbook (2010) ch. 4 bound-water coefficient, D_BT = 7e-6 exp(−E_b/(R T)) m2/s with
    // E_b = 38.5 − 29 M kJ/mol (formula from memory); at M = 0.12 (E_b = 35.02 kJ/mol) it gives
    // 4.03e-12, 2.26e-11 and 4.63e-11 m2/s at 20, 60 and 80 C (computed, 3 figures).
    let e_b = 35_020.0;
    let d = Diffusivity {
        d_ref: 2.26e-11,
        t_ref_c: 60.0,
        x_ref: 0.12,
        activation_energy_j_mol: e_b,
        moisture_coef: 0.0,
    };
    assert_rel(d.at(0.12, 20.0), 4.03e-12, 5e-3, "D_BT at 20 C");
    assert_rel(d.at(0.12, 80.0), 4.63e-11, 5e-3, "D_BT at 80 C");
}

#[test]
fn moisture_factor_by_hand() {
    // b = 5, X − X_ref = 0.1: factor e^0.5 = 1.6487212707 (computed by hand).
    let d = Diffusivity {
        d_ref: 2e-10,
        t_ref_c: 25.0,
        x_ref: 0.2,
        activation_energy_j_mol: 0.0,
        moisture_coef: 5.0,
    };
    assert!(!d.is_constant());
    assert_rel(d.at(0.3, 40.0), 2e-10 * 1.6487212707, 1e-10, "D at X = 0.3");
    assert_eq!(d.at(0.2, 40.0), 2e-10);
}

#[test]
fn slopes_match_central_differences() {
    let d = Diffusivity {
        d_ref: 1.5e-10,
        t_ref_c: 50.0,
        x_ref: 0.3,
        activation_energy_j_mol: 30_000.0,
        moisture_coef: 3.5,
    };
    for (x, t) in [(0.1, 30.0), (0.4, 60.0), (1.2, 85.0)] {
        let hx = 1e-6;
        let fd_x = (d.at(x + hx, t) - d.at(x - hx, t)) / (2.0 * hx);
        assert_rel(d.slope_x(x, t), fd_x, 1e-8, "dD/dX");
        let ht = 1e-4;
        let fd_t = (d.at(x, t + ht) - d.at(x, t - ht)) / (2.0 * ht);
        assert_rel(d.slope_t(x, t), fd_t, 1e-7, "dD/dT");
    }
}

#[test]
fn validate_flags_bad_parameters() {
    assert!(Diffusivity::constant(1e-10).validate().is_empty());
    assert_eq!(Diffusivity::constant(0.0).validate().len(), 1);
    assert_eq!(Diffusivity::constant(f64::NAN).validate().len(), 1);
    let bad = Diffusivity {
        d_ref: -1.0,
        t_ref_c: -300.0,
        x_ref: f64::INFINITY,
        activation_energy_j_mol: f64::NAN,
        moisture_coef: f64::NEG_INFINITY,
    };
    assert_eq!(bad.validate().len(), 5, "{:?}", bad.validate());
}
