//! The case workbook format in one place: every sheet, key and column with its unit as the
//! user types it, its conversion to SI, its default, its lower bound and plausible range, and
//! a note.
//!
//! The parser reads by these tables (known keys and columns, what a message says was expected,
//! bounds and ranges checked at the cell in the user's unit, SI conversion, defaults, the
//! result's `input` sheet records), templates take their header notes from them, and variant
//! paths (`layers.thickness_mm[1]`) are checked against them. What needs more than one value
//! (a wet bulb above the dry bulb, an exchange column a step lacks) stays in
//! [`Case::validate`](crate::case::Case::validate).

use crate::case::ranges;

/// What kind of value a field holds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Kind {
    /// A number, converted by the field's [`Conv`].
    Number,
    /// A whole number.
    Integer,
    /// A moisture in % on the case's basis, held as a dry-basis fraction.
    Moisture,
    /// Free text (a label or a name).
    Text,
    /// One of these words (matched without regard to capitals).
    Word(&'static [&'static str]),
    /// A list of numbers in one cell (`0, 2, 8, 24`).
    List,
}

/// Conversion from the user's unit to the SI unit the case holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Conv {
    /// Already SI (or a pure number).
    Same,
    /// mm to m.
    Mm,
    /// Hours to seconds.
    Hours,
    /// Minutes to seconds.
    Minutes,
    /// kJ/mol to J/mol.
    Kilo,
    /// Percent to a fraction (relative humidity).
    Percent,
}

impl Conv {
    /// The factor from the user's unit to SI.
    pub fn factor(self) -> f64 {
        match self {
            Conv::Same => 1.0,
            Conv::Mm => 1e-3,
            Conv::Hours => 3600.0,
            Conv::Minutes => 60.0,
            Conv::Kilo => 1000.0,
            Conv::Percent => 0.01,
        }
    }

    /// A value in the user's unit as SI.
    pub fn to_si(self, x: f64) -> f64 {
        match self {
            // Dividing keeps 20 mm at 0.02 m exactly as typed (20 * 1e-3 is not).
            Conv::Mm => x / 1000.0,
            Conv::Percent => x / 100.0,
            _ => x * self.factor(),
        }
    }

    /// An SI value in the user's unit.
    pub fn from_si(self, x: f64) -> f64 {
        match self {
            Conv::Mm => x * 1000.0,
            Conv::Percent => x * 100.0,
            _ => x / self.factor(),
        }
    }
}

/// The least value a field accepts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Min {
    /// Any number.
    Any,
    /// At least 0.
    NonNegative,
    /// Above 0.
    Positive,
}

/// The default of a field left empty.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Default {
    /// None: the value stays unset (or is required).
    None,
    /// This number, in the user's unit.
    Number(f64),
    /// This word or text.
    Text(&'static str),
    /// Worked out from other values; the text says how.
    Derived(&'static str),
}

/// One key of a key sheet or one column of a table sheet.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Field {
    /// The key or header, lower case.
    pub name: &'static str,
    /// The unit as the user types it (`mm`, `h`, `%`, `C`, `kg/m3`); empty for pure numbers
    /// and words.
    pub unit: &'static str,
    /// What it holds.
    pub kind: Kind,
    /// Conversion to SI.
    pub conv: Conv,
    /// The SI unit the case holds it in (for the `input` sheet).
    pub si_unit: &'static str,
    /// The least value.
    pub min: Min,
    /// Plausible range in SI units (the case's own guard, [`crate::case::ranges`]); shown in
    /// the user's unit.
    pub range: Option<(f64, f64)>,
    /// Whether it must be given.
    pub required: bool,
    /// Value when left empty.
    pub default: Default,
    /// Name of the value in the case, for the `input` sheet (`thickness`,
    /// `diffusivity.d_ref`).
    pub quantity: &'static str,
    /// What it means, for templates and readers.
    pub note: &'static str,
}

/// Unit of moistures in input records.
pub const MOISTURE_SI: &str = "fraction (dry basis)";

const fn f(name: &'static str, kind: Kind, note: &'static str) -> Field {
    Field {
        name,
        unit: "",
        kind,
        conv: Conv::Same,
        si_unit: "",
        min: Min::Any,
        range: None,
        required: false,
        default: Default::None,
        quantity: name,
        note,
    }
}

