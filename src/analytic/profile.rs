//! Concentration profile across a plane sheet (thickness `2l`, both faces exposed), as
//! `(C - C0) / (C_inf - C0)` against `xi = x / l` in `[-1, 1]` from the mid-plane.
//!
//! * Fixed surface, Crank (1975) p. 47: for `T >= 0.1` the Fourier series
//!   `1 - (4/pi) sum_n (-1)^n / (2n+1) exp(-(2n+1)^2 pi^2 T / 4) cos((2n+1) pi xi / 2)`,
//!   below it the equivalent sum of error functions
//!   `sum_n (-1)^n [erfc(((2n+1) - xi) / (2 sqrt T)) + erfc(((2n+1) + xi) / (2 sqrt T))]`
//!   (both are exact; each needs only a few terms where it is used).
//! * Surface evaporation, Crank ch. 4 (p. 60 for the uptake):
//!   `1 - sum_n 2 L cos(beta_n xi) exp(-beta_n^2 T) / ((beta_n^2 + L^2 + L) cos beta_n)`
//!   for `T >= 0.02`; below it the semi-infinite solid with surface evaporation, one term for
//!   each face, `erfc(u) - exp(L s + L^2 T) erfc(u + L sqrt T)` at depth `s = 1 -+ xi` with
//!   `u = s / (2 sqrt T)` (Crank ch. 2, from memory), which leaves out terms of order
//!   `exp(-1/T)`; it is evaluated as `exp(-u^2) [erfcx(u) - erfcx(u + L sqrt T)]`.
//!
//! Absolute accuracy about 1e-13 at every `T > 0` (the tests check 1e-12 against both series
//! summed directly with 20 000 terms).

use super::roots::{biot_of, nth_eigenvalue};
use super::special::erfcx;
use super::{Shape, Surface};
use std::f64::consts::PI;

/// Below this `T` the fixed-surface profile is summed as error functions.
const FIXED_SHORT: f64 = 0.1;
/// Below this `T` the evaporation profile uses the two semi-infinite solutions.
const EVAPORATION_SHORT: f64 = 0.02;
/// Terms whose exponent exceeds this (in `exp(-...)`) are below 2e-22 and left out.
const CUTOFF: f64 = 50.0;

/// Scaled concentration `(C - C0)/(C_inf - C0)` in a sheet at `T = D t / l^2` and `xi = x / l`.
///
/// Returns NaN for a NaN or negative `t`, a NaN `xi` or `|xi| > 1`, or an invalid Biot number.
/// At `T = 0` the profile is the initial 0 (and 1 on a fixed surface, `|xi| = 1`); for
/// `T = +inf` it is 1 (0 for a Biot number of 0, which exchanges nothing).
pub fn slab_profile(surface: Surface, t: f64, xi: f64) -> f64 {
    let l = biot_of(surface);
    if t.is_nan() || t < 0.0 || xi.is_nan() || xi.abs() > 1.0 || l.is_nan() {
        return f64::NAN;
    }
    if l == 0.0 {
        return 0.0;
    }
    if t == 0.0 {
        return if l.is_infinite() && xi.abs() == 1.0 {
            1.0
        } else {
            0.0
        };
    }
    if t.is_infinite() {
        return 1.0;
    }
    if l.is_infinite() {
        if t < FIXED_SHORT {
            fixed_short(t, xi)
        } else {
            fixed_series(t, xi)
        }
    } else if t < EVAPORATION_SHORT {
        semi_infinite(l, t, 1.0 - xi) + semi_infinite(l, t, 1.0 + xi)
    } else {
        evaporation_series(l, t, xi)
    }
}

fn fixed_series(t: f64, xi: f64) -> f64 {
    let mut sum = 0.0;
    let mut n = 0u32;
    loop {
        let k = (2 * n + 1) as f64;
        let exponent = k * k * PI * PI * t / 4.0;
        if exponent > CUTOFF {
            break;
        }
        let sign = if n.is_multiple_of(2) { 1.0 } else { -1.0 };
        sum += sign / k * (-exponent).exp() * (k * PI * xi / 2.0).cos();
        n += 1;
    }
    1.0 - 4.0 / PI * sum
}

fn fixed_short(t: f64, xi: f64) -> f64 {
    let w = 2.0 * t.sqrt();
    let mut sum = 0.0;
    let mut n = 0u32;
    loop {
        let k = (2 * n + 1) as f64;
        // The nearer image, (k - |xi|), decides when the terms are negligible.
        let near = (k - xi.abs()) / w;
        if near * near > CUTOFF {
            break;
        }
        let sign = if n.is_multiple_of(2) { 1.0 } else { -1.0 };
        sum += sign * (libm::erfc((k - xi) / w) + libm::erfc((k + xi) / w));
        n += 1;
    }
    sum
}

/// Semi-infinite solid with surface evaporation, at depth `s` (in units of `l`) below the face.
fn semi_infinite(l: f64, t: f64, s: f64) -> f64 {
    let u = s / (2.0 * t.sqrt());
    // erfc(u) - exp(L s + L^2 T) erfc(u + L sqrt T) = exp(-u^2) [erfcx(u) - erfcx(u + L sqrt T)]:
    // no overflow, and never below 0 deep inside, where both terms are nearly equal.
    (-u * u).exp() * (erfcx(u) - erfcx(u + l * t.sqrt())).max(0.0)
}

fn evaporation_series(l: f64, t: f64, xi: f64) -> f64 {
    let mut sum = 0.0;
    let mut n = 1usize;
    loop {
        let beta = nth_eigenvalue(Shape::Slab, l, n);
        if beta * beta * t > CUTOFF || !beta.is_finite() {
            break;
        }
        // cos(beta_n) from beta tan beta = L, to keep its digits when it is tiny (large L):
        // cos = (-1)^(n-1) beta / sqrt(beta^2 + L^2), written with beta / L.
        let sign = if n % 2 == 1 { 1.0 } else { -1.0 };
        let q = beta / l;
        let cos_beta = sign * q / (q * q + 1.0).sqrt();
        // 2L / ((beta^2 + L^2 + L) cos beta), without forming L^2
        let coeff = 2.0 / ((beta * q + l + 1.0) * cos_beta);
        sum += coeff * (beta * xi).cos() * (-beta * beta * t).exp();
        n += 1;
    }
    1.0 - sum
}
