//! Sorption isotherms: equilibrium moisture X (dry-basis fraction) against water activity aw,
//! and the inverse aw(X) the air-side surface flux needs.
//!
//! The inverse is defined for every X >= 0 and stays in [0, 1]: 0 at X <= 0, and 1 at and above
//! the moisture where the isotherm reaches aw = 1 (free water: wood above its fibre-saturation
//! moisture, GAB at its aw = 1 value). Oswin and Henderson reach aw = 1 only as X → ∞.

/// Largest water activity used by [`Isotherm::equilibrium_moisture`]: aw is clamped to
/// [0, `AW_MAX`], the largest f64 step below 1, so isotherms with a pole at aw = 1 stay finite.
pub const AW_MAX: f64 = 1.0 - f64::EPSILON;

/// Temperature range of the Wood Handbook equilibrium-moisture table, 30 F to 270 F, in C.
/// The Hailwood–Horrobin constants are used at the nearest end outside it.
const WOOD_T_MIN_C: f64 = (30.0 - 32.0) / 1.8;
const WOOD_T_MAX_C: f64 = (270.0 - 32.0) / 1.8;

/// A sorption isotherm of a material (the `isotherm`, `iso_a`, `iso_b`, `iso_c` columns of the
/// `materials` sheet).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Isotherm {
    /// No isotherm: the schedule must give the surface moisture or the equilibrium moisture.
    None,
    /// Guggenheim–Anderson–de Boer: X = Xm C K aw / [(1 − K aw)(1 − K aw + C K aw)].
    Gab {
        /// Monolayer moisture Xm, dry fraction (`iso_a`).
        xm: f64,
        /// Guggenheim constant C (`iso_b`).
        c: f64,
        /// Multilayer constant K, 0 < K < 1 (`iso_c`).
        k: f64,
    },
    /// Oswin: X = a [aw / (1 − aw)]^b.
    Oswin {
        /// a, dry fraction (`iso_a`).
        a: f64,
        /// b (`iso_b`).
        b: f64,
    },
    /// Modified Henderson (the ASAE D245 form): 1 − aw = exp[−a (T_c + c) (100 X)^b], with the
    /// moisture in percent inside the formula.
    Henderson {
        /// a (`iso_a`).
        a: f64,
        /// b (`iso_b`).
        b: f64,
        /// c, degrees C (`iso_c`).
        c: f64,
    },
    /// Wood: the Hailwood–Horrobin equation with the temperature-dependent constants of the USDA
    /// Wood Handbook (FPL-GTR-190, 2010, eq. 4-5; Simpson 1973).
    Wood,
}

impl Isotherm {
    /// Equilibrium moisture X (dry fraction) at water activity `aw` and temperature `t_c`.
    ///
    /// `aw` is clamped to [0, [`AW_MAX`]]. `None` for [`Isotherm::None`], and for Henderson
    /// where T_c + c <= 0 (outside the temperatures the form can describe).
    pub fn equilibrium_moisture(&self, aw: f64, t_c: f64) -> Option<f64> {
        let aw = aw.clamp(0.0, AW_MAX);
        match *self {
            Isotherm::None => None,
            Isotherm::Gab { xm, c, k } => Some(gab_x(xm, c, k, aw)),
            Isotherm::Oswin { a, b } => Some(a * (aw / (1.0 - aw)).powf(b)),
            Isotherm::Henderson { a, b, c } => {
                let big_a = henderson_a(a, c, t_c)?;
                // 100 X = [−ln(1 − aw) / (a (T + c))]^(1/b)
                Some((-(-aw).ln_1p() / big_a).powf(1.0 / b) / 100.0)
            }
            Isotherm::Wood => Some(WoodConstants::at(t_c).moisture_pct(aw) / 100.0),
        }
    }

    /// Equilibrium moisture X and its slope dX/daw at water activity `aw` and temperature `t_c`,
    /// both analytic (the forward direction: no inversion). `aw` is clamped as in
    /// [`Isotherm::equilibrium_moisture`]; the slope may be infinite at aw = 0 (Oswin and
    /// Henderson with b < 1). `None` as for `equilibrium_moisture`.
    pub fn moisture_and_slope(&self, aw: f64, t_c: f64) -> Option<(f64, f64)> {
        let aw = aw.clamp(0.0, AW_MAX);
        match *self {
            Isotherm::None => None,
            Isotherm::Gab { xm, c, k } => {
                // dX/daw = Xm C K (1 + (C − 1) y²) / [(1 − y)(1 + (C − 1) y)]², y = K aw
                let y = k * aw;
                let g = (1.0 - y) * (1.0 + (c - 1.0) * y);
                Some((
                    gab_x(xm, c, k, aw),
                    xm * c * k * (1.0 + (c - 1.0) * y * y) / (g * g),
                ))
            }
            Isotherm::Oswin { a, b } => {
                // X = a s^b, s = aw / (1 − aw): dX/daw = b X / (aw (1 − aw))
                let x = a * (aw / (1.0 - aw)).powf(b);
                Some((x, b * x / (aw * (1.0 - aw))))
            }
            Isotherm::Henderson { a, b, c } => {
                // 100 X = (z / A)^(1/b), z = −ln(1 − aw): dX/daw = X / (b z (1 − aw))
                let big_a = henderson_a(a, c, t_c)?;
                let z = -(-aw).ln_1p();
                let x = (z / big_a).powf(1.0 / b) / 100.0;
                Some((x, x / (b * z * (1.0 - aw))))
            }
            Isotherm::Wood => {
                let w = WoodConstants::at(t_c);
                Some((w.moisture_pct(aw) / 100.0, w.moisture_pct_slope(aw) / 100.0))
            }
        }
    }