const fn num(name: &'static str, unit: &'static str, note: &'static str) -> Field {
    Field {
        unit,
        si_unit: unit,
        ..f(name, Kind::Number, note)
    }
}

const fn moisture(name: &'static str, quantity: &'static str, note: &'static str) -> Field {
    Field {
        unit: "%",
        si_unit: MOISTURE_SI,
        min: Min::NonNegative,
        quantity,
        ..f(name, Kind::Moisture, note)
    }
}

const fn words(name: &'static str, w: &'static [&'static str], note: &'static str) -> Field {
    Field {
        default: Default::Text(w[0]),
        ..f(name, Kind::Word(w), note)
    }
}

impl Field {
    const fn conv(self, conv: Conv, si_unit: &'static str) -> Field {
        Field {
            conv,
            si_unit,
            ..self
        }
    }
    const fn min(self, min: Min) -> Field {
        Field { min, ..self }
    }
    const fn range(self, r: (f64, f64)) -> Field {
        Field {
            range: Some(r),
            ..self
        }
    }
    const fn required(self) -> Field {
        Field {
            required: true,
            ..self
        }
    }
    const fn default(self, d: f64) -> Field {
        Field {
            default: Default::Number(d),
            ..self
        }
    }
    const fn derived(self, how: &'static str) -> Field {
        Field {
            default: Default::Derived(how),
            ..self
        }
    }
    const fn q(self, quantity: &'static str) -> Field {
        Field { quantity, ..self }
    }

    /// The default in SI units, where it is a number.
    pub fn default_si(&self) -> Option<f64> {
        match self.default {
            Default::Number(x) => Some(self.conv.to_si(x)),
            _ => None,
        }
    }

    /// What a message says was expected: `a number of mm`, `a temperature in °C`.
    pub fn expected(&self) -> String {
        match (self.kind, self.unit) {
            (Kind::Text, _) => String::from("text"),
            (Kind::Word(w), _) => format!("one of {}", w.join(", ")),
            (_, "") => String::from("a number"),
            (_, "h") => String::from("a number of hours"),
            (_, "min") => String::from("a number of minutes"),
            (_, "C") => String::from("a temperature in °C"),
            (_, u) => format!("a number of {u}"),
        }
    }

    /// The plausible range in the user's unit, rounded for messages.
    pub fn user_range(&self) -> Option<(f64, f64)> {
        let tidy = |x: f64| format!("{x:.9e}").parse::<f64>().unwrap_or(x);
        self.range
            .map(|(lo, hi)| (tidy(self.conv.from_si(lo)), tidy(self.conv.from_si(hi))))
    }
}

/// Key sheet or table sheet.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Layout {
    /// Key in column A, value in B.
    Keys,
    /// A header row, then one data row per item.
    Table,
}

/// One sheet of the format.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sheet {
    /// Its name, lower case.
    pub name: &'static str,
    /// Key or table sheet.
    pub layout: Layout,
    /// Whether every case workbook needs it.
    pub required: bool,
    /// Its keys or columns, in the format's order.
    pub fields: &'static [Field],
}

impl Sheet {
    /// The field named `name` (lower case).
    pub fn field(&self, name: &str) -> Option<&'static Field> {
        self.fields.iter().find(|f| f.name == name)
    }

    /// The names of its fields, in order.
    pub fn names(&self) -> Vec<&'static str> {
        self.fields.iter().map(|f| f.name).collect()
    }
}

use Conv::{Hours, Kilo, Minutes, Mm, Percent};
use Min::{NonNegative, Positive};

