//! Each sheet of the format read into its part of the case, with units converted to SI and
//! every value recorded with its source.
//!
//! Where a value fails, a placeholder takes its place so the rest of the book is still read
//! and checked; the placeholder's place is marked failed, and the case is never returned.

use std::collections::HashMap;

use super::Measured;
use super::context::{Bad, Ctx, Loc, MOISTURE_UNIT, Unit, parse_number_text, show};
use super::sheets::{KeySheet, Table, canonical};
use crate::case::{
    Case, Coupling, DEFAULT_CELLS_PER_LAYER, DEFAULT_TOLERANCE, Exchange, Exposed, Geometry,
    Humidity, Layer, Material, MoistureBasis, Place, Step,
};
use crate::physics::{Diffusivity, Isotherm};
use crate::workbook::raw::{RawRow, RawValue};

use super::InputValue::{Number, Text};

/// Keys of the `case` sheet. `tolerance` is an extension of the format: the relative local
/// error of the time stepper (default [`DEFAULT_TOLERANCE`]); `Case::validate` requires
/// 0 < tolerance < 0.1.
pub(super) const CASE_KEYS: &[&str] = &[
    "title",
    "geometry",
    "exposed",
    "coupling",
    "moisture_basis",
    "cells_per_layer",
    "end_hours",
    "target_moisture_pct",
    "output_every_min",
    "profile_hours",
    "flow_length_mm",
    "tolerance",
];

/// Columns of the `layers` sheet.
pub(super) const LAYER_COLUMNS: &[&str] = &[
    "name",
    "material",
    "thickness_mm",
    "initial_moisture_pct",
    "initial_temp_c",
];

/// Columns of the `materials` sheet.
pub(crate) const MATERIAL_COLUMNS: &[&str] = &[
    "material",
    "dry_density_kg_m3",
    "d_ref_m2_s",
    "d_ref_temp_c",
    "d_ref_moisture_pct",
    "activation_energy_kj_mol",
    "moisture_coef",
    "isotherm",
    "iso_a",
    "iso_b",
    "iso_c",
    "conductivity_w_mk",
    "specific_heat_j_kgk",
];

/// Columns of the `schedule` sheet.
pub(super) const SCHEDULE_COLUMNS: &[&str] = &[
    "step",
    "hours",
    "until_moisture_pct",
    "dry_bulb_c",
    "rh_pct",
    "wet_bulb_c",
    "equilibrium_moisture_pct",
    "surface_moisture_pct",
    "surface_coef_m_s",
    "hm_m_s",
    "h_w_m2k",
    "air_velocity_m_s",
    "ramp",
];

/// Columns of the `measured` sheet.
pub(super) const MEASURED_COLUMNS: &[&str] =
    &["hours", "moisture_pct", "surface_temp_c", "centre_temp_c"];

/// Most schedule steps read; a longer schedule is refused rather than run slowly.
pub const MAX_STEPS: usize = 2000;

/// Default `end_hours`.
const DEFAULT_END_HOURS: f64 = 1000.0;
/// Default `flow_length_mm`.
const DEFAULT_FLOW_LENGTH_MM: f64 = 100.0;
/// Default `d_ref_temp_c`.
const DEFAULT_T_REF_C: f64 = 25.0;
/// Default `initial_temp_c`.
const DEFAULT_INITIAL_TEMP_C: f64 = 20.0;

fn source(v: &RawValue, at: &Loc) -> String {
    if v.is_blank() {
        String::from("default")
    } else {
        at.source()
    }
}

