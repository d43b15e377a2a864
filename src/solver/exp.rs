//! e^x in plain arithmetic, inlined, so that a loop over faces computes several at once: libm's
//! exponential is a call per value that the compiler cannot vectorise, and in a run with a
//! moisture-dependent diffusivity it was a seventh of the solve.
//!
//! The method is the usual one (Cody and Waite's reduction, as in fdlibm's `e_exp.c`):
//! x = k ln 2 + r with k the nearest integer to x / ln 2 and |r| <= ln 2 / 2, ln 2 split into a
//! high part with trailing zero bits (so k ln2_hi is exact) and a low part; then
//! e^x = 2^k e^r with e^r from its Taylor polynomial of degree 13 (by Estrin's scheme), whose truncation error,
//! (ln 2 / 2)^14 / 14! < 5e-18, is well below the last bit. The tests check it against the
//! standard library's `f64::exp` to within two units in the last place.

/// 1.5 x 2^52: adding it rounds a value below 2^51 to the nearest integer and leaves that integer
/// in the low bits of the sum.
const SHIFTER: f64 = 6_755_399_441_055_744.0;
/// ln 2 in two parts, fdlibm's ln2_hi (0x3fe62e42 fee00000, its last 21 bits zero) and ln2_lo.
const LN2_HI: f64 = f64::from_bits(0x3fe6_2e42_fee0_0000);
const LN2_LO: f64 = f64::from_bits(0x3dea_39ef_3579_3c76);
/// Above this e^x is taken as infinite (e^709 is within a factor 2.3 of the largest double),
/// below the next as zero (e^-708 is at the edge of the subnormal numbers).
const HIGHEST: f64 = 709.0;
const LOWEST: f64 = -708.0;

/// e^x: within two units in the last place of the exact value for -708 <= x <= 709, infinite
/// above, zero below, NaN for NaN.
#[inline(always)]
pub fn exp(x: f64) -> f64 {
    let xc = x.clamp(LOWEST, HIGHEST);
    // (No mul_add: without a target FMA it is a libm call.)
    let t = xc * std::f64::consts::LOG2_E + SHIFTER;
    let k = t - SHIFTER;
    let r = (xc - k * LN2_HI) - k * LN2_LO;
    // The Taylor polynomial by Estrin's scheme: pairs, then pairs of pairs, so that its
    // multiplications do not wait on each other in one long chain as in Horner's rule.
    let r2 = r * r;
    let r4 = r2 * r2;
    let pair = |lo: f64, hi: f64| lo + hi * r;
    let low = (pair(1.0, 1.0) + pair(1.0 / 2.0, 1.0 / 6.0) * r2)
        + (pair(1.0 / 24.0, 1.0 / 120.0) + pair(1.0 / 720.0, 1.0 / 5_040.0) * r2) * r4;
    let high = (pair(1.0 / 40_320.0, 1.0 / 362_880.0)
        + pair(1.0 / 3_628_800.0, 1.0 / 39_916_800.0) * r2)
        + pair(1.0 / 479_001_600.0, 1.0 / 6_227_020_800.0) * r4;
    let p = low + high * (r4 * r4);
    // 2^k from k in the low bits of t: shifting them into the exponent field drops the rest.
    let scale = f64::from_bits(t.to_bits().wrapping_add(1023) << 52);
    let y = p * scale;
    let y = if x > HIGHEST { f64::INFINITY } else { y };
    if x < LOWEST { 0.0 } else { y }
}

#[cfg(test)]
mod tests {
    use super::exp;

    const LOW: f64 = -708.0;
    const HIGH: f64 = 709.0;

    /// Distance in units of the last place between two positive finite doubles.
    fn ulps(a: f64, b: f64) -> u64 {
        a.to_bits().abs_diff(b.to_bits())
    }

    #[test]
    fn agrees_with_the_standard_exponential_to_two_ulps() {
        // The reference: Rust's own f64::exp (the platform's libm), over the whole range and
        // densely near 0 where diffusivity exponents live.
        let mut worst = 0;
        let n = 400_000;
        for i in 0..=n {
            let f = f64::from(i) / f64::from(n);
            for x in [LOW + f * (HIGH - LOW), -20.0 + 40.0 * f, -0.7 + 1.4 * f] {
                let u = ulps(exp(x), x.exp());
                assert!(u <= 2, "exp({x}) = {} against {}", exp(x), x.exp());
                worst = worst.max(u);
            }
        }
        println!("largest difference: {worst} ulp");
    }

    #[test]
    fn exact_points_and_the_edges() {
        assert_eq!(exp(0.0), 1.0);
        assert_eq!(exp(-0.0), 1.0);
        assert_eq!(exp(1000.0), f64::INFINITY);
        assert_eq!(exp(f64::INFINITY), f64::INFINITY);
        assert_eq!(exp(-1000.0), 0.0);
        assert_eq!(exp(f64::NEG_INFINITY), 0.0);
        assert!(exp(f64::NAN).is_nan());
        // The ends of the range are finite and the reduction's integer reaches 1023 and -1021.
        assert!(exp(709.0).is_finite() && exp(709.0) > 8.2e307);
        assert!(exp(-708.0) > 3.3e-308 && exp(-708.0) < 3.4e-308);
    }
}
