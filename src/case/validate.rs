//! Semantic checks of a [`Case`]: ranges, consistency between sheets, and what the physics needs.

use std::fmt;

use super::{Case, Coupling, Exchange, Exposed, Geometry, Humidity};
use crate::physics::Isotherm;

/// Where in the case a problem lies, in the vocabulary of the case workbook.
///
/// Row indices count from 0 over the case's lists; the workbook layer maps them to cells.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Place {
    /// A whole sheet (e.g. an empty list).
    Sheet(&'static str),
    /// A key of the `case` sheet.
    Case(&'static str),
    /// A column of a layer row.
    Layer {
        /// Row in the case's layer list.
        index: usize,
        /// Column name.
        column: &'static str,
    },
    /// A column of a material row.
    Material {
        /// Row in the case's material list.
        index: usize,
        /// Column name.
        column: &'static str,
    },
    /// A column of a schedule row.
    Step {
        /// Row in the case's schedule.
        index: usize,
        /// Column name.
        column: &'static str,
    },
}

impl fmt::Display for Place {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Place::Sheet(s) => write!(f, "{s}"),
            Place::Case(k) => write!(f, "case.{k}"),
            Place::Layer { index, column } => write!(f, "layers row {} {column}", index + 1),
            Place::Material { index, column } => {
                write!(f, "materials row {} {column}", index + 1)
            }
            Place::Step { index, column } => write!(f, "schedule row {} {column}", index + 1),
        }
    }
}

/// One thing wrong with a case.
#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    /// Where it is.
    pub place: Place,
    /// What is wrong, as a sentence.
    pub message: String,
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.place, self.message)
    }
}

/// Plausible ranges in SI units, each `(low, high)`: a value outside is a unit slip or a typing
/// mistake, and is refused. The workbook schema shows them in the user's units at the cell
/// (`workbook::schema`); [`Case::validate`] keeps them as the model's own guard for cases built
/// in code (tests, fits).
pub mod ranges {
    /// End time, s: 3.6 s to about 114 years; beyond either end a unit mistake, and a
    /// vanishing end time makes the step control crawl.
    pub const END_TIME_S: (f64, f64) = (3.6, 3.6e9);
    /// Layer thickness, m.
    pub const THICKNESS_M: (f64, f64) = (1e-6, 10.0);
    /// Dry density, kg/m3 (common practice): lighter than aerogel or denser than osmium is a
    /// units mistake.
    pub const DRY_DENSITY: (f64, f64) = (1.0, 25_000.0);
    /// Reference diffusivity, m2/s (common practice): beyond that of vapour in air is a units
    /// mistake.
    pub const D_REF: (f64, f64) = (1e-20, 1e-4);
    /// Thermal conductivity, W/(m K) (common practice): still air 0.026 and copper 400 bound
    /// every product; outside that, a unit slip (mW, or W/(cm K)).
    pub const CONDUCTIVITY: (f64, f64) = (0.01, 500.0);
    /// Specific heat of the dry solid, J/(kg K) (common practice): dry solids lie near
    /// 500-2500; kJ typed for J is 1000x.
    pub const SPECIFIC_HEAT: (f64, f64) = (100.0, 10_000.0);
    /// Heat transfer coefficient, W/(m2 K) (common practice): free convection in still air is
    /// about 2, condensing steam about 1e5; beyond those a unit slip is likelier than a dryer.
    pub const HEAT_COEF: (f64, f64) = (0.1, 1e5);
    /// Air dry bulb, degrees C.
    pub const DRY_BULB_C: (f64, f64) = (-60.0, 350.0);
}

/// The most cells a case may ask for: beyond this a 1-D run gains nothing and memory grows.
pub const MAX_TOTAL_CELLS: usize = crate::limits::MAX_TOTAL_CELLS;

/// A value for a message: an infinity here comes from a huge number (such as 1e308) that
/// overflowed when its unit was converted, so say that rather than "inf".
fn shown(value: f64) -> String {
    if value.is_infinite() {
        String::from("a number too large to use (it overflows when converted to SI units)")
    } else if value != 0.0 && !(1e-4..1e6).contains(&value.abs()) {
        // 1e308 rather than three hundred digits.
        format!("{value:e}")
    } else {
        value.to_string()
    }
}

struct Checker {
    problems: Vec<Problem>,
}