/// The `case` sheet. `tolerance` is dampfront's extension: the relative local error the step
/// control aims at (checked 1e-10 to 0.1 by the case).
pub const CASE: Sheet = Sheet {
    name: "case",
    layout: Layout::Keys,
    required: true,
    fields: &[
        Field {
            default: Default::Derived("the file name without extension"),
            ..f("title", Kind::Text, "printed on every result sheet")
        },
        words(
            "geometry",
            &["slab", "cylinder", "sphere"],
            "the body's shape",
        ),
        words(
            "exposed",
            &["a", "b", "both", "none"],
            "faces exchanging with the air: a, b, both or none",
        ),
        words(
            "coupling",
            &["moisture", "heat_and_moisture"],
            "moisture: isothermal at the air temperature; heat_and_moisture: the product temperature is solved too",
        ),
        words(
            "moisture_basis",
            &["dry", "wet"],
            "basis of every moisture % (dry: kg water per kg dry solid x 100)",
        )
        .q("basis"),
        Field {
            min: Min::Positive,
            default: Default::Number(crate::case::DEFAULT_CELLS_PER_LAYER as f64),
            ..f(
                "cells_per_layer",
                Kind::Integer,
                "finite-volume cells in each layer, a whole number >= 4",
            )
        },
        num("end_hours", "h", "simulated time limit, h")
            .conv(Hours, "s")
            .min(Positive)
            .range(ranges::END_TIME_S)
            .default(1000.0)
            .q("end_time"),
        moisture(
            "target_moisture_pct",
            "target_moisture",
            "the run stops when the mean moisture reaches this, %",
        ),
        num(
            "output_every_min",
            "min",
            "spacing of the rows on curves, minutes",
        )
        .conv(Minutes, "s")
        .min(Positive)
        .derived("end_hours / 400")
        .q("output_every"),
        Field {
            unit: "h",
            conv: Hours,
            si_unit: "s",
            min: NonNegative,
            default: Default::Derived("6 evenly spaced times"),
            quantity: "profile_times",
            ..f(
                "profile_hours",
                Kind::List,
                "times at which whole profiles are written, a list like 0, 2, 8, 24 (h)",
            )
        },
        num(
            "flow_length_mm",
            "mm",
            "length of the surface along the air flow, mm (convection correlation)",
        )
        .conv(Mm, "m")
        .min(Positive)
        .default(100.0)
        .q("flow_length"),
        num(
            "tolerance",
            "",
            "relative local time error the step control aims at (dampfront's extension)",
        )
        .default(crate::case::DEFAULT_TOLERANCE),
    ],
};

/// The `layers` sheet.
pub const LAYERS: Sheet = Sheet {
    name: "layers",
    layout: Layout::Table,
    required: true,
    fields: &[
        f("name", Kind::Text, "label of the layer"),
        Field {
            required: true,
            ..f("material", Kind::Text, "a name from sheet materials")
        },
        num(
            "thickness_mm",
            "mm",
            "layer thickness in mm (radial for cylinders and spheres); layers are listed from face A",
        )
        .conv(Mm, "m")
        .min(Positive)
        .range(ranges::THICKNESS_M)
        .required()
        .q("thickness"),
        moisture(
            "initial_moisture_pct",
            "initial_moisture",
            "uniform initial moisture, % on the case's basis",
        )
        .required(),
        num("initial_temp_c", "C", "initial temperature, C (coupled runs; default 20)").default(20.0),
    ],
};

