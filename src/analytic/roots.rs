//! Eigenvalues of the series solutions: the positive roots of the transcendental equations of
//! Crank (1975) ch. 4-6, each found in an interval known to hold exactly one root, by Brent's
//! method (bisection safeguarded inverse interpolation) to a relative width of a few ulp.
//!
//! | shape | fixed surface | surface evaporation, Biot number L |
//! |---|---|---|
//! | slab | (n - 1/2) pi | beta tan beta = L, root n in ((n-1) pi, (n-1/2) pi) |
//! | cylinder | zeros of J0 | beta J1(beta) = L J0(beta), root n between zero n-1 of J1 and zero n of J0 |
//! | sphere | n pi | beta cot beta = 1 - L, root n in ((n-1) pi, (n-1/2) pi) for L < 1, ((n-1/2) pi, n pi) for L > 1 |
//!
//! The equations are written in forms without poles (e.g. `beta sin beta - L cos beta`), so the
//! sign change at the ends of each interval is known in advance and the root finder cannot fail.
//! A tiny Biot number gets a close bracket around its first root, ~ sqrt(L), sqrt(2L), sqrt(3L).

use super::{Shape, Surface};
use std::f64::consts::{FRAC_PI_2, PI};

/// Root of `f` in `[a, b]` by Brent's method, where `f(a)` has the sign of `sign_a` and `f(b)`
/// the opposite sign for the exact end points.
///
/// If the computed `f` at an end point has the wrong sign (or is 0), the root lies within the
/// rounding noise of that end point, which is then returned: this is what happens for a root
/// pressed against the end of its interval (huge or tiny Biot numbers). Stops when the bracket is
/// narrower than about four ulp of the root (at most 200 steps, far more than needed), so the
/// result is as accurate as `f` can be evaluated. NaN in, NaN out.
pub(crate) fn brent(f: impl Fn(f64) -> f64, mut a: f64, mut b: f64, sign_a: f64) -> f64 {
    let mut fa = f(a);
    let mut fb = f(b);
    if fa.is_nan() || fb.is_nan() {
        return f64::NAN;
    }
    if fa == 0.0 || (fa > 0.0) != (sign_a > 0.0) {
        return a;
    }
    if fb == 0.0 || (fb > 0.0) == (sign_a > 0.0) {
        return b;
    }
    let mut c = a;
    let mut fc = fa;
    let mut d = b - a;
    let mut e = d;
    for _ in 0..200 {
        if (fb > 0.0) == (fc > 0.0) {
            c = a;
            fc = fa;
            d = b - a;
            e = d;
        }
        if fc.abs() < fb.abs() {
            a = b;
            b = c;
            c = a;
            fa = fb;
            fb = fc;
            fc = fa;
        }
        let tol = 2.0 * f64::EPSILON * b.abs() + f64::MIN_POSITIVE;
        let m = 0.5 * (c - b);
        if m.abs() <= tol || fb == 0.0 {
            return b;
        }
        if e.abs() < tol || fa.abs() <= fb.abs() {
            d = m;
            e = m;
        } else {
            let s = fb / fa;
            let (mut p, mut q);
            if a == c {
                p = 2.0 * m * s;
                q = 1.0 - s;
            } else {
                let qa = fa / fc;
                let r = fb / fc;
                p = s * (2.0 * m * qa * (qa - r) - (b - a) * (r - 1.0));
                q = (qa - 1.0) * (r - 1.0) * (s - 1.0);
            }
            if p > 0.0 {
                q = -q;
            } else {
                p = -p;
            }
            if 2.0 * p < (3.0 * m * q - (tol * q).abs()).min((e * q).abs()) {
                e = d;
                d = p / q;
            } else {
                d = m;
                e = m;
            }
        }
        a = b;
        fa = fb;
        b += if d.abs() > tol { d } else { tol.copysign(m) };
        fb = f(b);
    }
    b
}

/// The n-th positive zero of J0 (n >= 1); NaN for n = 0.
///
/// The zero lies in ((n - 1/4) pi, (n - 1/8) pi) (McMahon: j ~ (n - 1/4) pi + 1/(8 (n - 1/4) pi)),
/// where J0 changes sign.
pub fn bessel_j0_zero(n: usize) -> f64 {
    if n == 0 {
        return f64::NAN;
    }
    let lo = (n as f64 - 0.25) * PI;
    let hi = (n as f64 - 0.125) * PI;
    // J0 has the sign (-1)^(n-1) just below its n-th zero.
    brent(libm::j0, lo, hi, alt(n - 1))
}