impl Checker {
    fn push(&mut self, place: Place, message: impl Into<String>) {
        self.problems.push(Problem {
            place,
            message: message.into(),
        });
    }

    /// Requires `value` finite and > 0.
    fn positive(&mut self, place: Place, what: &str, value: f64) {
        if !value.is_finite() || value <= 0.0 {
            let value = shown(value);
            self.push(place, format!("{what} must be a number > 0, found {value}"));
        }
    }

    /// Requires `value` finite and >= 0.
    fn non_negative(&mut self, place: Place, what: &str, value: f64) {
        if !value.is_finite() || value < 0.0 {
            let value = shown(value);
            self.push(
                place,
                format!("{what} must be a number >= 0, found {value}"),
            );
        }
    }

    /// Requires `lo <= value <= hi` (a finite value outside is named with the range).
    fn within(&mut self, place: Place, what: &str, value: f64, lo: f64, hi: f64, unit: &str) {
        if value.is_finite() && value > 0.0 && !(lo..=hi).contains(&value) {
            let value = shown(value);
            self.push(
                place,
                format!("{what} {value} is outside the plausible range {lo} to {hi} {unit}")
                    .trim_end()
                    .to_string(),
            );
        }
    }

    fn finite(&mut self, place: Place, what: &str, value: f64) {
        if !value.is_finite() {
            let value = shown(value);
            self.push(
                place,
                format!("{what} must be a finite number, found {value}"),
            );
        }
    }
}

pub(super) fn validate(case: &Case) -> Vec<Problem> {
    let mut c = Checker {
        problems: Vec::new(),
    };
    check_settings(case, &mut c);
    check_materials(case, &mut c);
    check_layers(case, &mut c);
    check_interfaces(case, &mut c);
    check_schedule(case, &mut c);
    c.problems
}

fn check_settings(case: &Case, c: &mut Checker) {
    if case.cells_per_layer < 4 {
        c.push(
            Place::Case("cells_per_layer"),
            format!(
                "cells_per_layer must be an integer >= 4, found {}",
                case.cells_per_layer
            ),
        );
    }
    let total = case.cells_per_layer.saturating_mul(case.layers.len());
    if total > MAX_TOTAL_CELLS {
        c.push(
            Place::Case("cells_per_layer"),
            format!("{total} cells in all is more than the limit of {MAX_TOTAL_CELLS}"),
        );
    }
    c.positive(Place::Case("end_hours"), "end_hours", case.end_time);
    // From 3.6 s to about 114 years: beyond either end the number is a unit mistake, and a
    // vanishing end time or tolerance makes the step control crawl.
    let (lo, hi) = ranges::END_TIME_S;
    c.within(
        Place::Case("end_hours"),
        "end time (s)",
        case.end_time,
        lo,
        hi,
        "s",
    );
    if let Some(x) = case.target_moisture {
        c.non_negative(Place::Case("target_moisture_pct"), "target_moisture_pct", x);
    }
    if let Some(dt) = case.output_every {
        c.positive(Place::Case("output_every_min"), "output_every_min", dt);
        if dt.is_finite() && dt > 0.0 && case.end_time / dt > crate::limits::MAX_OUTPUT_ROWS {
            c.push(
                Place::Case("output_every_min"),
                "output_every_min asks for more than a million rows; choose a larger spacing",
            );
        }
    }
    if let Some(times) = &case.profile_times {
        if times.len() > crate::limits::MAX_PROFILE_TIMES {
            c.push(
                Place::Case("profile_hours"),
                "profile_hours lists more than 1000 times",
            );
        }
        for &t in times {
            c.non_negative(Place::Case("profile_hours"), "every profile time", t);
        }
    }
    output_size(case, c);
    c.positive(
        Place::Case("flow_length_mm"),
        "flow_length_mm",
        case.flow_length,
    );
    if !(case.tolerance.is_finite() && case.tolerance >= 1e-10 && case.tolerance <= 0.1) {
        c.push(
            Place::Case("tolerance"),
            format!(
                "tolerance must be a number from 1e-10 to 0.1, found {}",
                shown(case.tolerance)
            ),
        );
    }
    let curved = matches!(case.geometry, Geometry::Cylinder | Geometry::Sphere);
    if curved && matches!(case.exposed, Exposed::B | Exposed::Both) {
        c.push(
            Place::Case("exposed"),
            "a cylinder or sphere has one surface: exposed must be a or none",
        );
    }
    if case.coupling == Coupling::HeatAndMoisture {
        check_coupled(case, c);
    }
}

