//! The one-term approximation of transient conduction as tabulated by Incropera & DeWitt,
//! *Fundamentals of Heat and Mass Transfer*, Table 5.1: the first eigenvalue `zeta_1` and the
//! coefficient `C1` of `theta* = C1 exp(-zeta_1^2 Fo) f(zeta_1 r)`.
//!
//! Their Bi uses the half-thickness or the radius, so it is Crank's `L` and `zeta_1` is `beta_1`.

use super::Shape;
use super::roots::nth_eigenvalue;

/// `(zeta_1, C1)` for the plane wall, infinite cylinder or sphere at Biot number `biot`
/// (Incropera & DeWitt, Table 5.1).
///
/// * wall: `zeta tan zeta = Bi`, `C1 = 4 sin z / (2z + sin 2z)`;
/// * cylinder: `zeta J1(zeta) / J0(zeta) = Bi`, `C1 = (2/z) J1(z) / (J0(z)^2 + J1(z)^2)`;
/// * sphere: `1 - zeta cot zeta = Bi`, `C1 = 4 (sin z - z cos z) / (2z - sin 2z)`.
///
/// `biot = +inf` gives the fixed-surface limit, `biot = 0` gives `(0, 1)`; a negative or NaN
/// Biot number gives `(NaN, NaN)`.
pub fn one_term_coefficient(shape: Shape, biot: f64) -> (f64, f64) {
    if biot.is_nan() || biot < 0.0 {
        return (f64::NAN, f64::NAN);
    }
    if biot == 0.0 {
        return (0.0, 1.0);
    }
    let z = nth_eigenvalue(shape, biot, 1);
    (z, coefficient(shape, z))
}

/// The coefficient C_n of the series term with eigenvalue `z` (the formulas above, valid for
/// every n; Incropera & DeWitt, eqs. 5.42, 5.50 and 5.51 with the exact series).
fn coefficient(shape: Shape, z: f64) -> f64 {
    match shape {
        Shape::Slab => 4.0 * z.sin() / (2.0 * z + (2.0 * z).sin()),
        Shape::Cylinder => {
            let (j0, j1) = (libm::j0(z), libm::j1(z));
            2.0 / z * j1 / (j0 * j0 + j1 * j1)
        }
        Shape::Sphere => {
            if z < 0.1 {
                // Both sides are ~z^3 here: their Taylor series, divided out.
                let y = z * z;
                let num = 1.0 - y / 10.0 + y * y / 280.0 - y * y * y / 15120.0;
                let den = 1.0 - y / 5.0 + 2.0 * y * y / 105.0 - y * y * y / 945.0;
                num / den
            } else {
                4.0 * (z.sin() - z * z.cos()) / (2.0 * z - (2.0 * z).sin())
            }
        }
    }
}

/// Centre temperature of a plane wall (half-thickness L), infinite cylinder or sphere (radius L)
/// suddenly exposed to a fluid through a surface coefficient, as the dimensionless
/// theta_0 = (T_centre - T_fluid) / (T_initial - T_fluid) at Fourier number `fo` = alpha t / L^2:
/// the exact series theta_0 = sum C_n exp(-zeta_n^2 Fo) (Incropera & DeWitt, Fundamentals of Heat
/// and Mass Transfer, 6th ed., eqs. 5.39, 5.47 and 5.48 before truncation), summed until the
/// terms fall below 1e-16. NaN for an invalid Biot number or a negative Fourier number.
pub fn conduction_centre_ratio(shape: Shape, biot: f64, fo: f64) -> f64 {
    if biot.is_nan() || biot <= 0.0 || fo.is_nan() || fo < 0.0 {
        return if biot == 0.0 && fo >= 0.0 {
            1.0
        } else {
            f64::NAN
        };
    }
    let mut sum = 0.0;
    for n in 1..=400 {
        let z = nth_eigenvalue(shape, biot, n);
        let term = coefficient(shape, z) * (-z * z * fo).exp();
        sum += term;
        // The decay factor falls faster than the coefficients alternate, except at Fo = 0,
        // where the series converges slowly; 400 terms hold it to ~1e-3 there.
        if fo > 0.0 && term.abs() < 1e-16 {
            break;
        }
    }
    sum
}
