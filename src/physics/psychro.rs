//! Psychrometrics of moist air and the saturation properties of water.
//!
//! - Saturation vapour pressure over liquid water from the IAPWS-IF97 region-4 equation
//!   (IAPWS R7-97, eq. 30), over ice below 0 C from Hyland & Wexler (1983) as given in
//!   ASHRAE Handbook—Fundamentals, ch. 1.
//! - Humidity ratio and relative humidity from the ASHRAE ch. 1 relations, with the
//!   thermodynamic wet-bulb energy balance.
//! - Latent heat from the Clausius–Clapeyron equation with the IAPWS auxiliary equations for the
//!   saturated state (Wagner & Pruss 1993).

use super::{GAS_CONSTANT, MOLAR_MASS_WATER, ZERO_CELSIUS_K};

/// Ratio of the molar masses of water and dry air, 18.015268 / 28.966
/// (ASHRAE Handbook—Fundamentals 2017, ch. 1, humidity-ratio equation).
pub const MOLAR_MASS_RATIO: f64 = 0.621945;

/// Critical temperature of water, K (IAPWS).
const CRITICAL_T_K: f64 = 647.096;
/// Critical pressure of water, Pa (IAPWS).
const CRITICAL_P_PA: f64 = 22.064e6;
/// Critical density of water, kg/m3 (IAPWS).
const CRITICAL_RHO: f64 = 322.0;
/// Triple-point temperature, K; the lower end of the liquid saturation line.
const TRIPLE_T_K: f64 = 273.16;
/// Lower end of the Hyland–Wexler ice equation (-100 C), K.
const ICE_MIN_T_K: f64 = 173.15;

/// IAPWS-IF97 region-4 coefficients n1..n10 (IAPWS R7-97, Table 34).
const IF97_N: [f64; 10] = [
    0.116_705_214_527_67e4,
    -0.724_213_167_032_06e6,
    -0.170_738_469_400_92e2,
    0.120_208_247_024_70e5,
    -0.323_255_503_223_33e7,
    0.149_151_086_135_30e2,
    -0.482_326_573_615_91e4,
    0.405_113_405_420_57e6,
    -0.238_555_575_678_49,
    0.650_175_348_447_98e3,
];

/// Hyland–Wexler over ice, C1..C7 (ASHRAE Handbook—Fundamentals, ch. 1, eq. 5).
const HW_ICE: [f64; 7] = [
    -5.674_535_9e3,
    6.392_524_7,
    -9.677_843e-3,
    6.221_570_1e-7,
    2.074_782_5e-9,
    -9.484_024e-13,
    4.163_501_9,
];

/// Saturation vapour pressure of water, Pa.
///
/// - 0 C to 373.946 C (the critical point): IAPWS-IF97 region 4, eq. 30 of IAPWS R7-97:
///   θ = T + n9/(T − n10), A = θ² + n1θ + n2, B = n3θ² + n4θ + n5, C = n6θ² + n7θ + n8,
///   p = 1 MPa · [2C / (−B + √(B² − 4AC))]⁴, T in K.
/// - Below 0 C: over ice, Hyland & Wexler (1983), ASHRAE Handbook—Fundamentals ch. 1 eq. 5,
///   ln p = C1/T + C2 + C3T + C4T² + C5T³ + C6T⁴ + C7 ln T, held constant below −100 C
///   (the end of its range). The two meet at 0 C within 0.01 %.
/// - Above the critical temperature the critical pressure is returned.
pub fn saturation_pressure_pa(t_c: f64) -> f64 {
    let t_k = t_c + ZERO_CELSIUS_K;
    if t_c >= 0.0 {
        if97_beta(t_k.clamp(ZERO_CELSIUS_K, CRITICAL_T_K)).0.powi(4) * 1e6
    } else {
        hw_ice_ln_p(t_k.clamp(ICE_MIN_T_K, ZERO_CELSIUS_K)).exp()
    }
}