/// What a coupled run needs beyond a moisture run: thermal properties of every material in a
/// layer, and a heat transfer coefficient wherever the surface law does not imply one.
fn check_coupled(case: &Case, c: &mut Checker) {
    let mut used: Vec<usize> = case.layers.iter().map(|l| l.material).collect();
    used.sort_unstable();
    used.dedup();
    for &i in &used {
        let Some(m) = case.materials.get(i) else {
            continue;
        };
        let at = |column| Place::Material { index: i, column };
        if m.conductivity.is_none() {
            c.push(
                at("conductivity_w_mk"),
                format!(
                    "coupling = heat_and_moisture needs conductivity_w_mk for material {}",
                    m.name
                ),
            );
        }
        if m.specific_heat.is_none() {
            c.push(
                at("specific_heat_j_kgk"),
                format!(
                    "coupling = heat_and_moisture needs specific_heat_j_kgk for material {}",
                    m.name
                ),
            );
        }
    }
    if case.exposed == Exposed::None {
        return;
    }
    for (i, s) in case.schedule.iter().enumerate() {
        let needs_h = matches!(
            s.exchange,
            Exchange::FixedSurface(_) | Exchange::SurfaceCoefficient(_)
        );
        if needs_h && s.heat_coef.is_none() {
            let column = if matches!(s.exchange, Exchange::FixedSurface(_)) {
                "surface_moisture_pct"
            } else {
                "surface_coef_m_s"
            };
            c.push(
                Place::Step {
                    index: i,
                    column: "h_w_m2k",
                },
                format!(
                    "a coupled run needs the surface's heat transfer coefficient: with {column} \
                     give h_w_m2k (with hm_m_s or air_velocity_m_s it follows from the \
                     heat/mass analogy)"
                ),
            );
        }
        if let Some(h) = s.heat_coef {
            c.positive(
                Place::Step {
                    index: i,
                    column: "h_w_m2k",
                },
                "h_w_m2k",
                h,
            );
            // Free convection in still air is about 2 W/(m2 K), condensing steam about 1e5
            // (common practice); beyond those a unit slip is likelier than a dryer.
            c.within(
                Place::Step {
                    index: i,
                    column: "h_w_m2k",
                },
                "h_w_m2k",
                h,
                ranges::HEAT_COEF.0,
                ranges::HEAT_COEF.1,
                "W/(m2 K)",
            );
        }
    }
}