    /// Water activity in [0, 1] at moisture `x` (dry fraction) and temperature `t_c`, the inverse
    /// of [`Isotherm::equilibrium_moisture`]; monotone non-decreasing in `x`.
    ///
    /// 0 at `x` <= 0; 1 at and above [`Isotherm::saturation_moisture`]. GAB, Oswin and Henderson
    /// are inverted in closed form (GAB: the physical root of a quadratic in K aw); Wood by
    /// Newton's method kept inside a bisection bracket. `None` as for `equilibrium_moisture`.
    pub fn water_activity(&self, x: f64, t_c: f64) -> Option<f64> {
        let aw = match *self {
            Isotherm::None => return None,
            Isotherm::Gab { xm, c, k } => gab_aw(xm, c, k, x),
            Isotherm::Oswin { a, b } => oswin_aw(a, b, x),
            Isotherm::Henderson { a, b, c } => henderson_aw(henderson_a(a, c, t_c)?, b, x),
            Isotherm::Wood => WoodConstants::at(t_c).activity(100.0 * x),
        };
        Some(aw.clamp(0.0, 1.0))
    }

    /// d aw / d X at moisture `x` and temperature `t_c` (analytic).
    ///
    /// 0 where aw is held at a bound: `x` <= 0, and at and above the saturation moisture.
    /// `None` as for `equilibrium_moisture`.
    pub fn water_activity_slope(&self, x: f64, t_c: f64) -> Option<f64> {
        let aw = self.water_activity(x, t_c)?;
        if x <= 0.0 || aw >= 1.0 {
            return Some(0.0);
        }
        let slope = match *self {
            Isotherm::None => return None,
            Isotherm::Gab { xm, c, k } => {
                // dX/daw = Xm C K (1 + (C − 1) y²) / [(1 − y)(1 + (C − 1) y)]², y = K aw
                let y = k * aw;
                let g = (1.0 - y) * (1.0 + (c - 1.0) * y);
                g * g / (xm * c * k * (1.0 + (c - 1.0) * y * y))
            }
            Isotherm::Oswin { b, .. } => {
                // aw = 1/(1 + s), s = (a/X)^(1/b): d aw/dX = aw (1 − aw) / (b X)
                aw * (1.0 - aw) / (b * x)
            }
            Isotherm::Henderson { a, b, c } => {
                // z = A (100 X)^b, aw = 1 − e^(−z): d aw/dX = b z e^(−z) / X
                let big_a = henderson_a(a, c, t_c)?;
                let z = big_a * (100.0 * x).powf(b);
                if z.is_finite() {
                    b * z * (-z).exp() / x
                } else {
                    0.0
                }
            }
            Isotherm::Wood => 100.0 / WoodConstants::at(t_c).moisture_pct_slope(aw),
        };
        Some(if slope.is_finite() { slope } else { 0.0 })
    }

    /// Moisture (dry fraction) at which the isotherm reaches aw = 1 at `t_c`: finite for GAB and
    /// Wood (the fibre-saturation moisture of the fit), +∞ for Oswin and Henderson.
    /// `None` as for `equilibrium_moisture`.
    pub fn saturation_moisture(&self, t_c: f64) -> Option<f64> {
        match *self {
            Isotherm::None => None,
            Isotherm::Gab { xm, c, k } => Some(gab_x(xm, c, k, 1.0)),
            Isotherm::Oswin { .. } => Some(f64::INFINITY),
            Isotherm::Henderson { a, c, .. } => henderson_a(a, c, t_c).map(|_| f64::INFINITY),
            Isotherm::Wood => Some(WoodConstants::at(t_c).moisture_pct(1.0) / 100.0),
        }
    }