/// The n-th positive zero of J1 (n >= 1); 0 for n = 0 (J1(0) = 0).
///
/// The zero lies in ((n + 1/8) pi, (n + 1/4) pi) (McMahon: j ~ (n + 1/4) pi - 3/(8 (n + 1/4) pi)).
pub fn bessel_j1_zero(n: usize) -> f64 {
    if n == 0 {
        return 0.0;
    }
    let lo = (n as f64 + 0.125) * PI;
    let hi = (n as f64 + 0.25) * PI;
    brent(libm::j1, lo, hi, alt(n - 1))
}

/// `beta cot beta - 1`, by its Taylor series near 0 where the direct form loses digits.
fn beta_cot_minus_one(beta: f64) -> f64 {
    if beta.abs() < 0.1 {
        // x cot x = 1 - x^2/3 - x^4/45 - 2x^6/945 - x^8/4725 - 2x^10/93555 (standard series)
        let y = beta * beta;
        -y * (1.0 / 3.0
            + y * (1.0 / 45.0 + y * (2.0 / 945.0 + y * (1.0 / 4725.0 + y * 2.0 / 93555.0))))
    } else {
        beta * beta.cos() / beta.sin() - 1.0
    }
}

/// The Biot number of a surface, `+inf` for a fixed surface; NaN if it is not a valid number.
pub(crate) fn biot_of(surface: Surface) -> f64 {
    match surface {
        Surface::Fixed => f64::INFINITY,
        Surface::Evaporation { biot } if biot >= 0.0 => biot,
        Surface::Evaporation { .. } => f64::NAN,
    }
}

/// Below this Biot number the first root is bracketed by its small-L approximation.
const SMALL_BIOT: f64 = 0.01;

/// `(-1)^n` as a float.
fn alt(n: usize) -> f64 {
    if n.is_multiple_of(2) { 1.0 } else { -1.0 }
}

/// The n-th eigenvalue (n >= 1) for a Biot number `l` (>= 0, `+inf` = fixed surface).
///
/// For the cylinder, `j1_prev` is zero n-1 of J1 (zero 0 is 0) and `j0_this` zero n of J0:
/// the root lies between them, and at `j1_prev`, where J0 is largest, the sign of the equation
/// is clear even for a huge Biot number (at zero n-1 of J0 it would not be).
pub(crate) fn eigenvalue(shape: Shape, l: f64, n: usize, j1_prev: f64, j0_this: f64) -> f64 {
    let k = n as f64;
    if n == 1 && l < SMALL_BIOT {
        // The first root is ~ sqrt(c L), c = 1, 2, 3 (beta^2 = L (1 - L/3), 2L (1 - L/4),
        // 3L (1 - L/5) from the Taylor series): bracket it closely, or bisection from
        // [0, pi/2] would need hundreds of halvings for a tiny L.
        let c = match shape {
            Shape::Slab => 1.0,
            Shape::Cylinder => 2.0,
            Shape::Sphere => 3.0,
        };
        let hi = (c * l).sqrt();
        let lo = 0.9 * hi;
        return match shape {
            Shape::Slab => brent(|b| b * b.sin() - l * b.cos(), lo, hi, -1.0),
            Shape::Cylinder => brent(|b| b * libm::j1(b) - l * libm::j0(b), lo, hi, -1.0),
            Shape::Sphere => brent(|b| beta_cot_minus_one(b) + l, lo, hi, 1.0),
        };
    }
    match shape {
        Shape::Slab => {
            if l.is_infinite() {
                (k - 0.5) * PI
            } else {
                let lo = (k - 1.0) * PI;
                // f(lo) = -L cos((n-1) pi)
                brent(
                    |b| b * b.sin() - l * b.cos(),
                    lo,
                    lo + FRAC_PI_2,
                    -alt(n - 1),
                )
            }
        }
        Shape::Cylinder => {
            if l.is_infinite() {
                j0_this
            } else {
                // f = beta J1 - L J0 at zero n-1 of J1 is -L J0 there, of sign (-1)^n.
                brent(
                    |b| b * libm::j1(b) - l * libm::j0(b),
                    j1_prev,
                    j0_this,
                    alt(n),
                )
            }
        }
        Shape::Sphere => {
            if l.is_infinite() {
                k * PI
            } else if l == 1.0 {
                // beta cot beta = 0: the roots are exact.
                (k - 0.5) * PI
            } else if n == 1 && l < 1.0 {
                // Near 0 in the cot form, whose series keeps the digits of a root ~ sqrt(3L).
                brent(|b| beta_cot_minus_one(b) + l, 0.0, FRAC_PI_2, 1.0)
            } else {
                // The root is below (n - 1/2) pi for L < 1 and above it for L > 1; in both
                // intervals f = beta cos beta - (1 - L) sin beta starts with sign (-1)^(n-1).
                let mid = (k - 0.5) * PI;
                let (lo, hi) = if l < 1.0 {
                    ((k - 1.0) * PI, mid)
                } else {
                    (mid, k * PI)
                };
                brent(|b| b * b.cos() - (1.0 - l) * b.sin(), lo, hi, alt(n - 1))
            }
        }
    }
}