fn check_materials(case: &Case, c: &mut Checker) {
    if case.materials.is_empty() {
        c.push(Place::Sheet("materials"), "no material is defined");
    }
    for (i, m) in case.materials.iter().enumerate() {
        let at = |column| Place::Material { index: i, column };
        c.positive(at("dry_density_kg_m3"), "dry_density_kg_m3", m.dry_density);
        // Plausibility ranges (common practice): lighter than aerogel or denser than osmium,
        // or a moisture diffusivity beyond that of vapour in air, is a units mistake.
        c.within(
            at("dry_density_kg_m3"),
            "dry_density_kg_m3",
            m.dry_density,
            ranges::DRY_DENSITY.0,
            ranges::DRY_DENSITY.1,
            "kg/m3",
        );
        let d = &m.diffusivity;
        c.positive(at("d_ref_m2_s"), "d_ref_m2_s", d.d_ref);
        c.within(
            at("d_ref_m2_s"),
            "d_ref_m2_s",
            d.d_ref,
            ranges::D_REF.0,
            ranges::D_REF.1,
            "m2/s",
        );
        if d.t_ref_c.is_finite() && d.t_ref_c <= -273.15 {
            c.push(
                at("d_ref_temp_c"),
                "d_ref_temp_c must be above absolute zero",
            );
        }
        c.finite(at("d_ref_temp_c"), "d_ref_temp_c", d.t_ref_c);
        c.non_negative(at("d_ref_moisture_pct"), "d_ref_moisture_pct", d.x_ref);
        c.non_negative(
            at("activation_energy_kj_mol"),
            "activation_energy_kj_mol",
            d.activation_energy_j_mol,
        );
        c.finite(at("moisture_coef"), "moisture_coef", d.moisture_coef);
        if d.moisture_coef.abs() > 100.0 {
            c.push(
                at("moisture_coef"),
                "moisture_coef beyond +-100 per unit moisture makes D vary by more than e^100; \
                 check the units (per dry-basis fraction)",
            );
        } else if d.moisture_coef.is_finite() && d.d_ref > 0.0 {
            // The diffusivity a layer starts with, not only the one at the reference moisture:
            // a moisture_coef can carry it past the plausible range (as for d_ref above).
            for layer in case.layers.iter().filter(|l| l.material == i) {
                let factor = d.moisture_coef * (layer.initial_moisture - d.x_ref);
                let at_start = d.d_ref * factor.exp();
                if factor.is_finite() && (at_start > ranges::D_REF.1 || at_start.is_nan()) {
                    c.push(
                        at("moisture_coef"),
                        format!(
                            "moisture_coef {} gives D = {at_start:.3e} m2/s at the initial \
                             moisture of layer '{}' ({} %), above {:e} m2/s (faster than vapour \
                             in air); check the units (per dry-basis fraction) and \
                             d_ref_moisture_pct",
                            shown(d.moisture_coef),
                            layer.name,
                            shown(100.0 * layer.initial_moisture),
                            ranges::D_REF.1,
                        ),
                    );
                }
            }
        }
        for msg in m.isotherm.validate() {
            c.push(at("isotherm"), msg);
        }
        isotherm_ranges(&m.isotherm, c, &at);
        if let Some(k) = m.conductivity {
            c.positive(at("conductivity_w_mk"), "conductivity_w_mk", k);
            // Plausibility (common practice): still air 0.026 W/(m K) and copper 400 bound
            // every product; outside that, a unit slip (mW, or W/(cm K)).
            c.within(
                at("conductivity_w_mk"),
                "conductivity_w_mk",
                k,
                ranges::CONDUCTIVITY.0,
                ranges::CONDUCTIVITY.1,
                "W/(m K)",
            );
        }
        if let Some(cp) = m.specific_heat {
            c.positive(at("specific_heat_j_kgk"), "specific_heat_j_kgk", cp);
            // Dry solids lie near 500-2500 J/(kg K) (common practice); kJ typed for J is 1000x.
            c.within(
                at("specific_heat_j_kgk"),
                "specific_heat_j_kgk",
                cp,
                ranges::SPECIFIC_HEAT.0,
                ranges::SPECIFIC_HEAT.1,
                "J/(kg K)",
            );
        }
    }
}

/// Refuses settings that multiply into a result too large to hold or write: curve rows times
/// curve columns, and profile positions times profile times, against
/// [`crate::limits::MAX_OUTPUT_CELLS`].
fn output_size(case: &Case, c: &mut Checker) {
    use crate::limits::MAX_OUTPUT_CELLS;
    let interval = case.output_interval();
    if !(case.end_time.is_finite() && interval.is_finite() && interval > 0.0) {
        return;
    }
    // Rows: one per output time, plus one at every schedule change; columns: the fixed
    // curve columns and one per layer.
    let rows = case.end_time / interval + case.schedule.len() as f64 + 2.0;
    let curve_cells = rows * (12 + case.layers.len()) as f64;
    let positions = case.cells_per_layer.saturating_mul(case.layers.len()) as f64 + 2.0;
    let times = case.profile_times.as_ref().map_or(6, Vec::len) as f64;
    let profile_cells = positions * times;
    let limit = MAX_OUTPUT_CELLS as f64;
    if curve_cells > limit {
        c.push(
            Place::Case("output_every_min"),
            format!(
                "the curves would hold about {curve_cells:.3e} cells ({rows:.0} rows), more than \
                 the {MAX_OUTPUT_CELLS} a result may hold; choose a larger output_every_min"
            ),
        );
    }
    if profile_cells > limit {
        c.push(
            Place::Case("profile_hours"),
            format!(
                "the profiles would hold about {profile_cells:.3e} cells ({positions:.0} \
                 positions x {times:.0} times), more than the {MAX_OUTPUT_CELLS} a result may \
                 hold; list fewer profile_hours or use fewer cells_per_layer"
            ),
        );
    }
}

