//! Sums over the cells with four running totals. A plain loop's running total waits for each
//! addition before the next (floating-point addition is not reassociated by the compiler), so on
//! the solver's 10-300 cells the latency of those additions, not the arithmetic, sets the time;
//! four totals let four additions overlap. The results differ from a plain loop's by rounding.

/// Sum of `a`.
pub fn sum(a: &[f64]) -> f64 {
    sum_of_pairs(a, a, |x, _| x)
}

/// Sum of `a[i] b[i]` over the shorter of the two.
pub fn dot(a: &[f64], b: &[f64]) -> f64 {
    sum_of_pairs(a, b, |x, y| x * y)
}

/// Sum of `w[i] e[i]²` over the shorter of the two.
pub fn weighted_squares(w: &[f64], e: &[f64]) -> f64 {
    sum_of_pairs(w, e, |x, y| x * y * y)
}

/// Sum of `term(a[i], b[i])` over the shorter of the two, with four running totals.
#[inline]
fn sum_of_pairs(a: &[f64], b: &[f64], term: impl Fn(f64, f64) -> f64) -> f64 {
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut lanes = [0.0; 4];
    let (ca, cb) = (a.chunks_exact(4), b.chunks_exact(4));
    let tail: f64 = (ca.remainder().iter().zip(cb.remainder()))
        .map(|(&x, &y)| term(x, y))
        .sum();
    for (x, y) in ca.zip(cb) {
        for ((l, &p), &q) in lanes.iter_mut().zip(x).zip(y) {
            *l += term(p, q);
        }
    }
    (lanes[0] + lanes[1]) + (lanes[2] + lanes[3]) + tail
}

/// Largest `|v[i]| s[i]` over the shorter of the two; NaN when any term is NaN.
pub fn max_abs_scaled(v: &[f64], s: &[f64]) -> f64 {
    max_of_pairs(v, s, |x, y| x.abs() * y)
}

/// Largest `|v[i]|`; NaN when any value is NaN.
pub fn max_abs(v: &[f64]) -> f64 {
    max_of_pairs(v, v, |x, _| x.abs())
}

/// Largest `term(a[i], b[i])` (terms >= 0) with four running maxima; NaN when any term is NaN
/// (`f64::max` would skip a NaN, and its comparisons would run one after another).
#[inline]
fn max_of_pairs(a: &[f64], b: &[f64], term: impl Fn(f64, f64) -> f64) -> f64 {
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut lanes = [0.0_f64; 4];
    let mut nan = false;
    let mut take = |lane: &mut f64, t: f64| {
        nan |= t.is_nan();
        if t > *lane {
            *lane = t;
        }
    };
    let (ca, cb) = (a.chunks_exact(4), b.chunks_exact(4));
    let mut tail = 0.0;
    for (&x, &y) in ca.remainder().iter().zip(cb.remainder()) {
        take(&mut tail, term(x, y));
    }
    for (x, y) in ca.zip(cb) {
        for ((l, &p), &q) in lanes.iter_mut().zip(x).zip(y) {
            take(l, term(p, q));
        }
    }
    if nan {
        f64::NAN
    } else {
        lanes.into_iter().fold(tail, f64::max)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn agree_with_plain_sums_at_every_length_and_remainder() {
        for n in 0..=11 {
            let a: Vec<f64> = (0..n).map(|i| 1.0 + 0.5 * i as f64).collect();
            let b: Vec<f64> = (0..n).map(|i| 2.0 - 0.25 * i as f64).collect();
            let plain: f64 = a.iter().sum();
            let plain_dot: f64 = a.iter().zip(&b).map(|(x, y)| x * y).sum();
            let plain_sq: f64 = a.iter().zip(&b).map(|(x, y)| x * y * y).sum();
            assert!(
                (sum(&a) - plain).abs() <= 1e-12 * (1.0 + plain.abs()),
                "n {n}"
            );
            assert!((dot(&a, &b) - plain_dot).abs() <= 1e-12 * (1.0 + plain_dot.abs()));
            assert!((weighted_squares(&a, &b) - plain_sq).abs() <= 1e-12 * (1.0 + plain_sq));
            let plain_max = a
                .iter()
                .zip(&b)
                .map(|(x, y)| (x * y).abs())
                .fold(0.0, f64::max);
            assert_eq!(max_abs_scaled(&b, &a), plain_max, "n {n}");
            assert_eq!(max_abs(&b), b.iter().map(|x| x.abs()).fold(0.0, f64::max));
            if n > 0 {
                let mut with_nan = b.clone();
                with_nan[n / 2] = f64::NAN;
                assert!(max_abs_scaled(&with_nan, &a).is_nan(), "n {n}");
            }
        }
    }
}