/// The first `count` eigenvalues `beta_n` of the series for `shape` and `surface`, increasing.
///
/// * slab: `beta tan beta = L`; fixed surface `(n - 1/2) pi`;
/// * cylinder: `beta J1(beta) = L J0(beta)`; fixed surface the zeros of J0;
/// * sphere: `beta cot beta = 1 - L`; fixed surface `n pi`.
///
/// (Crank 1975, ch. 4 p. 60, ch. 5 and ch. 6 p. 96; the same numbers as Incropera's `zeta_n`.)
/// `Evaporation { biot: f64::INFINITY }` is the fixed surface. With `biot = 0` the first root is
/// 0 (nothing is exchanged). A negative or NaN Biot number gives `count` NaNs.
pub fn eigenvalues(shape: Shape, surface: Surface, count: usize) -> Vec<f64> {
    let l = biot_of(surface);
    if l.is_nan() {
        return vec![f64::NAN; count];
    }
    (1..=count).map(|n| nth_eigenvalue(shape, l, n)).collect()
}

/// The n-th eigenvalue (n >= 1) for Biot number `l`, with the Bessel zeros it needs.
pub(crate) fn nth_eigenvalue(shape: Shape, l: f64, n: usize) -> f64 {
    if n == 0 || l.is_nan() || l < 0.0 {
        f64::NAN
    } else if shape == Shape::Cylinder {
        let j0_this = bessel_j0_zero(n);
        let j1_prev = if l.is_infinite() {
            0.0
        } else {
            bessel_j1_zero(n - 1)
        };
        eigenvalue(shape, l, n, j1_prev, j0_this)
    } else {
        eigenvalue(shape, l, n, 0.0, 0.0)
    }
}

/// Weight of the term `exp(-beta^2 T)` in `1 - Mt/Minf` (see [`Series`](super::Series)).
///
/// Written with `L/beta^2` and `beta^2/L` so that neither tiny nor huge Biot numbers over- or
/// underflow. `l = +inf` gives the fixed-surface weight, `l = 0` the weight 0; a negative or NaN
/// `l` gives NaN.
pub fn weight(shape: Shape, l: f64, beta: f64) -> f64 {
    if l.is_nan() || l < 0.0 {
        return f64::NAN;
    }
    let b2 = beta * beta;
    let m = match shape {
        Shape::Slab => 2.0,
        Shape::Cylinder => 4.0,
        Shape::Sphere => 6.0,
    };
    if l.is_infinite() {
        return m / b2;
    }
    if l == 0.0 {
        return 0.0;
    }
    let ratio = l / b2;
    match shape {
        Shape::Slab => m * ratio / (b2 / l + l + 1.0),
        Shape::Cylinder => m * ratio / (b2 / l + l),
        Shape::Sphere => m * ratio / (b2 / l + l - 1.0),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn brent_end_points_and_a_plain_root() {
        // A wrong sign at an end point means the root is at that end point.
        assert_eq!(brent(|x| x * x + 1.0, -1.0, 1.0, -1.0), -1.0);
        assert_eq!(brent(|x| x - 1.0, 1.0, 2.0, -1.0), 1.0);
        assert!(brent(|_| f64::NAN, 1.0, 2.0, -1.0).is_nan());
        let r = brent(|x: f64| x.cos() - x, 0.0, 1.0, 1.0);
        assert!((r.cos() - r).abs() < 1e-15);
    }

    #[test]
    fn bessel_zeros_fit_their_intervals() {
        for n in [1, 2, 10, 1000, 5000] {
            let z = bessel_j0_zero(n);
            assert!(z.is_finite());
            assert!(libm::j0(z).abs() < 1e-14, "n = {n}");
            let z = bessel_j1_zero(n);
            assert!(z.is_finite());
            assert!(libm::j1(z).abs() < 1e-14, "n = {n}");
        }
    }
}
