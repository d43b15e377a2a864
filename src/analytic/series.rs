//! The fraction exchanged, `Mt/Minf`, for a sheet, cylinder or sphere: the long-time eigenfunction
//! series, and short-time forms for small `T` where the series would need too many terms.
//!
//! Long-time series (Crank 1975; sheet p. 48 and p. 60, cylinder ch. 5, sphere p. 91 and p. 96):
//!
//! `Mt/Minf = 1 - sum_n w_n exp(-beta_n^2 T)` with
//!
//! | shape | fixed surface `w_n` | evaporation `w_n`, Biot number `L` |
//! |---|---|---|
//! | slab | `8 / ((2n-1)^2 pi^2)` = `2/beta_n^2` | `2 L^2 / (beta^2 (beta^2 + L^2 + L))` |
//! | cylinder | `4 / beta_n^2` | `4 L^2 / (beta^2 (beta^2 + L^2))` |
//! | sphere | `6 / (n^2 pi^2)` = `6/beta_n^2` | `6 L^2 / (beta^2 (beta^2 + L (L - 1)))` |
//!
//! Short-time forms (used below [`Series::crossover`]):
//!
//! * sheet, fixed surface: `2 sqrt(T) [1/sqrt(pi) + 2 sum_n (-1)^n ierfc(n/sqrt(T))]`
//!   (Crank ch. 4, eq. 4.20 from memory); exact for every `T`.
//! * sphere, fixed surface: `6 sqrt(T) [1/sqrt(pi) + 2 sum_n ierfc(n/sqrt(T))] - 3T`
//!   (Crank ch. 6, from memory); exact for every `T`.
//! * cylinder, fixed surface: the expansion `4 sqrt(T/pi) - T - T^(3/2)/(3 sqrt(pi)) - ...`
//!   (Crank ch. 5, first terms from memory), here carried to many terms: its coefficients come
//!   from the Laplace transform `2 I1(q) / (p q I0(q))`, `q = sqrt(p)`, and the asymptotic
//!   (Hankel) expansions of `I0` and `I1`; what it leaves out is of order `exp(-1/T)`.
//! * evaporation, all shapes: with `m` = 0, 1, 2 for sheet, cylinder, sphere and `c = L - m/2`,
//!   `Mt/Minf = (m+1) L [T - L T^(3/2) G(c sqrt(T))]`,
//!   `G(x) = (x^2 - erfcx(x) + 1 - 2x/sqrt(pi)) / x^3`.
//!   For the sheet this is the semi-infinite solid with surface evaporation (two faces); for the
//!   sphere it is exact too, by the substitution `u = r C`, which turns the sphere into a sheet
//!   with Biot number `L - 1`; both leave out terms of order `exp(-1/T)`. For the cylinder it is
//!   the first curvature correction (from `I1/I0 ~ 1 - 1/(2q)`), to which a second one is added
//!   (see `cylinder_correction`); what is left is of order `T^2`, so it is used only for
//!   `T < 2e-6`.
//!
//! Accuracy of [`Series::fraction_exchanged`]: absolute error below 1e-12 for every shape and
//! surface at every `T` (the tests check this against the long series with 40 000 roots from
//! `T = 1e-8` to 3; the short-time forms only get better for smaller `T`). In practice the error
//! is about 1e-15, except for the cylinder with evaporation next to its crossover `T = 2e-6`,
//! where it reaches 4e-13 for large `L`.

use super::roots::{biot_of, brent, nth_eigenvalue, weight};
use super::special::{FRAC_1_SQRT_PI, ierfc, uptake_f, uptake_g};
use super::{Shape, Surface};
use std::f64::consts::PI;

/// Short-time forms are used below this `T` for the sheet and sphere with a fixed surface, which
/// are exact at every `T`: here both forms need only a few terms.
const CROSSOVER_EXACT: f64 = 0.2;
/// Crossover for the fixed cylinder (its expansion leaves out about `exp(-1/T)`).
const CROSSOVER_CYLINDER: f64 = 0.02;
/// Crossover for the sheet and sphere with evaporation (their forms leave out about `exp(-1/T)`).
const CROSSOVER_EVAPORATION: f64 = 0.02;
/// Crossover for the cylinder with evaporation: the short-time form is off by up to 4e-13 here
/// (an error of order `T^2`), and the series needs about 1600 roots.
const CROSSOVER_CYLINDER_EVAPORATION: f64 = 2e-6;
/// Terms with `beta^2 T` above this are below `exp(-50)` ~ 2e-22 and are not summed.
const EXPONENT_CUTOFF: f64 = 50.0;
/// Largest `T` at which [`Series::short_time`] gives a value.
const SHORT_TIME_MAX: f64 = 1.0;
/// Most roots [`Series::with_terms`] will compute.
const MAX_TERMS: usize = 1_000_000;
/// Terms of the fixed-cylinder short-time expansion (the terms fall fast up to T = 0.02).
const CYLINDER_TERMS: usize = 24;

