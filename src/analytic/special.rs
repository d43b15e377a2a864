//! Special functions the series need beyond `libm`: the scaled complementary error function,
//! the first integral of `erfc`, and two smooth combinations of them used by the short-time forms.
//!
//! `libm` has `erfc` but no `erfcx`; `exp(x^2) erfc(x)` overflows and loses digits for large `x`,
//! so large arguments go through the classical continued fraction instead.

use std::f64::consts::PI;

/// 1/sqrt(pi).
pub(crate) const FRAC_1_SQRT_PI: f64 = 0.564_189_583_547_756_3;

/// Number of partial denominators of the erfc continued fraction: at x >= 2 this is converged far
/// below one ulp (the fraction converges faster as x grows).
const CF_TERMS: usize = 120;

/// Tail `K_j` of the continued fraction `erfc(x) = exp(-x^2)/sqrt(pi) / K_1`, with
/// `K_j = x + (j/2) / K_{j+1}`. Returns `(K_1, K_2)`; only used for x >= 2.
fn erfc_cf(x: f64) -> (f64, f64) {
    let mut k = x;
    for j in (2..=CF_TERMS).rev() {
        k = x + 0.5 * j as f64 / k;
    }
    // k is now K_2.
    (x + 0.5 / k, k)
}

/// Scaled complementary error function `erfcx(x) = exp(x^2) erfc(x)`, for all real `x`
/// (overflows to infinity below about x = -26.6, as the true value does).
pub fn erfcx(x: f64) -> f64 {
    if x.is_nan() {
        f64::NAN
    } else if x < 0.0 {
        2.0 * (x * x).exp() - erfcx(-x)
    } else if x < 2.0 {
        (x * x).exp() * libm::erfc(x)
    } else if x.is_infinite() {
        0.0
    } else {
        let (k1, _) = erfc_cf(x);
        FRAC_1_SQRT_PI / k1
    }
}

/// First repeated integral of erfc: `ierfc(x) = exp(-x^2)/sqrt(pi) - x erfc(x)`, for x >= 0.
///
/// For x >= 2 the difference is formed inside the continued fraction, which avoids the
/// cancellation of the two terms.
pub fn ierfc(x: f64) -> f64 {
    if x < 2.0 {
        (-x * x).exp() * FRAC_1_SQRT_PI - x * libm::erfc(x)
    } else if x.is_infinite() {
        0.0
    } else {
        // 1/sqrt(pi) - x/(sqrt(pi) K1) = (K1 - x)/(sqrt(pi) K1) = (1/2)/(sqrt(pi) K1 K2)
        let (k1, k2) = erfc_cf(x);
        (-x * x).exp() * 0.5 * FRAC_1_SQRT_PI / (k1 * k2)
    }
}

/// `sum_{k >= k0} (-x)^(k - k0) / Gamma(k/2 + 1)`: the power series of F (k0 = 2, times x^2)
/// and of G (k0 = 3); used for |x| < 1, where it converges fast and has no cancellation.
fn shifted_series(x: f64, k0: usize) -> f64 {
    // Gamma(k/2 + 1) by the recursion Gamma(s + 1) = s Gamma(s), separately for even and odd k.
    let mut gamma = [1.0, 0.5 * PI.sqrt()]; // Gamma(1), Gamma(3/2)
    for k in 2..k0 {
        gamma[k % 2] *= k as f64 / 2.0;
    }
    let mut sum = 0.0;
    let mut power = 1.0; // (-x)^(k - k0)
    for k in k0..k0 + 60 {
        if k >= 2 {
            gamma[k % 2] *= k as f64 / 2.0;
        }
        let term = power / gamma[k % 2];
        sum += term;
        if term.abs() < 1e-18 * sum.abs() {
            break;
        }
        power *= -x;
    }
    sum
}

/// `F(x) = erfcx(x) - 1 + 2x/sqrt(pi)` (a series `x^2 - 4x^3/(3 sqrt(pi)) + ...` near 0).
///
/// `F(L sqrt(T)) / L` is the fraction taken up through one face of a semi-infinite body with
/// surface evaporation, in the units of the plane sheet.
pub fn uptake_f(x: f64) -> f64 {
    if x.abs() < 1.0 {
        shifted_series(x, 2) * x * x
    } else {
        erfcx(x) - 1.0 + 2.0 * x * FRAC_1_SQRT_PI
    }
}

/// `G(x) = (x^2 - F(x)) / x^3`, smooth through x = 0 where it equals `1/Gamma(5/2)`.
pub fn uptake_g(x: f64) -> f64 {
    if x.abs() < 1.0 {
        shifted_series(x, 3)
    } else {
        (x * x - uptake_f(x)) / (x * x * x)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn erfcx_matches_direct_form_where_that_is_accurate() {
        // exp(x^2) erfc(x) is accurate to about x^2 ulp; compare across the switch at x = 2.
        for i in 0..=40 {
            let x = 1.5 + 0.1 * i as f64;
            let direct = (x * x).exp() * libm::erfc(x);
            let rel = (erfcx(x) - direct).abs() / direct;
            assert!(rel < 2e-14, "x = {x}: rel {rel:e}");
        }
    }

    #[test]
    fn erfcx_large_argument_asymptotics() {
        // erfcx(x) ~ 1/(x sqrt(pi)) (1 - 1/(2x^2) + 3/(4x^4) - 15/(8x^6)), standard asymptotics.
        // At x >= 100 the next term, 105/(16 x^8), is below 1e-15.
        for &x in &[100.0, 1e4, 1e8] {
            let y: f64 = 1.0 / (x * x);
            let asym = FRAC_1_SQRT_PI / x * (1.0 - 0.5 * y + 0.75 * y * y - 1.875 * y * y * y);
            assert!((erfcx(x) / asym - 1.0).abs() < 1e-14);
        }
    }

    #[test]
    fn ierfc_small_values() {
        // ierfc(0) = 1/sqrt(pi); continuity at the switch x = 2, where ierfc' = -erfc.
        assert!((ierfc(0.0) - FRAC_1_SQRT_PI).abs() < 1e-16);
        let h = 1e-9;
        let below = ierfc(2.0 - h) - h * libm::erfc(2.0);
        let above = ierfc(2.0);
        assert!((below / above - 1.0).abs() < 1e-11);
    }

    #[test]
    fn f_and_g_are_continuous_at_the_series_switch() {
        for &x in &[-1.0, 1.0] {
            let eps = 1e-12;
            let inner = uptake_f(x * (1.0 - eps));
            let outer = uptake_f(x);
            assert!((inner / outer - 1.0).abs() < 1e-11, "F at {x}");
            let inner = uptake_g(x * (1.0 - eps));
            let outer = uptake_g(x);
            assert!((inner / outer - 1.0).abs() < 1e-11, "G at {x}");
        }
        // G(0) = 1/Gamma(5/2) = 4/(3 sqrt(pi)).
        assert!((uptake_g(0.0) - 4.0 / 3.0 * FRAC_1_SQRT_PI).abs() < 1e-15);
    }
}
