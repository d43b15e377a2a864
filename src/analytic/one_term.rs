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
    let c1 = match shape {
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
    };
    (z, c1)
}