/// The series solution `Mt/Minf` for one shape and surface condition, with its roots and weights
/// computed once, so that each evaluation is a short sum.
///
/// Build with [`Series::new`]; it holds enough roots for the series to be exact to round-off at
/// and above [`Series::crossover`], below which a short-time form is used.
#[derive(Debug, Clone)]
pub struct Series {
    shape: Shape,
    surface: Surface,
    biot: f64,
    crossover: f64,
    roots: Vec<f64>,
    weights: Vec<f64>,
    /// Coefficients `c_k` of `sum_k c_k T^((k+1)/2)` (fixed cylinder only).
    short_coeffs: Vec<f64>,
}

impl Series {
    /// Series for `shape` with `surface`, with the roots needed down to [`Series::crossover`].
    ///
    /// A negative or NaN Biot number makes every evaluation return NaN (nothing panics).
    pub fn new(shape: Shape, surface: Surface) -> Series {
        Series::with_terms(shape, surface, 0)
    }

    /// Like [`Series::new`], with at least `terms` roots (at most 1 000 000), so that
    /// [`Series::long_time`] is also exact for smaller `T` (down to about `50 / (terms pi)^2`).
    pub fn with_terms(shape: Shape, surface: Surface, terms: usize) -> Series {
        let biot = biot_of(surface);
        let crossover = match (shape, biot.is_infinite()) {
            (Shape::Slab | Shape::Sphere, true) => CROSSOVER_EXACT,
            (Shape::Cylinder, true) => CROSSOVER_CYLINDER,
            (Shape::Slab | Shape::Sphere, false) => CROSSOVER_EVAPORATION,
            (Shape::Cylinder, false) => CROSSOVER_CYLINDER_EVAPORATION,
        };
        // beta_n > (n - 1) pi for every case, so this many roots reach beta^2 T = cutoff.
        let needed = ((EXPONENT_CUTOFF / crossover).sqrt() / PI).ceil() as usize + 2;
        let count = if biot.is_nan() || biot == 0.0 {
            0
        } else {
            needed.max(terms.min(MAX_TERMS))
        };
        let roots: Vec<f64> = (1..=count)
            .map(|n| nth_eigenvalue(shape, biot, n))
            .collect();
        let weights = roots.iter().map(|&b| weight(shape, biot, b)).collect();
        let short_coeffs = if shape == Shape::Cylinder && biot.is_infinite() {
            cylinder_short_coefficients(CYLINDER_TERMS)
        } else {
            Vec::new()
        };
        Series {
            shape,
            surface,
            biot,
            crossover,
            roots,
            weights,
            short_coeffs,
        }
    }

    /// The shape.
    pub fn shape(&self) -> Shape {
        self.shape
    }

    /// The surface condition as given.
    pub fn surface(&self) -> Surface {
        self.surface
    }

    /// The Biot number `L` (`+inf` for a fixed surface, NaN if invalid).
    pub fn biot(&self) -> f64 {
        self.biot
    }

    /// The roots `beta_n` held (increasing).
    pub fn roots(&self) -> &[f64] {
        &self.roots
    }

    /// The weights `w_n` of `exp(-beta_n^2 T)` in `1 - Mt/Minf` (they sum to 1 over all `n`).
    pub fn weights(&self) -> &[f64] {
        &self.weights
    }

    /// The `T` below which [`Series::fraction_exchanged`] uses the short-time form.
    pub fn crossover(&self) -> f64 {
        self.crossover
    }

    /// `Mt/Minf` at dimensionless time `T = D t / l^2`: 0 at `T = 0`, rising to 1.
    ///
    /// Uses [`Series::short_time`] below [`Series::crossover`] and [`Series::long_time`] from it
    /// on; see the module documentation for the accuracy (better than 1e-12 in every case).
    /// NaN for a NaN or negative `T` or an invalid Biot number; 1 for `T = +inf`; 0 for every
    /// `T` when the Biot number is 0.
    pub fn fraction_exchanged(&self, t: f64) -> f64 {
        if t.is_nan() || t < 0.0 || self.biot.is_nan() {
            f64::NAN
        } else if t == 0.0 || self.biot == 0.0 {
            0.0
        } else if t.is_infinite() {
            1.0
        } else if t < self.crossover {
            self.short_time(t)
        } else {
            self.long_time(t)
        }
    }