/// Reads the `case` sheet. The basis comes first, since every moisture depends on it.
/// The `case` sheet's settings in SI units, as a `Case` whose layers, materials and schedule
/// are still empty (the other sheets fill them).
pub(super) fn settings(ks: &KeySheet<'_>, ctx: &mut Ctx, default_title: &str) -> Case {
    let case = Place::Case;

    let (v, at) = ks.get("moisture_basis");
    let basis = ctx
        .word(
            v,
            &at,
            None,
            "moisture_basis",
            &[("dry", MoistureBasis::Dry), ("wet", MoistureBasis::Wet)],
        )
        .ok()
        .flatten()
        .unwrap_or(MoistureBasis::Dry);
    ctx.basis = basis;
    let word = match basis {
        MoistureBasis::Dry => "dry",
        MoistureBasis::Wet => "wet",
    };
    ctx.record("case.basis".into(), Text(word.into()), "", source(v, &at));

    let (v, at) = ks.get("title");
    let title = ctx
        .text(v, &at, None)
        .ok()
        .flatten()
        .unwrap_or_else(|| default_title.to_string());
    ctx.record("case.title".into(), Text(title.clone()), "", source(v, &at));

    let (v, at) = ks.get("geometry");
    let geometry = match ctx.word(
        v,
        &at,
        None,
        "geometry",
        &[
            ("slab", Geometry::Slab),
            ("cylinder", Geometry::Cylinder),
            ("sphere", Geometry::Sphere),
        ],
    ) {
        Ok(g) => g.unwrap_or(Geometry::Slab),
        Err(Bad) => {
            // The exposed faces are checked against the geometry; that check would only guess.
            ctx.poison(&case("exposed"));
            Geometry::Slab
        }
    };
    let word = match geometry {
        Geometry::Slab => "slab",
        Geometry::Cylinder => "cylinder",
        Geometry::Sphere => "sphere",
    };
    ctx.record(
        "case.geometry".into(),
        Text(word.into()),
        "",
        source(v, &at),
    );

    let (v, at) = ks.get("exposed");
    let exposed = match ctx.word(
        v,
        &at,
        Some(case("exposed")),
        "exposed",
        &[
            ("a", Exposed::A),
            ("b", Exposed::B),
            ("both", Exposed::Both),
            ("none", Exposed::None),
        ],
    ) {
        Ok(e) => e.unwrap_or(Exposed::A),
        Err(Bad) => {
            ctx.exchange_unknown = true;
            Exposed::A
        }
    };
    let word = match exposed {
        Exposed::A => "a",
        Exposed::B => "b",
        Exposed::Both => "both",
        Exposed::None => "none",
    };
    ctx.record("case.exposed".into(), Text(word.into()), "", source(v, &at));

    let (v, at) = ks.get("coupling");
    let coupling = ctx
        .word(
            v,
            &at,
            Some(case("coupling")),
            "coupling",
            &[
                ("moisture", Coupling::Moisture),
                ("heat_and_moisture", Coupling::HeatAndMoisture),
            ],
        )
        .ok()
        .flatten()
        .unwrap_or(Coupling::Moisture);
    let word = match coupling {
        Coupling::Moisture => "moisture",
        Coupling::HeatAndMoisture => "heat_and_moisture",
    };
    ctx.record(
        "case.coupling".into(),
        Text(word.into()),
        "",
        source(v, &at),
    );

    let (v, at) = ks.get("cells_per_layer");
    let place = case("cells_per_layer");
    let cells_per_layer = match ctx.number(v, &at, Unit::Plain, Some(place.clone())) {
        Ok(None) => DEFAULT_CELLS_PER_LAYER,
        Ok(Some(n)) if n.fract() == 0.0 && n >= 4.0 => n as usize,
        Ok(Some(n)) => {
            ctx.problem(
                &at,
                Some(place),
                format!("cells_per_layer must be an integer >= 4, found {}", show(n)),
            );
            DEFAULT_CELLS_PER_LAYER
        }
        Err(Bad) => DEFAULT_CELLS_PER_LAYER,
    };
    ctx.record(
        "case.cells_per_layer".into(),
        Number(cells_per_layer as f64),
        "",
        source(v, &at),
    );

    let (v, at) = ks.get("end_hours");
    let place = case("end_hours");
    let end_hours = ctx
        .number(v, &at, Unit::Hours, Some(place.clone()))
        .and_then(|h| match h {
            Some(h) => ctx.check_positive(h, &at, Some(place), "end_hours"),
            None => Ok(DEFAULT_END_HOURS),
        })
        .unwrap_or(DEFAULT_END_HOURS);
    let end_time = end_hours * 3600.0;
    ctx.record(
        "case.end_time".into(),
        Number(end_time),
        "s",
        source(v, &at),
    );

    let (v, at) = ks.get("target_moisture_pct");
    let target_moisture = ctx
        .moisture(
            v,
            &at,
            Some(case("target_moisture_pct")),
            "target_moisture_pct",
        )
        .ok()
        .flatten();
    if let Some(x) = target_moisture {
        ctx.record(
            "case.target_moisture".into(),
            Number(x),
            MOISTURE_UNIT,
            at.source(),
        );
    }

    let (v, at) = ks.get("output_every_min");
    let place = case("output_every_min");
    let output_every = ctx
        .number(v, &at, Unit::Minutes, Some(place.clone()))
        .and_then(|m| match m {
            Some(m) => ctx
                .check_positive(m, &at, Some(place), "output_every_min")
                .map(Some),
            None => Ok(None),
        })
        .ok()
        .flatten()
        .map(|m| m * 60.0);
    ctx.record(
        "case.output_every".into(),
        Number(output_every.unwrap_or(end_time / 400.0)),
        "s",
        source(v, &at),
    );

    let (v, at) = ks.get("profile_hours");
    let profile_times: Option<Vec<f64>> =
        profile_hours(v, &at, ctx).map(|l| l.iter().map(|h| h * 3600.0).collect());
    match &profile_times {
        Some(times) => {
            for (k, t) in times.iter().enumerate() {
                ctx.record(
                    format!("case.profile_times[{}]", k + 1),
                    Number(*t),
                    "s",
                    at.source(),
                );
            }
        }
        None => ctx.record(
            "case.profile_times".into(),
            Text("6 evenly spaced times".into()),
            "s",
            String::from("default"),
        ),
    }

    let (v, at) = ks.get("flow_length_mm");
    let place = case("flow_length_mm");
    let flow_mm = ctx
        .number(v, &at, Unit::Mm, Some(place.clone()))
        .and_then(|l| match l {
            Some(l) => ctx.check_positive(l, &at, Some(place), "flow_length_mm"),
            None => Ok(DEFAULT_FLOW_LENGTH_MM),
        })
        .unwrap_or(DEFAULT_FLOW_LENGTH_MM);
    let flow_length = flow_mm / 1000.0;
    ctx.record(
        "case.flow_length".into(),
        Number(flow_length),
        "m",
        source(v, &at),
    );

    let (v, at) = ks.get("tolerance");
    let tolerance = ctx
        .number(v, &at, Unit::Plain, Some(case("tolerance")))
        .ok()
        .flatten()
        .unwrap_or(DEFAULT_TOLERANCE);
    ctx.record(
        "case.tolerance".into(),
        Number(tolerance),
        "",
        source(v, &at),
    );

    Case {
        title,
        geometry,
        exposed,
        coupling,
        basis,
        cells_per_layer,
        end_time,
        target_moisture,
        output_every,
        profile_times,
        flow_length,
        tolerance,
        layers: Vec::new(),
        materials: Vec::new(),
        schedule: Vec::new(),
    }
}

