//! Convective heat and mass transfer between drying air and a product surface.
//!
//! - Properties of the air ([`air_properties`]): dry air as an ideal gas, Sutherland's laws for
//!   viscosity and conductivity, constant specific heat, and the diffusivity of water vapour in
//!   air from Massman (1998).
//! - Average coefficients over a flat plate in parallel flow: laminar (Blasius–Pohlhausen)
//!   below Re = 5×10⁵, mixed laminar/turbulent above it.
//! - The Chilton–Colburn heat/mass analogy, h / h_m = ρ c_p Le^(2/3).

use super::{GAS_CONSTANT, MOLAR_MASS_DRY_AIR, STANDARD_PRESSURE_PA, ZERO_CELSIUS_K};

/// Reynolds number at which the boundary layer on a flat plate turns turbulent, as used with the
/// mixed correlation (Incropera & DeWitt, ch. 7).
pub const CRITICAL_REYNOLDS: f64 = 5.0e5;

/// Sutherland's law for air (F.M. White, Viscous Fluid Flow, 3rd ed. 2006, Table 1-2):
/// viscosity 1.716e-5 Pa s at 273 K with S = 111 K; conductivity 0.0241 W/(m K) at 273 K with
/// S = 194 K.
const SUTHERLAND_T0_K: f64 = 273.0;
const SUTHERLAND_MU0: f64 = 1.716e-5;
const SUTHERLAND_S_MU: f64 = 111.0;
const SUTHERLAND_K0: f64 = 0.0241;
const SUTHERLAND_S_K: f64 = 194.0;

/// Specific heat of dry air, J/(kg K); within 0.5 % from 250 K to 400 K.
const CP_AIR: f64 = 1007.0;

/// Massman (1998), Atmospheric Environment 32:1111: D = 2.178e-5 m2/s at 273.15 K and 1 atm,
/// scaling as T^1.81 / p (stated for 0..100 C).
const MASSMAN_D0: f64 = 2.178e-5;
const MASSMAN_EXPONENT: f64 = 1.81;

/// Properties of the drying air at one state, SI units.
///
/// Each function that takes `&AirProperties` says which fields it reads, so a caller may fill
/// the struct from a handbook table instead of [`air_properties`].
#[derive(Debug, Clone, Copy)]
pub struct AirProperties {
    /// Density ρ, kg/m3.
    pub density: f64,
    /// Dynamic viscosity μ, Pa s.
    pub viscosity: f64,
    /// Kinematic viscosity ν = μ/ρ, m2/s.
    pub kinematic_viscosity: f64,
    /// Thermal conductivity k, W/(m K).
    pub conductivity: f64,
    /// Specific heat c_p, J/(kg K).
    pub specific_heat: f64,
    /// Diffusivity of water vapour in the air D_AB, m2/s.
    pub vapour_diffusivity: f64,
    /// Prandtl number Pr = μ c_p / k.
    pub prandtl: f64,
    /// Schmidt number Sc = ν / D_AB.
    pub schmidt: f64,
}

/// Properties of dry air at `t_c` and total pressure `p_pa`.
///
/// - ρ = p M_a / (R T), ideal gas.
/// - μ and k: Sutherland, f = f0 (T/T0)^(3/2) (T0 + S)/(T + S) (White, Viscous Fluid Flow,
///   3rd ed., Table 1-2).
/// - c_p = 1007 J/(kg K).
/// - D_AB = 2.178e-5 (T/273.15)^1.81 (101325/p) m2/s (Massman 1998), stated for 0..100 C and
///   extrapolated beyond.
///
/// The water vapour in the air is ignored; it changes these values by a few percent at the
/// humidities of hot kilns.
pub fn air_properties(t_c: f64, p_pa: f64) -> AirProperties {
    let t_k = t_c + ZERO_CELSIUS_K;
    let density = p_pa * MOLAR_MASS_DRY_AIR / (GAS_CONSTANT * t_k);
    let viscosity = SUTHERLAND_MU0 * sutherland(t_k, SUTHERLAND_S_MU);
    let conductivity = SUTHERLAND_K0 * sutherland(t_k, SUTHERLAND_S_K);
    let vapour_diffusivity =
        MASSMAN_D0 * (t_k / ZERO_CELSIUS_K).powf(MASSMAN_EXPONENT) * (STANDARD_PRESSURE_PA / p_pa);
    let kinematic_viscosity = viscosity / density;
    AirProperties {
        density,
        viscosity,
        kinematic_viscosity,
        conductivity,
        specific_heat: CP_AIR,
        vapour_diffusivity,
        prandtl: viscosity * CP_AIR / conductivity,
        schmidt: kinematic_viscosity / vapour_diffusivity,
    }
}