    /// The moisture ratio `1 - Mt/Minf` (for drying: `(X_mean - X_eq) / (X_0 - X_eq)`).
    pub fn moisture_ratio(&self, t: f64) -> f64 {
        1.0 - self.fraction_exchanged(t)
    }

    /// `T` at which `Mt/Minf = 1/2`; `+inf` when the Biot number is 0, NaN if it is invalid.
    pub fn half_time(&self) -> f64 {
        self.time_to_reach(0.5)
    }

    /// `T` at which `Mt/Minf` reaches `fraction` (in (0, 1)); NaN outside that range.
    pub fn time_to_reach(&self, fraction: f64) -> f64 {
        if self.biot.is_nan() || fraction.is_nan() || fraction <= 0.0 || fraction >= 1.0 {
            return f64::NAN;
        }
        if self.biot == 0.0 {
            return f64::INFINITY;
        }
        let mut hi = 1.0;
        while self.fraction_exchanged(hi) < fraction {
            hi *= 4.0;
            if hi.is_infinite() {
                return f64::INFINITY;
            }
        }
        brent(|t| self.fraction_exchanged(t) - fraction, 0.0, hi, -1.0)
    }

    /// The long-time series `1 - sum_n w_n exp(-beta_n^2 T)` with the roots held.
    ///
    /// Exact to round-off wherever the roots held reach `beta^2 T >= 50` (always from
    /// [`Series::crossover`] on); for smaller `T` it is the truncated series, which is wrong
    /// (too large) by the weight of the terms left out. NaN as for `fraction_exchanged`.
    pub fn long_time(&self, t: f64) -> f64 {
        if t.is_nan() || t < 0.0 || self.biot.is_nan() {
            return f64::NAN;
        }
        if self.biot == 0.0 {
            return 0.0;
        }
        let used = self
            .roots
            .partition_point(|&b| b * b * t <= EXPONENT_CUTOFF);
        // Smallest terms first, to keep the rounding error of the sum small.
        let sum: f64 = (0..used)
            .rev()
            .map(|i| self.weights[i] * (-self.roots[i] * self.roots[i] * t).exp())
            .sum();
        1.0 - sum
    }

    /// The short-time form of `Mt/Minf` for this case (see the module documentation).
    ///
    /// Exact for the sheet and sphere with a fixed surface (to round-off up to `T = 1`);
    /// accurate below [`Series::crossover`] otherwise. NaN as for `fraction_exchanged`, and for
    /// `T > 1`, where no short-time form is meant to be used.
    pub fn short_time(&self, t: f64) -> f64 {
        if t.is_nan() || !(0.0..=SHORT_TIME_MAX).contains(&t) || self.biot.is_nan() {
            return f64::NAN;
        }
        if t == 0.0 || self.biot == 0.0 {
            return 0.0;
        }
        let s = t.sqrt();
        if self.biot.is_infinite() {
            match self.shape {
                Shape::Slab => 2.0 * s * (FRAC_1_SQRT_PI + 2.0 * image_sum(t, true)),
                Shape::Sphere => 6.0 * s * (FRAC_1_SQRT_PI + 2.0 * image_sum(t, false)) - 3.0 * t,
                Shape::Cylinder => {
                    // sum_k c_k s^(k+1), by Horner's rule in s
                    let poly = self
                        .short_coeffs
                        .iter()
                        .rev()
                        .fold(0.0, |acc, &c| acc * s + c);
                    poly * s
                }
            }
        } else {
            let l = self.biot;
            let m = match self.shape {
                Shape::Slab => 0.0,
                Shape::Cylinder => 1.0,
                Shape::Sphere => 2.0,
            };
            let c = l - 0.5 * m;
            let x = c * s;
            let main = if x.abs() < 1.0 {
                (m + 1.0) * l * (t - l * t * s * uptake_g(x))
            } else {
                // The same in terms of F(x) = x^2 - x^3 G(x), without the cancellation of
                // L T against L^2 T^(3/2) G at large L (here c > 0 since T < 1).
                let r = l / c;
                (m + 1.0) * r * (-0.5 * m * t + r * uptake_f(x) / c)
            };
            if self.shape == Shape::Cylinder {
                main - cylinder_correction(l, c, t)
            } else {
                main
            }
        }
    }
}