/// `profile_hours`: a list like `0, 2, 8, 24` (commas or semicolons), or one numeric cell.
/// `None` when not given or when it failed (the failure is recorded).
fn profile_hours(v: &RawValue, at: &Loc, ctx: &mut Ctx) -> Option<Vec<f64>> {
    let place = Some(Place::Case("profile_hours"));
    let list = match v {
        _ if v.is_blank() => return None,
        RawValue::Number(x) => vec![*x],
        RawValue::Text(s) => {
            let mut out = Vec::new();
            for item in s.split([',', ';']).map(str::trim).filter(|i| !i.is_empty()) {
                match parse_number_text(item) {
                    Some(x) => out.push(x),
                    None => {
                        ctx.problem(
                            at,
                            place,
                            format!(
                                "expected a list of hours like \"0, 2, 8, 24\", found {} \
                                 (\"{item}\" is not a number)",
                                v.describe()
                            ),
                        );
                        return None;
                    }
                }
            }
            if out.is_empty() {
                ctx.problem(at, place, "profile_hours lists no time");
                return None;
            }
            out
        }
        _ => {
            ctx.problem(
                at,
                place,
                format!(
                    "expected a list of hours like \"0, 2, 8, 24\", found {}",
                    v.describe()
                ),
            );
            return None;
        }
    };
    if let Some(bad) = list.iter().find(|h| **h < 0.0) {
        ctx.problem(
            at,
            place,
            format!(
                "every profile time must be a number >= 0, found {}",
                show(*bad)
            ),
        );
        return None;
    }
    Some(list)
}

/// A required numeric column; a column missing from the header was reported once already.
fn required(
    t: &Table<'_>,
    row: &RawRow,
    column: &'static str,
    unit: Unit,
    place: Place,
    ctx: &mut Ctx,
) -> Result<(f64, Loc), Bad> {
    if !t.has(column) {
        return Err(Bad);
    }
    let (v, at) = t.cell(row, column);
    let x = ctx.required_number(v, &at, unit, Some(place), column)?;
    Ok((x, at))
}

/// An optional numeric column.
fn optional(
    t: &Table<'_>,
    row: &RawRow,
    column: &'static str,
    unit: Unit,
    place: Place,
    ctx: &mut Ctx,
) -> Result<Option<(f64, Loc)>, Bad> {
    let (v, at) = t.cell(row, column);
    Ok(ctx.number(v, &at, unit, Some(place))?.map(|x| (x, at)))
}

