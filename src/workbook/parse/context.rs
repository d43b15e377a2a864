//! The parser's working state (problems, warnings, records, which places already failed) and
//! the readers of single cells: numbers, text, words, moistures.

use std::collections::HashSet;

use super::{InputRecord, InputValue};
use crate::case::{MoistureBasis, Place};
use crate::workbook::raw::RawValue;
use crate::workbook::read::NO_CACHED_VALUE;
use crate::workbook::schema::{Field, Min};

/// Marks a value whose problem has already been recorded.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Bad;

/// A value read from a cell: `Ok(None)` for a blank cell, `Err(Bad)` when a problem was
/// recorded.
pub(super) type Read<T> = Result<Option<T>, Bad>;

/// Where a value is, for messages: the sheet as written, the A1 cell (empty for a whole sheet),
/// a context for a row whose column is missing, and a sort key (sheet order, row, column).
#[derive(Debug, Clone, PartialEq, Eq)]
pub(super) struct Loc {
    pub sheet: String,
    pub cell: String,
    /// Prefix for the message where `cell` is empty but a row is known, such as
    /// `row 7, column hours (not in the header)`.
    pub context: String,
    pub order: (usize, u32, u32),
}

impl Loc {
    /// `sheet!C4`, for the `source` of an input record.
    pub fn source(&self) -> String {
        if self.cell.is_empty() {
            self.sheet.clone()
        } else {
            format!("{}!{}", self.sheet, self.cell)
        }
    }
}

/// What a message says a numeric place expected: a unit as the user types it (`mm`, `h`,
/// `C`), from the schema.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Unit(pub &'static str);

impl Unit {
    /// A pure number.
    pub const PLAIN: Unit = Unit("");

    fn expected(self) -> String {
        match self.0 {
            "" => String::from("a number"),
            "h" => String::from("a number of hours"),
            "min" => String::from("a number of minutes"),
            "C" => String::from("a temperature in °C"),
            u => format!("a number of {u}"),
        }
    }
}

/// Numeric text with a `.` decimal point: optional sign, digits with at most one `.`, optional
/// exponent (`1.2e-9`). Words such as `inf` or `NaN`, thousands separators and decimal commas
/// are refused, so nothing a user did not mean as a number is read as one.
pub(super) fn parse_number_text(s: &str) -> Option<f64> {
    let t = s.trim();
    let b = t.as_bytes();
    let mut i = 0;
    let digits = |i: &mut usize| {
        let start = *i;
        while *i < b.len() && b[*i].is_ascii_digit() {
            *i += 1;
        }
        *i - start
    };
    if i < b.len() && (b[i] == b'+' || b[i] == b'-') {
        i += 1;
    }
    let mut n = digits(&mut i);
    if i < b.len() && b[i] == b'.' {
        i += 1;
        n += digits(&mut i);
    }
    if n == 0 {
        return None;
    }
    if i < b.len() && (b[i] == b'e' || b[i] == b'E') {
        i += 1;
        if i < b.len() && (b[i] == b'+' || b[i] == b'-') {
            i += 1;
        }
        if digits(&mut i) == 0 {
            return None;
        }
    }
    if i != b.len() {
        return None;
    }
    t.parse::<f64>().ok().filter(|x| x.is_finite())
}

/// What a message says was found: the value, and for a formula without a result how to get
/// one.
fn found(v: &RawValue) -> String {
    match v {
        RawValue::Error(e) if e == NO_CACHED_VALUE => format!(
            "{e} (open the file in a spreadsheet program and save it, so the result is stored)"
        ),
        _ => v.describe(),
    }
}

/// A number as a message shows it.
pub(super) fn show(x: f64) -> String {
    format!("{x}")
}