/// Slope of [`saturation_pressure_pa`] with temperature, Pa/K (analytic; 0 where the value is
/// held constant, above the critical point and below −100 C).
///
/// IF97 branch: implicit differentiation of the region-4 basic equation (R7-97, eq. 29)
/// β²θ² + n1β²θ + n2β² + n3βθ² + n4βθ + n5β + n6θ² + n7θ + n8 = 0, with p = β⁴ MPa.
pub fn saturation_pressure_slope_pa_k(t_c: f64) -> f64 {
    let t_k = t_c + ZERO_CELSIUS_K;
    if t_c >= 0.0 {
        if t_k > CRITICAL_T_K {
            return 0.0;
        }
        let n = &IF97_N;
        let (beta, theta) = if97_beta(t_k);
        let f_theta = 2.0 * beta * beta * theta
            + n[0] * beta * beta
            + 2.0 * n[2] * beta * theta
            + n[3] * beta
            + 2.0 * n[5] * theta
            + n[6];
        let f_beta = 2.0 * beta * theta * theta
            + 2.0 * n[0] * beta * theta
            + 2.0 * n[1] * beta
            + n[2] * theta * theta
            + n[3] * theta
            + n[4];
        let dtheta_dt = 1.0 - n[8] / ((t_k - n[9]) * (t_k - n[9]));
        4.0 * beta.powi(3) * (-f_theta / f_beta) * dtheta_dt * 1e6
    } else {
        if t_k < ICE_MIN_T_K {
            return 0.0;
        }
        let c = &HW_ICE;
        let dln_dt = -c[0] / (t_k * t_k)
            + c[2]
            + 2.0 * c[3] * t_k
            + 3.0 * c[4] * t_k * t_k
            + 4.0 * c[5] * t_k.powi(3)
            + c[6] / t_k;
        hw_ice_ln_p(t_k).exp() * dln_dt
    }
}

/// IF97 region 4: returns (β = (p/1 MPa)^(1/4), θ) at `t_k`.
fn if97_beta(t_k: f64) -> (f64, f64) {
    let n = &IF97_N;
    let theta = t_k + n[8] / (t_k - n[9]);
    let a = theta * theta + n[0] * theta + n[1];
    let b = n[2] * theta * theta + n[3] * theta + n[4];
    let c = n[5] * theta * theta + n[6] * theta + n[7];
    (2.0 * c / (-b + (b * b - 4.0 * a * c).sqrt()), theta)
}

/// Hyland–Wexler over ice: ln(p / Pa) at `t_k`.
fn hw_ice_ln_p(t_k: f64) -> f64 {
    let c = &HW_ICE;
    c[0] / t_k + c[1] + t_k * (c[2] + t_k * (c[3] + t_k * (c[4] + t_k * c[5]))) + c[6] * t_k.ln()
}

/// Density of water vapour at partial pressure `p_v_pa` and temperature `t_c`, kg/m3, as an
/// ideal gas: ρ_v = p_v M_w / (R T).
#[inline]
pub fn vapour_density_kg_m3(p_v_pa: f64, t_c: f64) -> f64 {
    p_v_pa * MOLAR_MASS_WATER / (GAS_CONSTANT * (t_c + ZERO_CELSIUS_K))
}

/// Humidity ratio W (kg water per kg dry air) of air at `t_c`, relative humidity `rh` (fraction,
/// clamped to [0, 1]) and total pressure `p_pa`.
///
/// W = 0.621945 p_w / (p − p_w), p_w = rh · p_ws(t) (ASHRAE Handbook—Fundamentals 2017, ch. 1).
/// Returns +∞ when p_w reaches the total pressure (the air is pure vapour).
pub fn humidity_ratio_from_rh(t_c: f64, rh: f64, p_pa: f64) -> f64 {
    let p_w = rh.clamp(0.0, 1.0) * saturation_pressure_pa(t_c);
    humidity_ratio_from_vapour_pressure(p_w, p_pa)
}