/// Reads the `materials` sheet: one material per data row, in order (a duplicate name is a
/// problem at its second row), and the index of each name (first occurrence, matched like
/// headers).
pub(super) fn materials(t: &Table<'_>, ctx: &mut Ctx) -> (Vec<Material>, HashMap<String, usize>) {
    let mut out = Vec::new();
    let mut names: HashMap<String, (usize, Loc)> = HashMap::new();
    for (i, row) in t.rows.iter().enumerate() {
        let at = |column| Place::Material { index: i, column };
        let q = |what: &str| format!("materials[{}].{what}", i + 1);

        let name = if t.has("material") {
            let (v, loc) = t.cell(row, "material");
            match ctx.text(v, &loc, Some(at("material"))) {
                Ok(Some(n)) => {
                    let key = canonical(&n);
                    if let Some((_, first)) = names.get(&key) {
                        ctx.problem(
                            &loc,
                            Some(at("material")),
                            format!(
                                "the material \"{n}\" is defined twice (first at {}); names must be unique",
                                first.source()
                            ),
                        );
                    } else {
                        names.insert(key, (i, loc.clone()));
                    }
                    ctx.record(q("name"), Text(n.clone()), "", loc.source());
                    n
                }
                Ok(None) => {
                    ctx.problem(
                        &loc,
                        Some(at("material")),
                        "material (the material's name) is required",
                    );
                    String::new()
                }
                Err(Bad) => String::new(),
            }
        } else {
            String::new()
        };

        let density = required(
            t,
            row,
            "dry_density_kg_m3",
            Unit::KgM3,
            at("dry_density_kg_m3"),
            ctx,
        );
        if let Ok((x, loc)) = &density {
            ctx.record(q("dry_density"), Number(*x), "kg/m3", loc.source());
        }
        let d_ref = required(t, row, "d_ref_m2_s", Unit::M2S, at("d_ref_m2_s"), ctx);
        if let Ok((x, loc)) = &d_ref {
            ctx.record(q("diffusivity.d_ref"), Number(*x), "m2/s", loc.source());
        }

        let (v, loc) = t.cell(row, "d_ref_temp_c");
        let t_ref_c = ctx
            .number(v, &loc, Unit::Celsius, Some(at("d_ref_temp_c")))
            .ok()
            .flatten()
            .unwrap_or(DEFAULT_T_REF_C);
        ctx.record(
            q("diffusivity.t_ref_c"),
            Number(t_ref_c),
            "C",
            source(v, &loc),
        );

        let (v, loc) = t.cell(row, "d_ref_moisture_pct");
        let x_ref = ctx
            .moisture(
                v,
                &loc,
                Some(at("d_ref_moisture_pct")),
                "d_ref_moisture_pct",
            )
            .ok()
            .flatten()
            .unwrap_or(0.0);
        ctx.record(
            q("diffusivity.x_ref"),
            Number(x_ref),
            MOISTURE_UNIT,
            source(v, &loc),
        );

        let (v, loc) = t.cell(row, "activation_energy_kj_mol");
        let place = at("activation_energy_kj_mol");
        let ea_kj = ctx
            .number(v, &loc, Unit::KjMol, Some(place.clone()))
            .and_then(|e| match e {
                Some(e) => ctx.check_non_negative(e, &loc, Some(place), "activation_energy_kj_mol"),
                None => Ok(0.0),
            })
            .unwrap_or(0.0);
        let ea = ea_kj * 1000.0;
        ctx.record(
            q("diffusivity.activation_energy"),
            Number(ea),
            "J/mol",
            source(v, &loc),
        );

        let (v, loc) = t.cell(row, "moisture_coef");
        let moisture_coef = ctx
            .number(v, &loc, Unit::Plain, Some(at("moisture_coef")))
            .ok()
            .flatten()
            .unwrap_or(0.0);
        ctx.record(
            q("diffusivity.moisture_coef"),
            Number(moisture_coef),
            "per unit dry-basis fraction",
            source(v, &loc),
        );

        let isotherm = isotherm(t, row, i, ctx);

        let conductivity = optional(
            t,
            row,
            "conductivity_w_mk",
            Unit::Wmk,
            at("conductivity_w_mk"),
            ctx,
        )
        .ok()
        .flatten()
        .map(|(x, loc)| {
            ctx.record(q("conductivity"), Number(x), "W/(m K)", loc.source());
            x
        });
        let specific_heat = optional(
            t,
            row,
            "specific_heat_j_kgk",
            Unit::Jkgk,
            at("specific_heat_j_kgk"),
            ctx,
        )
        .ok()
        .flatten()
        .map(|(x, loc)| {
            ctx.record(q("specific_heat"), Number(x), "J/(kg K)", loc.source());
            x
        });

        out.push(Material {
            name,
            dry_density: density.map_or(1.0, |(x, _)| x),
            diffusivity: Diffusivity {
                d_ref: d_ref.map_or(1e-9, |(x, _)| x),
                t_ref_c,
                x_ref,
                activation_energy_j_mol: ea,
                moisture_coef,
            },
            isotherm,
            conductivity,
            specific_heat,
        });
    }
    let index = names.into_iter().map(|(k, (i, _))| (k, i)).collect();
    (out, index)
}