/// Plausibility ranges of the isotherm constants, each reported at its own column. Values far
/// outside them (a GAB C of 1e308, a K of 5e-324, an Oswin b of 1e-300) are typing or unit
/// mistakes, and they make the inverse isotherm so steep that a run crawls for minutes.
/// The ranges are wide around published fits for foods, wood, clays and polymers (common
/// practice: GAB C about 1-500, K 0.5-1; Oswin b 0.1-1.5; modified Henderson b 1-3, c 0-300).
fn isotherm_ranges(iso: &Isotherm, c: &mut Checker, at: &dyn Fn(&'static str) -> Place) {
    match *iso {
        Isotherm::Gab { c: gab_c, k, .. } => {
            c.within(at("iso_b"), "GAB constant C (iso_b)", gab_c, 0.01, 1e6, "");
            c.within(at("iso_c"), "GAB constant K (iso_c)", k, 0.01, 1.0, "");
        }
        Isotherm::Oswin { a, b } => {
            c.within(at("iso_a"), "Oswin constant a (iso_a)", a, 1e-4, 5.0, "");
            c.within(at("iso_b"), "Oswin constant b (iso_b)", b, 0.01, 10.0, "");
        }
        Isotherm::Henderson { a, b, c: hc } => {
            c.within(
                at("iso_a"),
                "Henderson constant a (iso_a)",
                a,
                1e-12,
                10.0,
                "",
            );
            c.within(
                at("iso_b"),
                "Henderson constant b (iso_b)",
                b,
                0.05,
                20.0,
                "",
            );
            if hc.is_finite() && !(-200.0..=2000.0).contains(&hc) {
                c.push(
                    at("iso_c"),
                    format!(
                        "Henderson constant c (iso_c) {hc} is outside the plausible range -200 to \
                         2000 C"
                    ),
                );
            }
        }
        Isotherm::None | Isotherm::Wood => {}
    }
}

fn check_layers(case: &Case, c: &mut Checker) {
    if case.layers.is_empty() {
        c.push(Place::Sheet("layers"), "no layer is defined");
    }
    for (i, l) in case.layers.iter().enumerate() {
        let at = |column| Place::Layer { index: i, column };
        if l.material >= case.materials.len() {
            c.push(
                at("material"),
                "the material is not defined on sheet materials",
            );
        }
        c.positive(at("thickness_mm"), "thickness_mm", l.thickness);
        c.within(
            at("thickness_mm"),
            "thickness (m)",
            l.thickness,
            ranges::THICKNESS_M.0,
            ranges::THICKNESS_M.1,
            "m",
        );
        c.non_negative(
            at("initial_moisture_pct"),
            "initial_moisture_pct",
            l.initial_moisture,
        );
        if !(l.initial_temp_c.is_finite() && l.initial_temp_c > -273.15) {
            c.push(
                at("initial_temp_c"),
                format!(
                    "initial_temp_c must be a temperature above absolute zero, found {}",
                    l.initial_temp_c
                ),
            );
        }
    }
}

fn check_interfaces(case: &Case, c: &mut Checker) {
    // Water activity carries moisture across a boundary between materials: both need one.
    for (i, pair) in case.layers.windows(2).enumerate() {
        if pair[0].material == pair[1].material {
            continue;
        }
        for (index, layer) in [(i, &pair[0]), (i + 1, &pair[1])] {
            let none = case
                .materials
                .get(layer.material)
                .is_some_and(|m| m.isotherm == Isotherm::None);
            if none {
                c.push(
                    Place::Layer {
                        index,
                        column: "material",
                    },
                    "layers of different materials meet here: both materials need an isotherm \
                     (water activity is continuous across the boundary)",
                );
            }
        }
    }
}

fn check_schedule(case: &Case, c: &mut Checker) {
    if case.schedule.is_empty() {
        c.push(Place::Sheet("schedule"), "the schedule has no step");
    }
    let exposed = case.exposed != Exposed::None;
    let surface_isotherms: Vec<Isotherm> = case
        .exposed_materials()
        .iter()
        .map(|m| m.isotherm)
        .collect();
    let has_isotherm =
        !surface_isotherms.is_empty() && surface_isotherms.iter().all(|iso| *iso != Isotherm::None);
    let last = case.schedule.len().saturating_sub(1);
    for (i, s) in case.schedule.iter().enumerate() {
        let at = |column| Place::Step { index: i, column };
        let (lo, hi) = ranges::DRY_BULB_C;
        if !(s.dry_bulb_c.is_finite() && (lo..=hi).contains(&s.dry_bulb_c)) {
            c.push(
                at("dry_bulb_c"),
                format!(
                    "dry_bulb_c must be a temperature between -60 and 350 C, found {}",
                    s.dry_bulb_c
                ),
            );
        }
        if let Some(d) = s.duration {
            c.positive(at("hours"), "hours", d);
        }
        if let Some(x) = s.until_moisture {
            c.non_negative(at("until_moisture_pct"), "until_moisture_pct", x);
        }
        if i != last && s.duration.is_none() && s.until_moisture.is_none() {
            c.push(
                at("hours"),
                "a step before the last needs hours or until_moisture_pct (or both) to end",
            );
        }
        if s.ramp {
            if i == 0 {
                c.push(
                    at("ramp"),
                    "the first step has no previous step to ramp from",
                );
            }
            if s.duration.is_none() {
                c.push(at("ramp"), "a ramped step needs hours (the ramp's length)");
            }
        }
        match s.humidity {
            Humidity::Relative(rh) => {
                if !(rh.is_finite() && (0.0..=1.0).contains(&rh)) {
                    c.push(
                        at("rh_pct"),
                        format!("rh_pct must be between 0 and 100, found {}", rh * 100.0),
                    );
                }
            }
            Humidity::WetBulb(tw) => {
                if !tw.is_finite() || tw > s.dry_bulb_c + 1e-9 {
                    c.push(
                        at("wet_bulb_c"),
                        format!("wet_bulb_c must be at or below the dry bulb, found {tw}"),
                    );
                }
            }
            Humidity::Unspecified => {}
        }
        if let Some(x) = s.equilibrium_moisture {
            c.non_negative(
                at("equilibrium_moisture_pct"),
                "equilibrium_moisture_pct",
                x,
            );
        }
        if !exposed {
            continue;
        }
        if case.layers.is_empty() {
            // Without layers there is no surface material: the exchange's needs (an
            // isotherm) cannot be judged, and "no layer is defined" says what is wrong.
            continue;
        }
        let humid = s.humidity != Humidity::Unspecified;
        match s.exchange {
            Exchange::Unspecified => c.push(
                at("surface_coef_m_s"),
                "the step states no surface exchange: give one of surface_moisture_pct, \
                 surface_coef_m_s, hm_m_s, air_velocity_m_s",
            ),
            Exchange::FixedSurface(x) => {
                c.non_negative(at("surface_moisture_pct"), "surface_moisture_pct", x)
            }
            Exchange::SurfaceCoefficient(beta) => {
                c.positive(at("surface_coef_m_s"), "surface_coef_m_s", beta);
                if s.equilibrium_moisture.is_none() {
                    if !has_isotherm {
                        c.push(
                            at("equilibrium_moisture_pct"),
                            "the surface material has isotherm none: this step must fix the \
                             surface or give equilibrium_moisture_pct",
                        );
                    } else if !humid {
                        c.push(
                            at("rh_pct"),
                            "give rh_pct or wet_bulb_c (or equilibrium_moisture_pct) for the \
                             surface's equilibrium moisture",
                        );
                    }
                }
            }
            Exchange::AirSide(v) | Exchange::AirVelocity(v) => {
                let column = if matches!(s.exchange, Exchange::AirSide(_)) {
                    "hm_m_s"
                } else {
                    "air_velocity_m_s"
                };
                c.positive(at(column), column, v);
                if !has_isotherm {
                    c.push(
                        at(column),
                        "air-side exchange needs the surface's water activity: the surface \
                         material needs an isotherm (not none)",
                    );
                }
                if !humid {
                    c.push(at("rh_pct"), "air-side exchange needs rh_pct or wet_bulb_c");
                }
                // One rule for the equilibrium: with the air-side law the surface tends to the
                // isotherm's moisture at the air's humidity, which the moisture ratio uses too.
                if s.equilibrium_moisture.is_some() {
                    c.push(
                        at("equilibrium_moisture_pct"),
                        format!(
                            "with {column} the surface tends to the isotherm's equilibrium at the \
                             air's humidity; leave equilibrium_moisture_pct empty, or use \
                             surface_coef_m_s to give the equilibrium yourself"
                        ),
                    );
                }
            }
        }
    }
}
