//! Physical property functions for drying: psychrometrics, sorption isotherms, moisture
//! diffusivity and convective transfer coefficients.
//!
//! Everything here is a pure function of its arguments: no I/O, no allocation, no dependency on
//! other modules of the crate, so the solver can call it in its inner loop.
//!
//! Units: temperatures in degrees C unless a name ends in `_k`; moisture X as a dry-basis
//! fraction (kg water per kg dry solid); water activity and relative humidity as fractions
//! 0..1; SI for everything else.
//!
//! Bad input never panics. Where a value has no meaning (a NaN argument, a zero length) the
//! result is NaN or infinite as IEEE arithmetic gives it, and each function's documentation says
//! what it does at the edges of its range. Checking input belongs to the case module.

pub mod diffusivity;
pub mod isotherm;
pub mod psychro;
pub mod transfer;

pub use diffusivity::Diffusivity;
pub use isotherm::{AW_MAX, Isotherm};
pub use psychro::{
    MOLAR_MASS_RATIO, humidity_ratio_from_rh, humidity_ratio_from_wet_bulb, latent_heat_j_kg,
    rh_from_wet_bulb, saturation_pressure_pa, saturation_pressure_slope_pa_k, vapour_density_kg_m3,
};
pub use transfer::{
    AirProperties, CRITICAL_REYNOLDS, air_properties, flat_plate_heat_coef, flat_plate_mass_coef,
    flat_plate_number, heat_coef_from_mass, mass_coef_from_heat,
};

/// Molar gas constant R in J/(mol K), the value the workbook format names for the Arrhenius term.
pub const GAS_CONSTANT: f64 = 8.314;

/// Molar mass of water in kg/mol.
pub const MOLAR_MASS_WATER: f64 = 0.018015;

/// Molar mass of dry air in kg/mol (ASHRAE Handbook—Fundamentals, ch. 1: 28.966 g/mol).
pub const MOLAR_MASS_DRY_AIR: f64 = 0.028966;

/// Standard atmospheric pressure in Pa.
pub const STANDARD_PRESSURE_PA: f64 = 101_325.0;

/// 0 degrees C in kelvin.
pub const ZERO_CELSIUS_K: f64 = 273.15;

/// Converts degrees C to kelvin.
#[inline]
pub fn kelvin(t_c: f64) -> f64 {
    t_c + ZERO_CELSIUS_K
}