    /// Problems with the parameters, one sentence each; empty when they are usable.
    pub fn validate(&self) -> Vec<String> {
        let mut problems = Vec::new();
        let mut need = |ok: bool, what: &str, value: f64, rule: &str| {
            if !ok {
                problems.push(format!("{what} must be {rule}, but is {value}."));
            }
        };
        match *self {
            Isotherm::None | Isotherm::Wood => {}
            Isotherm::Gab { xm, c, k } => {
                // A monolayer above 1 kg/kg (100 % dry basis) is a units mistake (percent typed
                // where a fraction belongs); foods and wood lie near 0.02-0.3 (common practice).
                need(
                    xm.is_finite() && xm > 0.0 && xm <= 1.0,
                    "GAB monolayer moisture Xm (iso_a)",
                    xm,
                    "a dry-basis fraction greater than 0 and at most 1",
                );
                need(
                    c.is_finite() && c > 0.0,
                    "GAB constant C (iso_b)",
                    c,
                    "a finite number greater than 0",
                );
                need(
                    k.is_finite() && k > 0.0 && k < 1.0,
                    "GAB constant K (iso_c)",
                    k,
                    "greater than 0 and less than 1",
                );
            }
            Isotherm::Oswin { a, b } => {
                need(
                    a.is_finite() && a > 0.0 && a <= 5.0,
                    "Oswin constant a (iso_a)",
                    a,
                    "a dry-basis fraction greater than 0 and at most 5",
                );
                need(
                    b.is_finite() && b > 0.0,
                    "Oswin constant b (iso_b)",
                    b,
                    "a finite number greater than 0",
                );
            }
            Isotherm::Henderson { a, b, c } => {
                need(
                    a.is_finite() && a > 0.0,
                    "Henderson constant a (iso_a)",
                    a,
                    "a finite number greater than 0",
                );
                need(
                    b.is_finite() && b > 0.0,
                    "Henderson constant b (iso_b)",
                    b,
                    "a finite number greater than 0",
                );
                need(
                    c.is_finite(),
                    "Henderson temperature constant c (iso_c)",
                    c,
                    "a finite number",
                );
            }
        }
        problems
    }
}

/// GAB equilibrium moisture at `aw`.
#[inline]
fn gab_x(xm: f64, c: f64, k: f64, aw: f64) -> f64 {
    let y = k * aw;
    xm * c * y / ((1.0 - y) * (1.0 - y + c * y))
}

/// GAB water activity: 0 at X <= 0, 1 at and above the aw = 1 moisture.
#[inline]
fn gab_aw(xm: f64, c: f64, k: f64, x: f64) -> f64 {
    if x <= 0.0 {
        0.0
    } else if x >= gab_x(xm, c, k, 1.0) {
        1.0
    } else {
        gab_y(xm, c, x) / k
    }
}

/// Oswin water activity: aw = 1 / (1 + (a/X)^(1/b)), 0 at X <= 0.
#[inline]
fn oswin_aw(a: f64, b: f64, x: f64) -> f64 {
    if x <= 0.0 {
        0.0
    } else {
        1.0 / (1.0 + (a / x).powf(1.0 / b))
    }
}

/// Henderson water activity: aw = 1 − exp(−A (100 X)^b), with A = a (T + c); 0 at X <= 0.
#[inline]
fn henderson_aw(big_a: f64, b: f64, x: f64) -> f64 {
    if x <= 0.0 {
        0.0
    } else {
        -(-big_a * (100.0 * x).powf(b)).exp_m1()
    }
}

/// GAB inverse: y = K aw at moisture `x` below the aw = 1 value.
///
/// X (1 − y)(1 + (C − 1) y) = Xm C y is the quadratic X (C − 1) y² + [Xm C − X (C − 2)] y − X = 0.
/// The physical root is the one that starts from y = 0 at X = 0; written as
/// y = 2X / (β + √(β² + 4X²(C − 1))), β = Xm C − X (C − 2), it has no cancellation and holds for
/// C < 1, C = 1 and C > 1 alike.
#[inline]
fn gab_y(xm: f64, c: f64, x: f64) -> f64 {
    let beta = xm * c - x * (c - 2.0);
    let disc = (beta * beta + 4.0 * x * x * (c - 1.0)).max(0.0);
    2.0 * x / (beta + disc.sqrt())
}

/// Henderson's a (T + c), or `None` where it is not positive.
#[inline]
fn henderson_a(a: f64, c: f64, t_c: f64) -> Option<f64> {
    let big_a = a * (t_c + c);
    (big_a > 0.0).then_some(big_a)
}

/// Hailwood–Horrobin constants at one temperature (USDA Wood Handbook, FPL-GTR-190 (2010),
/// eq. 4-5, Celsius form; Simpson, Wood and Fiber 5(2) (1973) 148).
#[derive(Debug, Clone, Copy)]
struct WoodConstants {
    w: f64,
    k: f64,
    k1: f64,
    k2: f64,
}