/// Second curvature term of the cylinder with evaporation at small `T`, to be subtracted.
///
/// With `I1/I0 ~ 1 - 1/(2q) - 1/(8q^2)` instead of `1 - 1/(2q)`, the transform of `Mt/Minf`
/// gains `-(L c / 4) / (q^5 (q + c)^2)` (to leading order). Its inverse `H(T)` is the power
/// series `T^(5/2) sum_k (k+1) (-x)^k / Gamma((7+k)/2)`, `x = c sqrt(T)`, for small `x`, and the
/// asymptotic series `T^(3/2) / c^2 sum_{k<=4} (k+1) (-1/x)^k / Gamma((5-k)/2)` for large `x`
/// (the next term, k = 6, is 3e-3 of the whole at x = 3). In the fixed limit this is
/// `T^(3/2) / (3 sqrt(pi))`, the third term of the fixed cylinder's expansion.
fn cylinder_correction(l: f64, c: f64, t: f64) -> f64 {
    let s = t.sqrt();
    let x = c * s;
    if x.abs() < 3.0 {
        // Gamma((7+k)/2) from Gamma(7/2) = 15 sqrt(pi)/8 and Gamma(4) = 6.
        let mut gamma = [15.0 / 8.0 * PI.sqrt(), 6.0];
        let mut sum = 0.0;
        let mut power = 1.0;
        for k in 0..120 {
            if k >= 2 {
                gamma[k % 2] *= (k + 5) as f64 / 2.0;
            }
            sum += (k + 1) as f64 * power / gamma[k % 2];
            power *= -x;
        }
        0.25 * l * c * t * t * s * sum
    } else {
        // 1/Gamma((5-k)/2) for k = 0..4: Gamma(5/2), Gamma(2), Gamma(3/2), Gamma(1), Gamma(1/2)
        let sp = PI.sqrt();
        let inv_gamma = [4.0 / (3.0 * sp), 1.0, 2.0 / sp, 1.0, 1.0 / sp];
        let y = -1.0 / x;
        let mut sum = 0.0;
        let mut power = 1.0;
        for (k, g) in inv_gamma.iter().enumerate() {
            sum += (k + 1) as f64 * power * g;
            power *= y;
        }
        0.25 * (l / c) * t * s * sum
    }
}

/// `sum_{n >= 1} (+-1)^n ierfc(n / sqrt(T))` (alternating for the sheet), to `exp(-n^2/T) < e^-50`.
fn image_sum(t: f64, alternating: bool) -> f64 {
    let s = t.sqrt();
    let mut sum = 0.0;
    let mut n = 1.0;
    while n * n / t <= EXPONENT_CUTOFF {
        let term = ierfc(n / s);
        let odd = (n as u64) % 2 == 1;
        sum += if alternating && odd { -term } else { term };
        n += 1.0;
    }
    sum
}

/// Coefficients `c_k`, `Mt/Minf ~ sum_k c_k T^((k+1)/2)`, of the fixed cylinder at small `T`.
///
/// The Laplace transform of `Mt/Minf` is `2 R(q) / q^3` with `q = sqrt(p)` and
/// `R = I1(q)/I0(q)`; the Hankel expansions `I_nu(z) ~ e^z/sqrt(2 pi z) sum_k b_k(nu) z^-k`,
/// `b_k(nu) = prod_{j<=k} ((2j-1)^2 - 4 nu^2) / (k! 8^k)`, give `R ~ sum_k r_k q^-k` by series
/// division, and `q^-(k+3)` transforms back to `T^((k+1)/2) / Gamma((k+3)/2)`.
fn cylinder_short_coefficients(terms: usize) -> Vec<f64> {
    let mut b0 = vec![1.0; terms];
    let mut b1 = vec![1.0; terms];
    for k in 1..terms {
        let odd = (2 * k - 1) as f64;
        let scale = 8.0 * k as f64;
        b0[k] = b0[k - 1] * odd * odd / scale;
        b1[k] = b1[k - 1] * (odd * odd - 4.0) / scale;
    }
    let mut r = vec![0.0; terms];
    for k in 0..terms {
        let mut v = b1[k];
        for j in 1..=k {
            v -= b0[j] * r[k - j];
        }
        r[k] = v;
    }
    // Gamma((k+3)/2): Gamma(3/2) = sqrt(pi)/2, Gamma(2) = 1, then Gamma(s + 1) = s Gamma(s).
    let mut gamma = [0.5 * PI.sqrt(), 1.0];
    let mut out = Vec::with_capacity(terms);
    for (k, rk) in r.iter().enumerate() {
        if k >= 2 {
            gamma[k % 2] *= (k + 1) as f64 / 2.0;
        }
        out.push(2.0 * rk / gamma[k % 2]);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cylinder_expansion_starts_with_the_known_terms() {
        // 4 sqrt(T/pi) - T - T^(3/2) / (3 sqrt(pi)) (Crank ch. 5, from memory)
        let c = cylinder_short_coefficients(4);
        assert!((c[0] - 4.0 * FRAC_1_SQRT_PI).abs() < 1e-15);
        assert!((c[1] + 1.0).abs() < 1e-15);
        assert!((c[2] + FRAC_1_SQRT_PI / 3.0).abs() < 1e-15);
    }
}