/// The `materials` sheet.
pub const MATERIALS: Sheet = Sheet {
    name: "materials",
    layout: Layout::Table,
    required: true,
    fields: &[
        Field {
            required: true,
            ..f(
                "material",
                Kind::Text,
                "the name layers refer to; each name once",
            )
            .q("name")
        },
        num(
            "dry_density_kg_m3",
            "kg/m3",
            "mass of dry solid per m3 of product",
        )
        .min(Positive)
        .range(ranges::DRY_DENSITY)
        .required()
        .q("dry_density"),
        num(
            "d_ref_m2_s",
            "m2/s",
            "moisture diffusivity D at the reference state, m2/s",
        )
        .min(Positive)
        .range(ranges::D_REF)
        .required()
        .q("diffusivity.d_ref"),
        num(
            "d_ref_temp_c",
            "C",
            "reference temperature of d_ref, C (default 25)",
        )
        .default(25.0)
        .q("diffusivity.t_ref_c"),
        moisture(
            "d_ref_moisture_pct",
            "diffusivity.x_ref",
            "reference moisture of d_ref, % (default 0)",
        )
        .default(0.0),
        num(
            "activation_energy_kj_mol",
            "kJ/mol",
            "Arrhenius activation energy of D, kJ/mol",
        )
        .conv(Kilo, "J/mol")
        .min(NonNegative)
        .default(0.0)
        .q("diffusivity.activation_energy"),
        Field {
            si_unit: "per unit dry-basis fraction",
            ..num(
                "moisture_coef",
                "",
                "D grows by exp(moisture_coef * (X - X_ref)), X as dry-basis fraction",
            )
            .default(0.0)
            .q("diffusivity.moisture_coef")
        },
        Field {
            default: Default::Text("none"),
            ..f(
                "isotherm",
                Kind::Word(&["gab", "oswin", "henderson", "wood", "none"]),
                "gab, oswin, henderson, wood or none",
            )
        },
        num(
            "iso_a",
            "",
            "isotherm parameter a (GAB: monolayer moisture Xm, dry fraction)",
        ),
        num("iso_b", "", "isotherm parameter b (GAB: C)"),
        num("iso_c", "", "isotherm parameter c (GAB: K)"),
        num(
            "conductivity_w_mk",
            "W/(m K)",
            "thermal conductivity of the moist product, W/(m K) (coupled runs)",
        )
        .min(Positive)
        .range(ranges::CONDUCTIVITY)
        .q("conductivity"),
        num(
            "specific_heat_j_kgk",
            "J/(kg K)",
            "specific heat of the dry solid, J/(kg K) (coupled runs)",
        )
        .min(Positive)
        .range(ranges::SPECIFIC_HEAT)
        .q("specific_heat"),
    ],
};

/// The `schedule` sheet.
pub const SCHEDULE: Sheet = Sheet {
    name: "schedule",
    layout: Layout::Table,
    required: true,
    fields: &[
        f("step", Kind::Text, "label of the step").q("label"),
        num("hours", "h", "duration of the step, h")
            .conv(Hours, "s")
            .min(Positive)
            .q("duration"),
        moisture(
            "until_moisture_pct",
            "until_moisture",
            "the step ends when the mean moisture reaches this",
        ),
        num("dry_bulb_c", "C", "air temperature, C")
            .range(ranges::DRY_BULB_C)
            .required(),
        num("rh_pct", "%", "air relative humidity, %")
            .conv(Percent, "fraction")
            .min(NonNegative)
            .q("humidity.relative"),
        num(
            "wet_bulb_c",
            "C",
            "wet-bulb temperature, C (instead of rh_pct)",
        )
        .q("humidity.wet_bulb_c"),
        moisture(
            "equilibrium_moisture_pct",
            "equilibrium_moisture",
            "moisture the surface tends to, instead of the isotherm's",
        ),
        moisture(
            "surface_moisture_pct",
            "exchange.fixed_surface",
            "fix the exposed surfaces at this moisture",
        ),
        num(
            "surface_coef_m_s",
            "m/s",
            "content-based surface coefficient beta, m/s",
        )
        .min(Positive)
        .q("exchange.surface_coefficient"),
        num("hm_m_s", "m/s", "air-side mass transfer coefficient, m/s")
            .min(Positive)
            .q("exchange.air_side"),
        num(
            "h_w_m2k",
            "W/(m2 K)",
            "heat transfer coefficient, W/(m2 K) (coupled runs)",
        )
        .min(Positive)
        .range(ranges::HEAT_COEF)
        .q("heat_coef"),
        num(
            "air_velocity_m_s",
            "m/s",
            "air velocity over the surface, m/s (hm from a flat-plate correlation)",
        )
        .min(Positive)
        .q("exchange.air_velocity"),
        Field {
            default: Default::Text("no"),
            ..f(
                "ramp",
                // The parser reads true/false, 1/0 and logical cells as yes/no.
                Kind::Word(&["yes", "no", "true", "false", "1", "0"]),
                "yes: air moves linearly from the previous step's values over this step",
            )
        },
    ],
};