impl WoodConstants {
    /// W = 349 + 1.29T + 0.0135T², K = 0.805 + 0.000736T − 0.00000273T²,
    /// K1 = 6.27 − 0.00938T − 0.000303T², K2 = 1.91 + 0.0407T − 0.000293T² (T in C, held to the
    /// table's 30..270 F range).
    fn at(t_c: f64) -> Self {
        let t = t_c.clamp(WOOD_T_MIN_C, WOOD_T_MAX_C);
        WoodConstants {
            w: 349.0 + 1.29 * t + 0.0135 * t * t,
            k: 0.805 + 0.000736 * t - 0.000_002_73 * t * t,
            k1: 6.27 - 0.00938 * t - 0.000303 * t * t,
            k2: 1.91 + 0.0407 * t - 0.000293 * t * t,
        }
    }

    /// M (%) = (1800/W) [Kh/(1 − Kh) + (K1Kh + 2K1K2K²h²) / (1 + K1Kh + K1K2K²h²)].
    fn moisture_pct(&self, h: f64) -> f64 {
        let kh = self.k * h;
        let q = self.k1 * self.k2 * kh * kh;
        (1800.0 / self.w) * (kh / (1.0 - kh) + (self.k1 * kh + 2.0 * q) / (1.0 + self.k1 * kh + q))
    }

    /// dM/dh in % per unit activity.
    fn moisture_pct_slope(&self, h: f64) -> f64 {
        let kh = self.k * h;
        let q = self.k1 * self.k2 * kh * kh;
        let num = self.k1 * kh + 2.0 * q;
        let den = 1.0 + self.k1 * kh + q;
        // d/dh of kh and q: k and 2q/h = 2 k1 k2 k² h.
        let dq = 2.0 * self.k1 * self.k2 * self.k * kh;
        let dnum = self.k1 * self.k + 2.0 * dq;
        let dden = self.k1 * self.k + dq;
        let d1 = self.k / ((1.0 - kh) * (1.0 - kh));
        (1800.0 / self.w) * (d1 + (dnum * den - num * dden) / (den * den))
    }

    /// Activity h in [0, 1] at moisture `m_pct` (%): 1 at and above M(1).
    ///
    /// M(h) rises monotonically on [0, 1] over the whole clamped temperature range, so Newton's
    /// method is kept inside a shrinking bracket [lo, hi] and falls back to bisection whenever a
    /// step would leave it.
    fn activity(&self, m_pct: f64) -> f64 {
        let m_sat = self.moisture_pct(1.0);
        if m_pct.is_nan() || m_sat.is_nan() {
            return f64::NAN;
        }
        if m_pct <= 0.0 {
            return 0.0;
        }
        if m_pct >= m_sat {
            return 1.0;
        }
        let (mut lo, mut hi) = (0.0_f64, 1.0_f64);
        // Start from the first term alone, which dominates at high activity.
        let mut h =
            (m_pct * self.w / 1800.0 / (1.0 + m_pct * self.w / 1800.0) / self.k).clamp(0.0, 1.0);
        for _ in 0..100 {
            let f = self.moisture_pct(h) - m_pct;
            if f == 0.0 {
                return h;
            }
            if f < 0.0 {
                lo = h;
            } else {
                hi = h;
            }
            let step = f / self.moisture_pct_slope(h);
            // Converged when the Newton correction is at round-off; it may then touch an end
            // of the bracket, so test before the bracket check.
            if step.abs() <= 2.0 * f64::EPSILON * h {
                return (h - step).clamp(lo, hi);
            }
            let next = h - step;
            h = if next > lo && next < hi {
                next
            } else {
                0.5 * (lo + hi)
            };
        }
        h
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The forward slope is the derivative of the forward isotherm (central differences) and its
    /// moisture is `equilibrium_moisture`'s, for every kind.
    #[test]
    fn moisture_and_slope_match_the_isotherm() {
        let kinds = [
            Isotherm::Gab {
                xm: 0.08,
                c: 10.0,
                k: 0.85,
            },
            Isotherm::Oswin { a: 0.12, b: 0.35 },
            Isotherm::Henderson {
                a: 1e-4,
                b: 1.5,
                c: 50.0,
            },
            Isotherm::Wood,
        ];
        for iso in kinds {
            for aw in [0.1, 0.4, 0.75, 0.95] {
                let (x, slope) = iso.moisture_and_slope(aw, 40.0).expect("defined");
                assert_eq!(Some(x), iso.equilibrium_moisture(aw, 40.0));
                let h = 1e-6;
                let fd = (iso.equilibrium_moisture(aw + h, 40.0).unwrap_or(f64::NAN)
                    - iso.equilibrium_moisture(aw - h, 40.0).unwrap_or(f64::NAN))
                    / (2.0 * h);
                assert!(
                    (slope - fd).abs() <= 1e-6 * fd.abs(),
                    "{iso:?} at {aw}: {slope} vs {fd}"
                );
            }
        }
    }
}