/// W = 0.621945 p_w / (p − p_w), +∞ when p_w >= p.
fn humidity_ratio_from_vapour_pressure(p_w: f64, p_pa: f64) -> f64 {
    if p_w >= p_pa {
        f64::INFINITY
    } else {
        MOLAR_MASS_RATIO * p_w / (p_pa - p_w)
    }
}

/// Humidity ratio W (kg/kg dry air) of air at dry bulb `dry_bulb_c` whose thermodynamic wet bulb
/// is `wet_bulb_c`, at total pressure `p_pa`.
///
/// The wet-bulb energy balance in the form of ASHRAE Handbook—Fundamentals 2017, ch. 1
/// (eq. 33 above freezing, eq. 35 over ice; equation numbers as quoted in secondary sources),
/// t and t* in degrees C:
///
/// - t* >= 0: W = [(2501 − 2.326 t*) W*s − 1.006 (t − t*)] / (2501 + 1.86 t − 4.186 t*)
/// - t* < 0:  W = [(2830 − 0.24 t*) W*s − 1.006 (t − t*)] / (2830 + 1.86 t − 2.1 t*)
///
/// where W*s is the saturation humidity ratio at t*. The result may be negative when the
/// depression is impossibly large for that air; +∞ when t* is at or above the boiling point at
/// `p_pa`.
pub fn humidity_ratio_from_wet_bulb(dry_bulb_c: f64, wet_bulb_c: f64, p_pa: f64) -> f64 {
    let t = dry_bulb_c;
    let ts = wet_bulb_c;
    let ws = humidity_ratio_from_rh(ts, 1.0, p_pa);
    if ws.is_infinite() {
        return f64::INFINITY;
    }
    if ts >= 0.0 {
        ((2501.0 - 2.326 * ts) * ws - 1.006 * (t - ts)) / (2501.0 + 1.86 * t - 4.186 * ts)
    } else {
        ((2830.0 - 0.24 * ts) * ws - 1.006 * (t - ts)) / (2830.0 + 1.86 * t - 2.1 * ts)
    }
}

/// Relative humidity (fraction, clamped to [0, 1]) of air at dry bulb `dry_bulb_c` with
/// thermodynamic wet bulb `wet_bulb_c` at total pressure `p_pa`.
///
/// W from [`humidity_ratio_from_wet_bulb`], then p_w = p W / (0.621945 + W) and
/// RH = p_w / p_ws(t). A wet bulb at or above the boiling point gives 1.
pub fn rh_from_wet_bulb(dry_bulb_c: f64, wet_bulb_c: f64, p_pa: f64) -> f64 {
    let w = humidity_ratio_from_wet_bulb(dry_bulb_c, wet_bulb_c, p_pa);
    if w.is_infinite() {
        return 1.0;
    }
    // Not `max`, which would turn a NaN into 0.
    let w = if w < 0.0 { 0.0 } else { w };
    let p_w = p_pa * w / (MOLAR_MASS_RATIO + w);
    (p_w / saturation_pressure_pa(dry_bulb_c)).clamp(0.0, 1.0)
}

