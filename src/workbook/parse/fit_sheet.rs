//! The optional `fit` key sheet: which parameters to estimate from `measured` (`parameters`, a
//! comma list) and for which material (`material`, default the first layer's).

use std::collections::HashMap;

use super::context::Ctx;
use super::sheets::{Found, KeySheet, canonical, sheet_loc};
use super::{InputValue, Measured, Parsed};
use crate::fit::{FitRequest, Parameter};

/// Keys of the `fit` sheet.
const FIT_KEYS: &[&str] = &["parameters", "material"];

/// Reads the `fit` sheet, if the book has one. Unknown parameter words and material names are
/// problems at their cell; a parameter listed twice, or a list without measured points, is a
/// warning.
pub(super) fn read(
    found: Found<'_>,
    names: &HashMap<String, usize>,
    first_layer_material: Option<usize>,
    has_measured: bool,
    ctx: &mut Ctx,
) -> Option<FitRequest> {
    found.sheet?;
    let keys = KeySheet::read("fit", found, FIT_KEYS, ctx);
    let (v, loc) = keys.get("parameters");
    let mut parameters = Vec::new();
    let mut bad = false;
    if let Ok(Some(list)) = ctx.text(v, &loc, None) {
        for word in list
            .split([',', ';'])
            .map(str::trim)
            .filter(|w| !w.is_empty())
        {
            match Parameter::from_key(word) {
                Some(p) if parameters.contains(&p) => {
                    ctx.warn(
                        &loc,
                        format!("{word} is listed twice; it is estimated once"),
                    );
                }
                Some(p) => parameters.push(p),
                None => {
                    bad = true;
                    let known: Vec<&str> = Parameter::ALL.iter().map(|p| p.key()).collect();
                    ctx.problem(
                        &loc,
                        None,
                        format!(
                            "unknown parameter \"{word}\" in the parameters list (known: {})",
                            known.join(", ")
                        ),
                    );
                }
            }
        }
        ctx.record(
            String::from("fit.parameters"),
            InputValue::Text(list),
            "",
            loc.source(),
        );
    }
    let (v, loc) = keys.get("material");
    let material = match ctx.text(v, &loc, None) {
        Ok(Some(name)) => match names.get(&canonical(&name)) {
            Some(&i) => {
                ctx.record(
                    String::from("fit.material"),
                    InputValue::Text(name),
                    "",
                    loc.source(),
                );
                Some(i)
            }
            None => {
                ctx.problem(
                    &loc,
                    None,
                    format!("the material \"{name}\" is not on the materials sheet"),
                );
                return None;
            }
        },
        _ => first_layer_material,
    };
    if bad {
        return None;
    }
    if !parameters.is_empty() && !has_measured {
        ctx.warn(
            &sheet_loc("fit", found),
            "parameters are listed but there is no measured sheet with points to fit; nothing \
             is estimated",
        );
    }
    Some(FitRequest {
        parameters,
        material: material.unwrap_or(0),
    })
}

impl Parsed {
    /// The measured points in SI units (time in s, moisture as a dry-basis fraction).
    pub fn measured_si(&self) -> Vec<crate::case::Measured> {
        self.measured.iter().map(Measured::to_si).collect()
    }

    /// What the result's `fit` sheet shows for `run` of this case: `None` without measured
    /// points; with them, the comparison and drying models, and the estimation the `fit`
    /// sheet asks for (within `budget`).
    pub fn fit_report(
        &self,
        run: &crate::solver::RunResult,
        budget: crate::fit::Budget<'_>,
    ) -> Option<crate::fit::FitReport> {
        let measured = self.measured_si();
        if measured.is_empty() {
            return None;
        }
        let estimation = self
            .fit
            .as_ref()
            .filter(|request| !request.parameters.is_empty())
            .map(|request| crate::fit::estimate(&self.case, &measured, request, budget));
        Some(crate::fit::report(&self.case, run, &measured, estimation))
    }
}

impl Measured {
    /// The point in SI units.
    pub fn to_si(&self) -> crate::case::Measured {
        crate::case::Measured {
            time: self.hours * 3600.0,
            moisture: self.moisture,
            surface_temp_c: self.surface_temp_c,
            centre_temp_c: self.centre_temp_c,
        }
    }
}