/// Sutherland's ratio (T/T0)^(3/2) (T0 + S)/(T + S).
#[inline]
fn sutherland(t_k: f64, s: f64) -> f64 {
    (t_k / SUTHERLAND_T0_K).powf(1.5) * (SUTHERLAND_T0_K + s) / (t_k + s)
}

/// Average Nusselt (or Sherwood) number over a flat plate of Reynolds number `re` with Prandtl
/// (or Schmidt) number `pr`:
///
/// - Re < 5×10⁵, laminar: Nu = 0.664 Re^(1/2) Pr^(1/3)
/// - Re >= 5×10⁵, mixed:  Nu = (0.037 Re^(4/5) − 871) Pr^(1/3)
///
/// (Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, ch. 7; isothermal plate,
/// 0.6 <= Pr <= 60). The two meet at the critical Reynolds number within 0.1 %.
pub fn flat_plate_number(re: f64, pr: f64) -> f64 {
    let re = re.abs();
    let base = if re < CRITICAL_REYNOLDS {
        0.664 * re.sqrt()
    } else {
        0.037 * re.powf(0.8) - 871.0
    };
    base * pr.cbrt()
}

/// Average heat transfer coefficient h, W/(m2 K), over a plate of length `length_m` along a flow
/// of speed `velocity_m_s` (its magnitude): h = Nu k / L, Re = u L / ν,
/// Nu from [`flat_plate_number`] with Pr.
///
/// Reads `kinematic_viscosity`, `conductivity` and `prandtl`. Forced convection only: a still
/// air gives 0. `length_m` must be > 0.
pub fn flat_plate_heat_coef(velocity_m_s: f64, length_m: f64, air: &AirProperties) -> f64 {
    let re = velocity_m_s.abs() * length_m / air.kinematic_viscosity;
    flat_plate_number(re, air.prandtl) * air.conductivity / length_m
}

/// Average mass transfer coefficient h_m, m/s, over the same plate: h_m = Sh D_AB / L,
/// Sh from [`flat_plate_number`] with Sc.
///
/// Reads `kinematic_viscosity`, `vapour_diffusivity` and `schmidt`.
pub fn flat_plate_mass_coef(velocity_m_s: f64, length_m: f64, air: &AirProperties) -> f64 {
    let re = velocity_m_s.abs() * length_m / air.kinematic_viscosity;
    flat_plate_number(re, air.schmidt) * air.vapour_diffusivity / length_m
}

/// Lewis number Le = α / D_AB with α = k / (ρ c_p).
#[inline]
fn lewis(air: &AirProperties) -> f64 {
    air.conductivity / (air.density * air.specific_heat * air.vapour_diffusivity)
}

/// Mass transfer coefficient from a heat transfer coefficient by the Chilton–Colburn analogy:
/// h_m = h / (ρ c_p Le^(2/3)), Le = α / D_AB (Chilton & Colburn 1934; Incropera & DeWitt §6.7).
///
/// Reads `density`, `specific_heat`, `conductivity` and `vapour_diffusivity`.
pub fn mass_coef_from_heat(h: f64, air: &AirProperties) -> f64 {
    h / (air.density * air.specific_heat * lewis(air).powf(2.0 / 3.0))
}

/// Heat transfer coefficient from a mass transfer coefficient, the inverse of
/// [`mass_coef_from_heat`]: h = h_m ρ c_p Le^(2/3).
pub fn heat_coef_from_mass(hm: f64, air: &AirProperties) -> f64 {
    hm * air.density * air.specific_heat * lewis(air).powf(2.0 / 3.0)
}