/// The isotherm of material row `i` with the parameters it needs; a failure leaves
/// [`Isotherm::None`] and marks every step's exchange check as unreliable.
fn isotherm(t: &Table<'_>, row: &RawRow, i: usize, ctx: &mut Ctx) -> Isotherm {
    #[derive(Clone, Copy)]
    enum Kind {
        None,
        Gab,
        Oswin,
        Henderson,
        Wood,
    }
    let at = |column| Place::Material { index: i, column };
    let q = |what: &str| format!("materials[{}].isotherm{what}", i + 1);
    let (v, loc) = t.cell(row, "isotherm");
    let kind = match ctx.word(
        v,
        &loc,
        Some(at("isotherm")),
        "isotherm",
        &[
            ("gab", Kind::Gab),
            ("oswin", Kind::Oswin),
            ("henderson", Kind::Henderson),
            ("wood", Kind::Wood),
            ("none", Kind::None),
        ],
    ) {
        Ok(k) => k.unwrap_or(Kind::None),
        Err(Bad) => {
            ctx.exchange_unknown = true;
            return Isotherm::None;
        }
    };
    let (word, needs): (&str, &[(&'static str, &str)]) = match kind {
        Kind::None => ("none", &[]),
        Kind::Wood => ("wood", &[]),
        Kind::Gab => (
            "gab",
            &[
                ("iso_a", "Xm, the monolayer moisture as a dry fraction"),
                ("iso_b", "C"),
                ("iso_c", "K"),
            ],
        ),
        Kind::Oswin => (
            "oswin",
            &[("iso_a", "a, as a dry fraction"), ("iso_b", "b")],
        ),
        Kind::Henderson => (
            "henderson",
            &[("iso_a", "a"), ("iso_b", "b"), ("iso_c", "c, in C")],
        ),
    };
    ctx.record(q(""), Text(word.into()), "", source(v, &loc));
    let mut values = [0.0; 3];
    let mut failed = false;
    for (k, column) in ["iso_a", "iso_b", "iso_c"].into_iter().enumerate() {
        let (v, cell) = t.cell(row, column);
        let need = needs.iter().find(|(c, _)| *c == column);
        match need {
            None => {
                if !v.is_blank() {
                    ctx.warn(
                        &cell,
                        format!("{column} is not used by isotherm {word}; it was ignored"),
                    );
                }
            }
            Some((_, meaning)) => match ctx.number(v, &cell, Unit::Plain, Some(at("isotherm"))) {
                Ok(Some(x)) => {
                    values[k] = x;
                    ctx.record(q(&format!(".{column}")), Number(x), "", cell.source());
                }
                Ok(None) => {
                    ctx.problem(
                        &cell,
                        Some(at("isotherm")),
                        format!("isotherm {word} needs {column} ({meaning})"),
                    );
                    failed = true;
                }
                Err(Bad) => failed = true,
            },
        }
    }
    if failed {
        ctx.exchange_unknown = true;
        return Isotherm::None;
    }
    let [a, b, c] = values;
    match kind {
        Kind::None => Isotherm::None,
        Kind::Wood => Isotherm::Wood,
        Kind::Gab => Isotherm::Gab { xm: a, c: b, k: c },
        Kind::Oswin => Isotherm::Oswin { a, b },
        Kind::Henderson => Isotherm::Henderson { a, b, c },
    }
}

/// Reads the `layers` sheet; each layer names a material by name.
pub(super) fn layers(
    t: &Table<'_>,
    ctx: &mut Ctx,
    materials: &[Material],
    names: &HashMap<String, usize>,
) -> Vec<Layer> {
    let mut out = Vec::new();
    for (i, row) in t.rows.iter().enumerate() {
        let at = |column| Place::Layer { index: i, column };
        let q = |what: &str| format!("layers[{}].{what}", i + 1);

        let (v, loc) = t.cell(row, "name");
        let name = ctx
            .text(v, &loc, Some(at("name")))
            .ok()
            .flatten()
            .unwrap_or_else(|| format!("layer {}", i + 1));
        ctx.record(q("name"), Text(name.clone()), "", source(v, &loc));

        let mut material = usize::MAX;
        if t.has("material") {
            let (v, loc) = t.cell(row, "material");
            match ctx.text(v, &loc, Some(at("material"))) {
                Ok(Some(n)) => {
                    match names.get(&canonical(&n)) {
                        Some(&m) => {
                            material = m;
                            ctx.record(q("material"), Text(n), "", loc.source());
                        }
                        None => {
                            let known: Vec<&str> = materials
                                .iter()
                                .map(|m| m.name.as_str())
                                .filter(|n| !n.is_empty())
                                .collect();
                            let list = if known.is_empty() {
                                String::from("none is defined")
                            } else if known.len() <= 12 {
                                format!("defined: {}", known.join(", "))
                            } else {
                                format!("{} are defined", known.len())
                            };
                            ctx.problem(
                            &loc,
                            Some(at("material")),
                            format!("the material \"{n}\" is not defined on sheet materials ({list})"),
                        );
                        }
                    }
                }
                Ok(None) => ctx.problem(
                    &loc,
                    Some(at("material")),
                    "material is required (a name from sheet materials)",
                ),
                Err(Bad) => {}
            }
        }
        if material == usize::MAX {
            // The face materials decide every step's exchange checks.
            ctx.exchange_unknown = true;
        }

        let place = at("thickness_mm");
        let thickness =
            required(t, row, "thickness_mm", Unit::Mm, place.clone(), ctx).and_then(|(x, loc)| {
                ctx.check_positive(x, &loc, Some(place), "thickness_mm")
                    .map(|x| (x / 1000.0, loc))
            });
        if let Ok((x, loc)) = &thickness {
            ctx.record(q("thickness"), Number(*x), "m", loc.source());
        }

        let initial = if t.has("initial_moisture_pct") {
            let (v, loc) = t.cell(row, "initial_moisture_pct");
            let place = at("initial_moisture_pct");
            match ctx.moisture(v, &loc, Some(place.clone()), "initial_moisture_pct") {
                Ok(Some(x)) => {
                    ctx.record(
                        q("initial_moisture"),
                        Number(x),
                        MOISTURE_UNIT,
                        loc.source(),
                    );
                    Some(x)
                }
                Ok(None) => {
                    ctx.problem(
                        &loc,
                        Some(place),
                        "initial_moisture_pct is required (a number of %)",
                    );
                    None
                }
                Err(Bad) => None,
            }
        } else {
            None
        };

        let (v, loc) = t.cell(row, "initial_temp_c");
        let initial_temp_c = ctx
            .number(v, &loc, Unit::Celsius, Some(at("initial_temp_c")))
            .ok()
            .flatten()
            .unwrap_or(DEFAULT_INITIAL_TEMP_C);
        ctx.record(
            q("initial_temp_c"),
            Number(initial_temp_c),
            "C",
            source(v, &loc),
        );

        out.push(Layer {
            name,
            material,
            thickness: thickness.map_or(1.0, |(x, _)| x),
            initial_moisture: initial.unwrap_or(0.0),
            initial_temp_c,
        });
    }
    out
}

/// Reads the `schedule` sheet, at most [`MAX_STEPS`] steps.
pub(super) fn schedule(t: &Table<'_>, ctx: &mut Ctx, exposed: Exposed) -> Vec<Step> {
    let mut out = Vec::new();
    for (i, row) in t.rows.iter().enumerate() {
        if i == MAX_STEPS {
            ctx.problem(
                &t.row_loc(row),
                None,
                format!(
                    "the schedule has more than {MAX_STEPS} steps (this row is step {}); \
                     merge steps or use ramps",
                    i + 1
                ),
            );
            break;
        }
        out.push(step(t, row, i, ctx, exposed));
    }
    out
}

fn step(t: &Table<'_>, row: &RawRow, i: usize, ctx: &mut Ctx, exposed: Exposed) -> Step {
    let at = |column| Place::Step { index: i, column };
    let q = |what: &str| format!("schedule[{}].{what}", i + 1);

    let (v, loc) = t.cell(row, "step");
    let label = ctx
        .text(v, &loc, Some(at("step")))
        .ok()
        .flatten()
        .unwrap_or_else(|| format!("step {}", i + 1));
    ctx.record(q("label"), Text(label.clone()), "", source(v, &loc));

    let place = at("hours");
    let duration = optional(t, row, "hours", Unit::Hours, place.clone(), ctx)
        .and_then(|h| match h {
            Some((h, loc)) => ctx
                .check_positive(h, &loc, Some(place), "hours")
                .map(|h| Some((h * 3600.0, loc))),
            None => Ok(None),
        })
        .ok()
        .flatten()
        .map(|(s, loc)| {
            ctx.record(q("duration"), Number(s), "s", loc.source());
            s
        });

    let (v, loc) = t.cell(row, "until_moisture_pct");
    let until_moisture = ctx
        .moisture(
            v,
            &loc,
            Some(at("until_moisture_pct")),
            "until_moisture_pct",
        )
        .ok()
        .flatten();
    if let Some(x) = until_moisture {
        ctx.record(q("until_moisture"), Number(x), MOISTURE_UNIT, loc.source());
    }

    let dry_bulb_c = match required(t, row, "dry_bulb_c", Unit::Celsius, at("dry_bulb_c"), ctx) {
        Ok((x, loc)) => {
            ctx.record(q("dry_bulb_c"), Number(x), "C", loc.source());
            x
        }
        // Not a number: nothing can be compared with it (a wet bulb above 20 C must not be
        // reported as above the dry bulb), and its own problem is already recorded.
        Err(Bad) => f64::NAN,
    };

    let humidity = humidity(t, row, i, ctx);

    let (v, loc) = t.cell(row, "equilibrium_moisture_pct");
    let equilibrium_moisture = ctx
        .moisture(
            v,
            &loc,
            Some(at("equilibrium_moisture_pct")),
            "equilibrium_moisture_pct",
        )
        .ok()
        .flatten();
    if let Some(x) = equilibrium_moisture {
        ctx.record(
            q("equilibrium_moisture"),
            Number(x),
            MOISTURE_UNIT,
            loc.source(),
        );
    }

    let exchange = exchange(t, row, i, ctx, exposed);

    let heat_coef = optional(t, row, "h_w_m2k", Unit::Wm2k, at("h_w_m2k"), ctx)
        .ok()
        .flatten()
        .map(|(x, loc)| {
            ctx.record(q("heat_coef"), Number(x), "W/(m2 K)", loc.source());
            x
        });

    let (v, loc) = t.cell(row, "ramp");
    let ramp = match v {
        RawValue::Bool(b) => Ok(Some(*b)),
        RawValue::Number(x) if *x == 1.0 => Ok(Some(true)),
        RawValue::Number(x) if *x == 0.0 => Ok(Some(false)),
        _ => ctx.word(
            v,
            &loc,
            Some(at("ramp")),
            "ramp",
            &[
                ("yes", true),
                ("no", false),
                ("true", true),
                ("false", false),
                ("1", true),
                ("0", false),
            ],
        ),
    }
    .ok()
    .flatten()
    .unwrap_or(false);
    ctx.record(
        q("ramp"),
        Text(if ramp { "yes" } else { "no" }.into()),
        "",
        source(v, &loc),
    );

    Step {
        label,
        duration,
        until_moisture,
        dry_bulb_c,
        humidity,
        equilibrium_moisture,
        exchange,
        heat_coef,
        ramp,
    }
}

/// `rh_pct` or `wet_bulb_c`, not both.
fn humidity(t: &Table<'_>, row: &RawRow, i: usize, ctx: &mut Ctx) -> Humidity {
    let at = |column| Place::Step { index: i, column };
    let q = |what: &str| format!("schedule[{}].{what}", i + 1);
    let (rh_v, rh_loc) = t.cell(row, "rh_pct");
    let (wb_v, wb_loc) = t.cell(row, "wet_bulb_c");
    if !rh_v.is_blank() && !wb_v.is_blank() {
        ctx.problem(
            &rh_loc,
            Some(at("rh_pct")),
            format!(
                "give rh_pct or wet_bulb_c, not both (this row gives rh_pct in {} and wet_bulb_c \
                 in {})",
                rh_loc.cell, wb_loc.cell
            ),
        );
        return Humidity::Unspecified;
    }
    let place = at("rh_pct");
    match ctx.number(rh_v, &rh_loc, Unit::Pct, Some(place.clone())) {
        Ok(Some(rh)) => {
            if !(0.0..=100.0).contains(&rh) {
                ctx.problem(
                    &rh_loc,
                    Some(place),
                    format!("rh_pct must be between 0 and 100, found {}", show(rh)),
                );
                return Humidity::Unspecified;
            }
            ctx.record(
                q("humidity.relative"),
                Number(rh / 100.0),
                "fraction",
                rh_loc.source(),
            );
            return Humidity::Relative(rh / 100.0);
        }
        Ok(None) => {}
        Err(Bad) => return Humidity::Unspecified,
    }
    match ctx.number(wb_v, &wb_loc, Unit::Celsius, Some(at("wet_bulb_c"))) {
        Ok(Some(tw)) => {
            ctx.record(q("humidity.wet_bulb_c"), Number(tw), "C", wb_loc.source());
            Humidity::WetBulb(tw)
        }
        _ => Humidity::Unspecified,
    }
}

/// Columns that state a step's surface exchange; exactly one per step.
const EXCHANGE_COLUMNS: &[&str] = &[
    "surface_moisture_pct",
    "surface_coef_m_s",
    "hm_m_s",
    "air_velocity_m_s",
];

fn exchange(t: &Table<'_>, row: &RawRow, i: usize, ctx: &mut Ctx, exposed: Exposed) -> Exchange {
    let at = |column| Place::Step { index: i, column };
    let q = |what: &str| format!("schedule[{}].exchange.{what}", i + 1);
    let given: Vec<(&'static str, &RawValue, Loc)> = EXCHANGE_COLUMNS
        .iter()
        .map(|c| {
            let (v, loc) = t.cell(row, c);
            (*c, v, loc)
        })
        .filter(|(_, v, _)| !v.is_blank())
        .collect();
    if exposed == Exposed::None {
        for (c, _, loc) in &given {
            ctx.warn(
                loc,
                format!("exposed is none (a sealed body), so {c} is ignored"),
            );
        }
        return Exchange::Unspecified;
    }
    match given.as_slice() {
        [] => Exchange::Unspecified,
        [(column, v, loc)] => {
            let place = at(column);
            if *column == "surface_moisture_pct" {
                match ctx.moisture(v, loc, Some(place), column) {
                    Ok(Some(x)) => {
                        ctx.record(q("fixed_surface"), Number(x), MOISTURE_UNIT, loc.source());
                        Exchange::FixedSurface(x)
                    }
                    _ => Exchange::Unspecified,
                }
            } else {
                match ctx.number(v, loc, Unit::MS, Some(place)) {
                    Ok(Some(x)) => {
                        let (kind, exchange) = match *column {
                            "surface_coef_m_s" => {
                                ("surface_coefficient", Exchange::SurfaceCoefficient(x))
                            }
                            "hm_m_s" => ("air_side", Exchange::AirSide(x)),
                            _ => ("air_velocity", Exchange::AirVelocity(x)),
                        };
                        ctx.record(q(kind), Number(x), "m/s", loc.source());
                        exchange
                    }
                    _ => Exchange::Unspecified,
                }
            }
        }
        [(first, _, loc), ..] => {
            let list: Vec<String> = given
                .iter()
                .map(|(c, _, l)| format!("{c} ({})", l.cell))
                .collect();
            ctx.problem(
                loc,
                Some(at(first)),
                format!(
                    "give exactly one of surface_moisture_pct, surface_coef_m_s, hm_m_s, \
                     air_velocity_m_s per step; this row gives {}",
                    list.join(" and ")
                ),
            );
            Exchange::Unspecified
        }
    }
}

/// Reads the optional `measured` sheet.
pub(super) fn measured(t: &Table<'_>, ctx: &mut Ctx) -> Vec<Measured> {
    let mut out = Vec::new();
    for row in &t.rows {
        let hours = required(t, row, "hours", Unit::Hours, Place::Sheet("measured"), ctx)
            .and_then(|(h, loc)| ctx.check_non_negative(h, &loc, None, "hours"));
        let moisture = if t.has("moisture_pct") {
            let (v, loc) = t.cell(row, "moisture_pct");
            match ctx.moisture(v, &loc, None, "moisture_pct") {
                Ok(Some(x)) => {
                    let pct = ctx
                        .number(v, &loc, Unit::Pct, None)
                        .ok()
                        .flatten()
                        .unwrap_or(0.0);
                    Some((pct, x))
                }
                Ok(None) => {
                    ctx.problem(&loc, None, "moisture_pct is required (a number of %)");
                    None
                }
                Err(Bad) => None,
            }
        } else {
            None
        };
        let (v, loc) = t.cell(row, "surface_temp_c");
        let surface = ctx.number(v, &loc, Unit::Celsius, None);
        let (v, loc) = t.cell(row, "centre_temp_c");
        let centre = ctx.number(v, &loc, Unit::Celsius, None);
        if let (Ok(hours), Some((pct, x)), Ok(surface), Ok(centre)) =
            (hours, moisture, surface, centre)
        {
            out.push(Measured {
                hours,
                moisture_pct: pct,
                moisture: x,
                surface_temp_c: surface,
                centre_temp_c: centre,
            });
        }
    }
    out
}