/// Thermodynamic wet bulb (degrees C) of air at dry bulb `dry_bulb_c` and relative humidity
/// `rh` (fraction) at total pressure `p_pa`: the inverse of [`rh_from_wet_bulb`], by bisection
/// (RH rises with the wet bulb at a fixed dry bulb). `None` outside 0 <= RH <= 1.
pub fn wet_bulb_from_rh(dry_bulb_c: f64, rh: f64, p_pa: f64) -> Option<f64> {
    if !(0.0..=1.0).contains(&rh) || !dry_bulb_c.is_finite() {
        return None;
    }
    let (mut lo, mut hi) = (dry_bulb_c - 60.0, dry_bulb_c);
    for _ in 0..80 {
        let mid = 0.5 * (lo + hi);
        if rh_from_wet_bulb(dry_bulb_c, mid, p_pa) < rh {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Some(0.5 * (lo + hi))
}

/// Auxiliary-equation coefficients, IAPWS SR1-86 (1992) / Wagner & Pruss (1993),
/// J. Phys. Chem. Ref. Data 22:783: vapour pressure (eq. 1), exponents and coefficients.
const WP_P_EXP: [f64; 6] = [1.0, 1.5, 3.0, 3.5, 4.0, 7.5];
const WP_P_A: [f64; 6] = [
    -7.859_517_83,
    1.844_082_59,
    -11.786_649_7,
    22.680_741_1,
    -15.961_871_9,
    1.801_225_02,
];
/// Saturated liquid density (eq. 2).
const WP_RL_EXP: [f64; 6] = [
    1.0 / 3.0,
    2.0 / 3.0,
    5.0 / 3.0,
    16.0 / 3.0,
    43.0 / 3.0,
    110.0 / 3.0,
];
const WP_RL_B: [f64; 6] = [
    1.992_740_64,
    1.099_653_42,
    -0.510_839_303,
    -1.754_934_79,
    -45.517_035_2,
    -6.746_944_50e5,
];
/// Saturated vapour density (eq. 3).
const WP_RV_EXP: [f64; 6] = [
    2.0 / 6.0,
    4.0 / 6.0,
    8.0 / 6.0,
    18.0 / 6.0,
    37.0 / 6.0,
    71.0 / 6.0,
];
const WP_RV_C: [f64; 6] = [
    -2.031_502_40,
    -2.683_029_40,
    -5.386_264_92,
    -17.299_160_5,
    -44.758_658_1,
    -63.920_106_3,
];

/// Latent heat of vaporisation of free water at `t_c`, J/kg.
///
/// Clausius–Clapeyron, exact for a pure substance: L = T (dp_s/dT) (1/ρ'' − 1/ρ'), with the
/// saturation pressure, saturated-liquid density ρ' and saturated-vapour density ρ'' from the
/// IAPWS auxiliary equations (IAPWS SR1-86 (1992), eqs. 1–3; W. Wagner & A. Pruss,
/// J. Phys. Chem. Ref. Data 22 (1993) 783). About 2501 kJ/kg at 0 C, 2257 kJ/kg at 100 C,
/// falling to 0 at the critical point. The temperature is held to the liquid saturation line
/// (0.01 C to 373.946 C).
pub fn latent_heat_j_kg(t_c: f64) -> f64 {
    let t_k = (t_c + ZERO_CELSIUS_K).clamp(TRIPLE_T_K, CRITICAL_T_K);
    let tau = 1.0 - t_k / CRITICAL_T_K;
    // Every exponent of eqs. 1-3 is a multiple of 1/6: powers of τ^(1/6) by multiplication
    // cost one logarithm and one exponential in all, where `powf` cost 24 calls (most of the
    // time of a coupled face solve).
    let sixth = (tau.ln() / 6.0).exp();
    let pow = |e: f64| sixth.powi((6.0 * e).round() as i32);
    let mut f = 0.0;
    let mut df = 0.0;
    for (a, e) in WP_P_A.iter().zip(WP_P_EXP) {
        f += a * pow(e);
        df += a * e * pow(e - 1.0);
    }
    // ln(p/pc) = (Tc/T) f(τ), τ = 1 − T/Tc.
    let p = CRITICAL_P_PA * (CRITICAL_T_K / t_k * f).exp();
    let dp_dt = p * (-CRITICAL_T_K / (t_k * t_k) * f - df / t_k);
    let mut rho_l = 1.0;
    for (b, e) in WP_RL_B.iter().zip(WP_RL_EXP) {
        rho_l += b * pow(e);
    }
    let mut ln_rho_v = 0.0;
    for (c, e) in WP_RV_C.iter().zip(WP_RV_EXP) {
        ln_rho_v += c * pow(e);
    }
    let rho_l = CRITICAL_RHO * rho_l;
    let rho_v = CRITICAL_RHO * ln_rho_v.exp();
    t_k * dp_dt * (1.0 / rho_v - 1.0 / rho_l)
}