/// A number in a range message: 1e308 rather than three hundred digits.
fn show_short(x: f64) -> String {
    if x != 0.0 && !(1e-4..1e7).contains(&x.abs()) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

/// Kinds of [`Place`] as a hashable key.
pub(super) type PlaceKey = (u8, usize, &'static str);

pub(super) fn place_key(p: &Place) -> PlaceKey {
    match p {
        Place::Sheet(s) => (0, 0, s),
        Place::Case(k) => (1, 0, k),
        Place::Layer { index, column } => (2, *index, column),
        Place::Material { index, column } => (3, *index, column),
        Place::Step { index, column } => (4, *index, column),
    }
}

/// Schedule columns that [`crate::case::Case::validate`] checks against each other (humidity,
/// equilibrium and exchange): one failed value makes the others' checks meaningless.
pub(super) const EXCHANGE_GROUP: &[&str] = &[
    "rh_pct",
    "wet_bulb_c",
    "equilibrium_moisture_pct",
    "surface_moisture_pct",
    "surface_coef_m_s",
    "hm_m_s",
    "air_velocity_m_s",
];

/// Schedule columns that say when a step ends.
pub(super) const END_GROUP: &[&str] = &["hours", "until_moisture_pct", "ramp"];

/// The parser's state while it works through a book.
#[derive(Debug)]
pub(super) struct Ctx {
    pub problems: Vec<(Loc, String)>,
    pub warnings: Vec<(Loc, String)>,
    pub records: Vec<InputRecord>,
    /// Places whose value failed, so `Case::validate`'s view of the placeholder is not shown.
    poisoned: HashSet<PlaceKey>,
    /// Columns that failed for every row: (kind of place, column).
    poisoned_columns: HashSet<(u8, &'static str)>,
    /// Set when something every step's exchange check depends on failed (exposed, a layer's
    /// material, a material's isotherm).
    pub exchange_unknown: bool,
    /// Basis of the moisture percentages (dry until the case sheet says otherwise).
    pub basis: MoistureBasis,
}

impl Ctx {
    pub fn new() -> Ctx {
        Ctx {
            problems: Vec::new(),
            warnings: Vec::new(),
            records: Vec::new(),
            poisoned: HashSet::new(),
            poisoned_columns: HashSet::new(),
            exchange_unknown: false,
            basis: MoistureBasis::Dry,
        }
    }

    /// Records a problem at `at`; `place` (if any) is the case place the value belongs to.
    pub fn problem(&mut self, at: &Loc, place: Option<Place>, message: impl Into<String>) {
        let message = message.into();
        let message = if at.context.is_empty() {
            message
        } else {
            format!("{}: {message}", at.context)
        };
        self.problems.push((at.clone(), message));
        if let Some(p) = place {
            self.poison(&p);
        }
    }

    pub fn warn(&mut self, at: &Loc, message: impl Into<String>) {
        let message = message.into();
        let message = if at.context.is_empty() {
            message
        } else {
            format!("{}: {message}", at.context)
        };
        self.warnings.push((at.clone(), message));
    }

    pub fn poison(&mut self, p: &Place) {
        let key = place_key(p);
        if key.0 == 4 && EXCHANGE_GROUP.contains(&key.2) {
            for c in EXCHANGE_GROUP {
                self.poisoned.insert((4, key.1, c));
            }
        } else if key.0 == 4 && END_GROUP.contains(&key.2) {
            for c in END_GROUP {
                self.poisoned.insert((4, key.1, c));
            }
        }
        self.poisoned.insert(key);
    }

    /// Marks a whole column (of layers 2, materials 3, schedule 4) as failed.
    pub fn poison_column(&mut self, kind: u8, column: &'static str) {
        self.poisoned_columns.insert((kind, column));
    }

    /// Whether a problem `Case::validate` reports at `p` only restates one already recorded.
    pub fn suppressed(&self, p: &Place) -> bool {
        let key = place_key(p);
        if self.poisoned.contains(&key) || self.poisoned_columns.contains(&(key.0, key.2)) {
            return true;
        }
        if key.0 == 4 && EXCHANGE_GROUP.contains(&key.2) {
            return self.exchange_unknown
                || EXCHANGE_GROUP
                    .iter()
                    .any(|c| self.poisoned_columns.contains(&(4, c)));
        }
        if key.0 == 4 && END_GROUP.contains(&key.2) {
            return END_GROUP
                .iter()
                .any(|c| self.poisoned_columns.contains(&(4, c)));
        }
        false
    }

    /// Adds a record of what was read, for the result's `input` sheet.
    pub fn record(&mut self, quantity: String, value: InputValue, unit: &str, source: String) {
        self.records.push(InputRecord {
            quantity,
            value,
            unit: unit.to_string(),
            source,
        });
    }

    /// A number from a numeric cell or numeric text; blank is `None`.
    pub fn number(
        &mut self,
        v: &RawValue,
        at: &Loc,
        unit: Unit,
        place: Option<Place>,
    ) -> Read<f64> {
        match v {
            _ if v.is_blank() => Ok(None),
            RawValue::Number(x) => Ok(Some(*x)),
            RawValue::Text(s) => match parse_number_text(s) {
                Some(x) => Ok(Some(x)),
                None => {
                    let hint =
                        if s.contains(',') && parse_number_text(&s.replace(',', ".")).is_some() {
                            "; use a . as the decimal point"
                        } else {
                            ""
                        };
                    self.problem(
                        at,
                        place,
                        format!("expected {}, found {}{hint}", unit.expected(), v.describe()),
                    );
                    Err(Bad)
                }
            },
            _ => {
                self.problem(
                    at,
                    place,
                    format!("expected {}, found {}", unit.expected(), found(v)),
                );
                Err(Bad)
            }
        }
    }

    /// A number that must be given.
    pub fn required_number(
        &mut self,
        v: &RawValue,
        at: &Loc,
        unit: Unit,
        place: Option<Place>,
        what: &str,
    ) -> Result<f64, Bad> {
        match self.number(v, at, unit, place.clone())? {
            Some(x) => Ok(x),
            None => {
                self.problem(
                    at,
                    place,
                    format!("{what} is required ({})", unit.expected()),
                );
                Err(Bad)
            }
        }
    }

    /// A number of a schema field in the user's unit, checked against the field's least value
    /// and plausible range there, so the message quotes the value and range as typed
    /// (`thickness_mm 20000 is outside the plausible range 0.001 to 10000 mm`).
    pub fn field_number(
        &mut self,
        v: &RawValue,
        at: &Loc,
        field: &Field,
        place: Option<Place>,
    ) -> Read<f64> {
        let Some(x) = self.number(v, at, Unit(field.unit), place.clone())? else {
            return Ok(None);
        };
        let name = field.name;
        match field.min {
            Min::Positive if x <= 0.0 => {
                self.problem(
                    at,
                    place,
                    format!("{name} must be a number > 0, found {}", show(x)),
                );
                return Err(Bad);
            }
            Min::NonNegative if x < 0.0 => {
                self.problem(
                    at,
                    place,
                    format!("{name} must be a number >= 0, found {}", show(x)),
                );
                return Err(Bad);
            }
            _ => {}
        }
        if let (Some((lo, hi)), Some((ulo, uhi))) = (field.range, field.user_range()) {
            let si = field.conv.to_si(x);
            if !(lo..=hi).contains(&si) {
                let unit = if field.unit == "C" { "°C" } else { field.unit };
                self.problem(
                    at,
                    place,
                    format!(
                        "{name} {} is outside the plausible range {} to {} {unit}",
                        show_short(x),
                        show_short(ulo),
                        show_short(uhi)
                    )
                    .trim_end()
                    .to_string(),
                );
                return Err(Bad);
            }
        }
        Ok(Some(x))
    }

    /// Text, trimmed; numbers are written as a spreadsheet shows them; blank is `None`.
    pub fn text(&mut self, v: &RawValue, at: &Loc, place: Option<Place>) -> Read<String> {
        match v {
            _ if v.is_blank() => Ok(None),
            RawValue::Text(s) => Ok(Some(s.trim().to_string())),
            RawValue::Number(x) => Ok(Some(show(*x))),
            RawValue::Bool(_) => Ok(Some(v.describe())),
            RawValue::Error(_) => {
                self.problem(at, place, format!("expected text, found {}", found(v)));
                Err(Bad)
            }
            RawValue::Empty => Ok(None),
        }
    }

    /// One of `choices` (matched case-insensitively after trimming); blank is `None`.
    pub fn word<T: Copy>(
        &mut self,
        v: &RawValue,
        at: &Loc,
        place: Option<Place>,
        what: &str,
        choices: &[(&str, T)],
    ) -> Read<T> {
        let found = match v {
            _ if v.is_blank() => return Ok(None),
            RawValue::Text(s) => s.trim().to_lowercase(),
            RawValue::Number(x) => show(*x),
            _ => v.describe().to_lowercase(),
        };
        if let Some((_, t)) = choices.iter().find(|(w, _)| *w == found) {
            return Ok(Some(*t));
        }
        let words: Vec<&str> = choices.iter().map(|(w, _)| *w).collect();
        self.problem(
            at,
            place,
            format!(
                "{what} must be one of {}; found {}",
                words.join(", "),
                v.describe()
            ),
        );
        Err(Bad)
    }

    /// A moisture in % on the case's basis, as a dry-basis fraction. Refuses negative values
    /// and wet-basis values at or above 100 %, with the value as the user typed it.
    pub fn moisture(
        &mut self,
        v: &RawValue,
        at: &Loc,
        place: Option<Place>,
        what: &str,
    ) -> Read<f64> {
        let Some(pct) = self.number(v, at, Unit("%"), place.clone())? else {
            return Ok(None);
        };
        if pct < 0.0 {
            self.problem(
                at,
                place,
                format!("{what} must be a number >= 0, found {}", show(pct)),
            );
            return Err(Bad);
        }
        match self.basis.to_dry_fraction(pct) {
            Some(x) if x.is_finite() => Ok(Some(x)),
            _ => {
                self.problem(
                    at,
                    place,
                    format!(
                        "{what} is {} % on the wet basis; a wet-basis moisture must be below 100 %",
                        show(pct)
                    ),
                );
                Err(Bad)
            }
        }
    }

    /// Records a problem unless `x` >= 0.
    pub fn check_non_negative(
        &mut self,
        x: f64,
        at: &Loc,
        place: Option<Place>,
        what: &str,
    ) -> Result<f64, Bad> {
        if x >= 0.0 {
            Ok(x)
        } else {
            self.problem(
                at,
                place,
                format!("{what} must be a number >= 0, found {}", show(x)),
            );
            Err(Bad)
        }
    }
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    #[test]
    fn numeric_text_with_a_point_is_accepted() {
        assert_eq!(parse_number_text(" 12.5 "), Some(12.5));
        assert_eq!(parse_number_text("-5"), Some(-5.0));
        assert_eq!(parse_number_text("+.5"), Some(0.5));
        assert_eq!(parse_number_text("5."), Some(5.0));
        assert_eq!(parse_number_text("1.2e-9"), Some(1.2e-9));
        assert_eq!(parse_number_text("3E+2"), Some(300.0));
    }

    #[test]
    fn anything_else_is_refused() {
        for s in [
            "", "12,5", "1,234.5", "inf", "NaN", "infinity", "1e", "e5", ".", "-", "1.2.3", "12 %",
            "0x10", "1e999", "1_000", "−5",
        ] {
            assert_eq!(parse_number_text(s), None, "{s:?}");
        }
    }
}
