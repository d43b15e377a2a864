//! Plausibility warnings: values that pass validation but look like a unit slipped (kelvin
//! typed for degrees C, a fraction for a percentage, metres for millimetres, a
//! percent-formatted cell). The case still runs; the warnings go on the result's summary.

use super::{Case, Humidity, Place, Problem};
use crate::text::compact;

/// Temperatures above this (degrees C) look like kelvin: no drying air or product is that hot
/// in the trades this tool serves (common practice: high-temperature kilns stay below ~130 C).
pub const HOT_C: f64 = 150.0;
/// Initial moisture below this (percent on the case's basis) in a case that dries to a level
/// above it looks like a fraction typed for a percentage.
pub const DRY_PCT: f64 = 2.0;
/// A layer thinner than this (m) looks like metres typed for millimetres.
pub const THIN_M: f64 = 0.2e-3;
/// Relative humidity below this (fraction) looks like a percent-formatted cell (85 % stored as
/// 0.85, read as 0.85 %).
pub const LOW_RH: f64 = 0.01;

/// The warning for a temperature that looks like kelvin.
fn kelvin(column: &str, value: f64) -> String {
    format!(
        "{column} is {} °C, above {HOT_C} °C: was a temperature in kelvin typed? \
         (°C = K - 273.15)",
        compact(value)
    )
}

impl Case {
    /// Whether every schedule step's air drives the exposed surface above moisture `x` (dry
    /// fraction), where that equilibrium is known for at least one step.
    fn air_wets_everywhere(&self, x: f64) -> bool {
        let Some(material) = self.exposed_materials().first().copied() else {
            return false;
        };
        let equilibria: Vec<f64> = self
            .schedule
            .iter()
            .filter_map(|s| match s.exchange {
                super::Exchange::FixedSurface(xs) => Some(xs),
                _ => s.equilibrium_moisture.or_else(|| {
                    let rh = s.relative_humidity()?;
                    material.isotherm.equilibrium_moisture(rh, s.dry_bulb_c)
                }),
            })
            .filter(|e| e.is_finite())
            .collect();
        !equilibria.is_empty() && equilibria.iter().all(|&e| e > x)
    }

    /// Values that pass validation but look like a slipped unit, each with its place.
    pub fn plausibility(&self) -> Vec<Problem> {
        let mut out = Vec::new();
        let mut warn = |place: Place, message: String| out.push(Problem { place, message });
        let hot = |v: f64| v.is_finite() && v > HOT_C;
        for (i, s) in self.schedule.iter().enumerate() {
            let at = |column| Place::Step { index: i, column };
            if hot(s.dry_bulb_c) {
                warn(at("dry_bulb_c"), kelvin("dry_bulb_c", s.dry_bulb_c));
            }
            match s.humidity {
                Humidity::WetBulb(tw) if hot(tw) => {
                    warn(at("wet_bulb_c"), kelvin("wet_bulb_c", tw))
                }
                Humidity::Relative(rh) if rh > 0.0 && rh < LOW_RH => warn(
                    at("rh_pct"),
                    format!(
                        "rh_pct is {} %, below 1 %: a cell formatted as a percentage stores \
                         85 % as 0.85; type the plain number (85)",
                        compact(100.0 * rh)
                    ),
                ),
                _ => {}
            }
        }
        // The levels the case asks the mean to reach, on the case's basis.
        let levels: Vec<f64> = self
            .target_moisture
            .iter()
            .chain(
                self.schedule
                    .iter()
                    .filter_map(|s| s.until_moisture.as_ref()),
            )
            .map(|&x| self.basis.from_dry_fraction(x))
            .collect();
        for (i, layer) in self.layers.iter().enumerate() {
            let at = |column| Place::Layer { index: i, column };
            let initial = self.basis.from_dry_fraction(layer.initial_moisture);
            if initial < DRY_PCT && levels.iter().any(|&l| l > initial) {
                warn(
                    at("initial_moisture_pct"),
                    format!(
                        "initial_moisture_pct is {} %, below {DRY_PCT} % while a target or \
                         until_moisture_pct above it is given: was a fraction typed for a \
                         percentage (0.6 for 60 %)?",
                        compact(initial)
                    ),
                );
            } else if initial < DRY_PCT
                && !levels.is_empty()
                && levels.iter().all(|&l| l < initial)
                && self.air_wets_everywhere(layer.initial_moisture)
            {
                // The levels ask to dry, but every step's air would wet the product: the
                // moistures were most likely all typed as fractions (initial 0.6, levels 0.3).
                warn(
                    at("initial_moisture_pct"),
                    format!(
                        "initial_moisture_pct is {} %, below {DRY_PCT} %, and every step's air \
                         would wet the product although its levels ask to dry it: were \
                         fractions typed for percentages (0.6 for 60 %)?",
                        compact(initial)
                    ),
                );
            }
            if layer.thickness < THIN_M {
                warn(
                    at("thickness_mm"),
                    format!(
                        "thickness_mm is {} mm, under 0.2 mm: was a thickness in metres typed?",
                        compact(layer.thickness * 1000.0)
                    ),
                );
            }
            if hot(layer.initial_temp_c) {
                warn(
                    at("initial_temp_c"),
                    kelvin("initial_temp_c", layer.initial_temp_c),
                );
            }
        }
        for (i, m) in self.materials.iter().enumerate() {
            let t = m.diffusivity.t_ref_c;
            if hot(t) {
                warn(
                    Place::Material {
                        index: i,
                        column: "d_ref_temp_c",
                    },
                    kelvin("d_ref_temp_c", t),
                );
            }
        }
        out
    }
}
