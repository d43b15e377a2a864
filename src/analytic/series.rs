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
//!   the first curvature correction (from `I1/I0 ~ 1 - 1/(2q)`), with an error of order
//!   `T^(3/2)`, so it is used only for very small `T`.
//!
//! Accuracy of [`Series::fraction_exchanged`] (checked in the tests against the long series with
//! many roots): absolute error below 1e-12 for the fixed surfaces at every `T`, and for
//! evaporation on the sheet and sphere; for evaporation on the cylinder below 1e-12 for
//! `T >= 5e-7` and below 1e-10 under it (the short-time form's `T^(3/2)` error).

use super::roots::{bessel_j0_zero, biot_of, brent, eigenvalue, weight};
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
/// Crossover for the cylinder with evaporation: its short-time form has an error of order
/// `0.2 T^(3/2)`, 7e-11 here. Below it the series would need more than ~3000 roots.
const CROSSOVER_CYLINDER_EVAPORATION: f64 = 5e-7;
/// Terms with `beta^2 T` above this are below `exp(-50)` ~ 2e-22 and are not summed.
const EXPONENT_CUTOFF: f64 = 50.0;
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

    /// Like [`Series::new`], with at least `terms` roots, so that [`Series::long_time`] is also
    /// exact for smaller `T` (down to about `50 / (terms pi)^2`).
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
            needed.max(terms)
        };
        let mut roots = Vec::with_capacity(count);
        let mut j0_prev = 0.0;
        for n in 1..=count {
            let j0_this = if shape == Shape::Cylinder {
                bessel_j0_zero(n)
            } else {
                0.0
            };
            roots.push(eigenvalue(shape, biot, n, j0_prev, j0_this));
            j0_prev = j0_this;
        }
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
    /// on; see the module documentation for the accuracy (1e-12 or better, 1e-10 for the
    /// cylinder with evaporation below `T = 5e-7`). NaN for a NaN or negative `T` or an invalid
    /// Biot number; 1 for `T = +inf`; 0 for every `T` when the Biot number is 0.
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
            if hi > 1e300 {
                return f64::INFINITY;
            }
        }
        brent(|t| self.fraction_exchanged(t) - fraction, 0.0, hi, -1.0)
    }

    /// The long-time series `1 - sum_n w_n exp(-beta_n^2 T)` with the roots held.
    ///
    /// Exact to round-off where the roots reach `beta^2 T >= 50` (always from
    /// [`Series::crossover`] on); for smaller `T` the terms left out make it too small... or too
    /// large: it is then simply the truncated series. NaN as for `fraction_exchanged`.
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
    /// Exact at every `T` for the sheet and sphere with a fixed surface; accurate below
    /// [`Series::crossover`] otherwise. NaN as for `fraction_exchanged`.
    pub fn short_time(&self, t: f64) -> f64 {
        if t.is_nan() || t < 0.0 || self.biot.is_nan() {
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
            if x.abs() < 1.0 {
                (m + 1.0) * l * (t - l * t * s * uptake_g(x))
            } else {
                // The same in terms of F(x) = x^2 - x^3 G(x), without the cancellation of
                // L T against L^2 T^(3/2) G at large L (here c > 0 since T < 1).
                let r = l / c;
                (m + 1.0) * r * (-0.5 * m * t + r * uptake_f(x) / c)
            }
        }
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