/// The `measured` sheet (its rows belong to the fit).
pub const MEASURED: Sheet = Sheet {
    name: "measured",
    layout: Layout::Table,
    required: false,
    fields: &[
        num("hours", "h", "time of the measurement, h")
            .min(NonNegative)
            .required(),
        moisture(
            "moisture_pct",
            "moisture",
            "measured mean moisture, % on the case's basis",
        )
        .required(),
        num("surface_temp_c", "C", "measured surface temperature, C"),
        num("centre_temp_c", "C", "measured centre temperature, C"),
    ],
};

/// The `fit` sheet (parameter estimation from `measured`).
pub const FIT: Sheet = Sheet {
    name: "fit",
    layout: Layout::Keys,
    required: false,
    fields: &[
        f(
            "parameters",
            Kind::Text,
            "comma list of what to estimate: d_ref, activation_energy, moisture_coef, surface_coef, hm",
        ),
        Field {
            default: Default::Derived("the first layer's material"),
            ..f(
                "material",
                Kind::Text,
                "the material whose parameters are estimated",
            )
        },
    ],
};

/// The `variants` sheet: `variant` names a row, every other header is a path (see
/// [`crate::study`]).
pub const VARIANTS: Sheet = Sheet {
    name: "variants",
    layout: Layout::Table,
    required: false,
    fields: &[f(
        "variant",
        Kind::Text,
        "name of the variant; every other header is a path: case.KEY or SHEET.COLUMN[ROW] (ROW from 1, * for every row)",
    )],
};

/// Every sheet, in the format page's order.
pub const SHEETS: [&Sheet; 7] = [
    &CASE, &LAYERS, &MATERIALS, &SCHEDULE, &MEASURED, &FIT, &VARIANTS,
];

/// The sheet named `name` (compared after trimming, without regard to capitals).
pub fn sheet(name: &str) -> Option<&'static Sheet> {
    let name = name.trim().to_lowercase();
    SHEETS.into_iter().find(|s| s.name == name)
}

/// The field of `sheet` named `name` (both compared after trimming, without regard to
/// capitals).
pub fn field(sheet_name: &str, name: &str) -> Option<&'static Field> {
    sheet(sheet_name)?.field(&name.trim().to_lowercase())
}

/// The note of a header or key, on whichever sheet has it first.
pub fn note(name: &str) -> Option<&'static str> {
    SHEETS
        .into_iter()
        .find_map(|s| s.field(name))
        .map(|f| f.note)
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    #[test]
    fn temperatures_are_expected_in_degrees_celsius() {
        let f = field("schedule", "dry_bulb_c").unwrap();
        assert_eq!(f.expected(), "a temperature in °C");
        assert_eq!(
            field("layers", "thickness_mm").unwrap().expected(),
            "a number of mm"
        );
    }

    #[test]
    fn names_are_unique_lower_case_and_documented() {
        for s in SHEETS {
            let mut names = s.names();
            for n in &names {
                assert_eq!(*n, n.trim().to_lowercase(), "{n}");
            }
            names.sort_unstable();
            names.dedup();
            assert_eq!(names.len(), s.fields.len(), "{}", s.name);
            for f in s.fields {
                assert!(!f.note.is_empty(), "{}.{}", s.name, f.name);
            }
        }
    }

    #[test]
    fn ranges_read_in_the_users_unit() {
        // 1e-6 m to 10 m is 0.001 mm to 10000 mm (1 m = 1000 mm, SI definition).
        assert_eq!(
            field("layers", "thickness_mm").unwrap().user_range(),
            Some((0.001, 10000.0))
        );
        // 3.6 s to 3.6e9 s is 0.001 h to 1e6 h (1 h = 3600 s, SI definition).
        assert_eq!(
            field("CASE", " End_Hours ").unwrap().user_range(),
            Some((0.001, 1e6))
        );
        assert_eq!(Conv::Mm.to_si(20.0), 0.02);
        assert_eq!(Conv::Hours.to_si(2.0), 7200.0);
    }

    #[test]
    fn defaults_convert_to_si() {
        assert_eq!(
            field("case", "end_hours").unwrap().default_si(),
            Some(3.6e6)
        );
        assert_eq!(
            field("case", "flow_length_mm").unwrap().default_si(),
            Some(0.1)
        );
        assert_eq!(field("layers", "thickness_mm").unwrap().default_si(), None);
    }
}
