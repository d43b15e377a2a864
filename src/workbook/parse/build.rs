//! Each sheet of the format read into its part of the case. What a key or column holds (unit,
//! bounds, plausible range, SI conversion, default, record name) comes from
//! [`crate::workbook::schema`]; [`value`] reads, checks, converts and records any numeric one,
//! so what stays here is only what ties values together.
//!
//! Where a value fails, a placeholder takes its place so the rest of the book is still read
//! and checked; the placeholder's place is marked failed, and the case is never returned.

use std::collections::HashMap;

use super::Measured;
use super::context::{Bad, Ctx, Loc, Unit, parse_number_text, show};
use super::sheets::{KeySheet, Table, canonical};
use crate::case::{
    Case, Coupling, DEFAULT_CELLS_PER_LAYER, Exchange, Exposed, Geometry, Humidity, Layer,
    Material, MoistureBasis, Place, Step,
};
use crate::physics::{Diffusivity, Isotherm};
use crate::workbook::raw::{RawRow, RawValue};
use crate::workbook::schema::{self, Field, Kind};

use super::InputValue::{Number, Text};

/// Most schedule steps read; a longer schedule is refused rather than run slowly.
pub const MAX_STEPS: usize = 2000;

fn source(v: &RawValue, at: &Loc) -> String {
    if v.is_blank() {
        String::from("default")
    } else {
        at.source()
    }
}

/// The schema's field `name` of `sheet`. Every name passed here is one of the schema's.
fn field(sheet: &schema::Sheet, name: &str) -> &'static Field {
    match sheet.field(name) {
        Some(f) => f,
        None => unreachable!("{}.{name} is not in the schema", sheet.name),
    }
}

/// Reads one numeric field (number or moisture) at its cell: the number in the user's unit,
/// checked against the field's bounds there, converted to SI (a moisture to a dry-basis
/// fraction), the default where blank, and recorded as `PREFIX` + the field's quantity.
/// `Ok(None)`: blank without a default. A required field left blank is a problem.
fn value(
    ctx: &mut Ctx,
    (v, at): (&RawValue, Loc),
    f: &Field,
    place: Option<Place>,
    prefix: &str,
) -> Result<Option<f64>, Bad> {
    let read = if f.kind == Kind::Moisture {
        ctx.moisture(v, &at, place.clone(), f.name)?
    } else {
        ctx.field_number(v, &at, f, place.clone())?
            .map(|x| f.conv.to_si(x))
    };
    let x = match read {
        Some(x) => Some(x),
        None if f.required => {
            let expected = if f.kind == Kind::Moisture {
                String::from("a number of %")
            } else {
                f.expected()
            };
            ctx.problem(&at, place, format!("{} is required ({expected})", f.name));
            return Err(Bad);
        }
        None => match (f.kind, f.default) {
            (Kind::Moisture, schema::Default::Number(d)) => ctx.basis.to_dry_fraction(d),
            _ => f.default_si(),
        },
    };
    if let Some(x) = x {
        let unit = f.si_unit;
        ctx.record(
            format!("{prefix}{}", f.quantity),
            Number(x),
            unit,
            source(v, &at),
        );
    }
    Ok(x)
}

/// A numeric column of a table row; a required column missing from the header was reported
/// once already.
fn column(
    ctx: &mut Ctx,
    t: &Table<'_>,
    row: &RawRow,
    f: &Field,
    place: Place,
    prefix: &str,
) -> Result<Option<f64>, Bad> {
    if f.required && !t.has(f.name) {
        return Err(Bad);
    }
    value(ctx, t.cell(row, f.name), f, Some(place), prefix)
}

/// One of a word field's words, mapped to `values` in the schema's order, and recorded.
fn choice<T: Copy>(
    ctx: &mut Ctx,
    (v, at): (&RawValue, Loc),
    f: &Field,
    place: Option<Place>,
    prefix: &str,
    values: &[T],
) -> Result<T, Bad> {
    let Kind::Word(words) = f.kind else {
        unreachable!("{} is not a word field", f.name)
    };
    let choices: Vec<(&str, usize)> = words.iter().copied().zip(0..).collect();
    let index = ctx
        .word(v, &at, place, f.name, &choices)?
        .unwrap_or_else(|| match f.default {
            schema::Default::Text(d) => words.iter().position(|w| *w == d).unwrap_or(0),
            _ => 0,
        });
    ctx.record(
        format!("{prefix}{}", f.quantity),
        Text(words[index].into()),
        "",
        source(v, &at),
    );
    Ok(values[index.min(values.len() - 1)])
}

/// A text field (a title, name or label), trimmed, `default` where blank, and recorded.
fn label(
    ctx: &mut Ctx,
    (v, at): (&RawValue, Loc),
    place: Option<Place>,
    quantity: String,
    default: impl FnOnce() -> String,
) -> String {
    let text = ctx
        .text(v, &at, place)
        .ok()
        .flatten()
        .unwrap_or_else(default);
    ctx.record(quantity, Text(text.clone()), "", source(v, &at));
    text
}

/// The `case` sheet's settings in SI units, as a `Case` whose layers, materials and schedule
/// are still empty (the other sheets fill them). The basis comes first, since every moisture
/// depends on it.
pub(super) fn settings(ks: &KeySheet<'_>, ctx: &mut Ctx, default_title: &str) -> Case {
    let s = &schema::CASE;
    let case = Place::Case;
    let key = |k: &str| (field(s, k), ks.get(k));

    let (f, cell) = key("moisture_basis");
    let basis = choice(
        ctx,
        cell,
        f,
        None,
        "case.",
        &[MoistureBasis::Dry, MoistureBasis::Wet],
    )
    .unwrap_or(MoistureBasis::Dry);
    ctx.basis = basis;

    let title = label(ctx, ks.get("title"), None, "case.title".into(), || {
        default_title.to_string()
    });

    let (f, cell) = key("geometry");
    let shapes = [Geometry::Slab, Geometry::Cylinder, Geometry::Sphere];
    let geometry = choice(ctx, cell, f, None, "case.", &shapes).unwrap_or_else(|Bad| {
        // The exposed faces are checked against the geometry; that check would only guess.
        ctx.poison(&case("exposed"));
        Geometry::Slab
    });

    let (f, cell) = key("exposed");
    let faces = [Exposed::A, Exposed::B, Exposed::Both, Exposed::None];
    let exposed =
        choice(ctx, cell, f, Some(case("exposed")), "case.", &faces).unwrap_or_else(|Bad| {
            ctx.exchange_unknown = true;
            Exposed::A
        });

    let (f, cell) = key("coupling");
    let couplings = [Coupling::Moisture, Coupling::HeatAndMoisture];
    let coupling = choice(ctx, cell, f, Some(case("coupling")), "case.", &couplings)
        .unwrap_or(Coupling::Moisture);

    let (v, at) = ks.get("cells_per_layer");
    let place = case("cells_per_layer");
    let cells_per_layer = match ctx.number(v, &at, Unit::PLAIN, Some(place.clone())) {
        Ok(None) | Err(Bad) => DEFAULT_CELLS_PER_LAYER,
        Ok(Some(n)) if n.fract() == 0.0 && n >= 4.0 => n as usize,
        Ok(Some(n)) => {
            ctx.problem(
                &at,
                Some(place),
                format!("cells_per_layer must be an integer >= 4, found {}", show(n)),
            );
            DEFAULT_CELLS_PER_LAYER
        }
    };
    ctx.record(
        "case.cells_per_layer".into(),
        Number(cells_per_layer as f64),
        "",
        source(v, &at),
    );

    let number = |ctx: &mut Ctx, k: &'static str| {
        let (f, cell) = key(k);
        value(ctx, cell, f, Some(case(k)), "case.").ok().flatten()
    };
    let end_time = number(ctx, "end_hours").unwrap_or(3.6e6);
    let target_moisture = number(ctx, "target_moisture_pct");
    let output_every = number(ctx, "output_every_min");
    if output_every.is_none() {
        let (v, at) = ks.get("output_every_min");
        if v.is_blank() {
            let f = field(s, "output_every_min");
            ctx.record(
                format!("case.{}", f.quantity),
                Number(end_time / 400.0),
                f.si_unit,
                source(v, &at),
            );
        }
    }

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

    let flow_length = number(ctx, "flow_length_mm").unwrap_or(0.1);
    let tolerance = number(ctx, "tolerance").unwrap_or(crate::case::DEFAULT_TOLERANCE);

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

/// Reads the `materials` sheet: one material per data row, in order (a duplicate name is a
/// problem at its second row), and the index of each name (first occurrence, matched like
/// headers).
pub(super) fn materials(t: &Table<'_>, ctx: &mut Ctx) -> (Vec<Material>, HashMap<String, usize>) {
    let s = &schema::MATERIALS;
    let mut out = Vec::new();
    let mut names: HashMap<String, (usize, Loc)> = HashMap::new();
    for (i, row) in t.rows.iter().enumerate() {
        let at = |column| Place::Material { index: i, column };
        let prefix = format!("materials[{}].", i + 1);
        let num = |ctx: &mut Ctx, c: &'static str| column(ctx, t, row, field(s, c), at(c), &prefix);

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
                    ctx.record(format!("{prefix}name"), Text(n.clone()), "", loc.source());
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

        let density = num(ctx, "dry_density_kg_m3").ok().flatten();
        let d_ref = num(ctx, "d_ref_m2_s").ok().flatten();
        let t_ref_c = num(ctx, "d_ref_temp_c").ok().flatten().unwrap_or(25.0);
        let x_ref = num(ctx, "d_ref_moisture_pct").ok().flatten().unwrap_or(0.0);
        let ea = num(ctx, "activation_energy_kj_mol")
            .ok()
            .flatten()
            .unwrap_or(0.0);
        let moisture_coef = num(ctx, "moisture_coef").ok().flatten().unwrap_or(0.0);
        let isotherm = isotherm(t, row, i, ctx);
        let conductivity = num(ctx, "conductivity_w_mk").ok().flatten();
        let specific_heat = num(ctx, "specific_heat_j_kgk").ok().flatten();

        out.push(Material {
            name,
            dry_density: density.unwrap_or(1.0),
            diffusivity: Diffusivity {
                d_ref: d_ref.unwrap_or(1e-9),
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
    let prefix = format!("materials[{}].", i + 1);
    let kinds = [
        Kind::Gab,
        Kind::Oswin,
        Kind::Henderson,
        Kind::Wood,
        Kind::None,
    ];
    let f = field(&schema::MATERIALS, "isotherm");
    let Ok(kind) = choice(
        ctx,
        t.cell(row, "isotherm"),
        f,
        Some(at("isotherm")),
        &prefix,
        &kinds,
    ) else {
        ctx.exchange_unknown = true;
        return Isotherm::None;
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
            Some((_, meaning)) => match ctx.number(v, &cell, Unit::PLAIN, Some(at("isotherm"))) {
                Ok(Some(x)) => {
                    values[k] = x;
                    ctx.record(
                        format!("{prefix}isotherm.{column}"),
                        Number(x),
                        "",
                        cell.source(),
                    );
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
    let s = &schema::LAYERS;
    let mut out = Vec::new();
    for (i, row) in t.rows.iter().enumerate() {
        let at = |column| Place::Layer { index: i, column };
        let prefix = format!("layers[{}].", i + 1);

        let name = label(
            ctx,
            t.cell(row, "name"),
            Some(at("name")),
            format!("{prefix}name"),
            || format!("layer {}", i + 1),
        );

        let material = if t.has("material") {
            layer_material(t, row, i, ctx, materials, names)
        } else {
            None
        };
        if material.is_none() {
            // The face materials decide every step's exchange checks.
            ctx.exchange_unknown = true;
        }
        let num = |ctx: &mut Ctx, c: &'static str| column(ctx, t, row, field(s, c), at(c), &prefix);
        let thickness = num(ctx, "thickness_mm").ok().flatten();
        let initial = num(ctx, "initial_moisture_pct").ok().flatten();
        let initial_temp_c = num(ctx, "initial_temp_c").ok().flatten().unwrap_or(20.0);

        out.push(Layer {
            name,
            material: material.unwrap_or(usize::MAX),
            thickness: thickness.unwrap_or(1.0),
            initial_moisture: initial.unwrap_or(0.0),
            initial_temp_c,
        });
    }
    out
}

/// The material a layer row names, as an index into `materials`.
fn layer_material(
    t: &Table<'_>,
    row: &RawRow,
    i: usize,
    ctx: &mut Ctx,
    materials: &[Material],
    names: &HashMap<String, usize>,
) -> Option<usize> {
    let at = |column| Place::Layer { index: i, column };
    let (v, loc) = t.cell(row, "material");
    match ctx.text(v, &loc, Some(at("material"))) {
        Ok(Some(n)) => match names.get(&canonical(&n)) {
            Some(&m) => {
                ctx.record(
                    format!("layers[{}].material", i + 1),
                    Text(n),
                    "",
                    loc.source(),
                );
                Some(m)
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
                None
            }
        },
        Ok(None) => {
            ctx.problem(
                &loc,
                Some(at("material")),
                "material is required (a name from sheet materials)",
            );
            None
        }
        Err(Bad) => None,
    }
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
    let s = &schema::SCHEDULE;
    let at = |column| Place::Step { index: i, column };
    let prefix = format!("schedule[{}].", i + 1);

    let label = label(
        ctx,
        t.cell(row, "step"),
        Some(at("step")),
        format!("{prefix}label"),
        || format!("step {}", i + 1),
    );

    let num = |ctx: &mut Ctx, c: &'static str| column(ctx, t, row, field(s, c), at(c), &prefix);
    let duration = num(ctx, "hours").ok().flatten();
    let until_moisture = num(ctx, "until_moisture_pct").ok().flatten();
    // Not a number: nothing can be compared with it (a wet bulb above 20 C must not be
    // reported as above the dry bulb), and its own problem is already recorded.
    let dry_bulb_c = num(ctx, "dry_bulb_c").ok().flatten().unwrap_or(f64::NAN);
    let humidity = humidity(t, row, i, ctx);
    let equilibrium_moisture = num(ctx, "equilibrium_moisture_pct").ok().flatten();
    let exchange = exchange(t, row, i, ctx, exposed);
    let heat_coef = num(ctx, "h_w_m2k").ok().flatten();

    // Logical cells and the words true/false, 1/0 are read as yes/no.
    let (v, loc) = t.cell(row, "ramp");
    let yes_no = |b: bool| RawValue::Text(String::from(if b { "yes" } else { "no" }));
    let word = match v {
        RawValue::Bool(b) => Some(yes_no(*b)),
        RawValue::Number(x) if *x == 1.0 || *x == 0.0 => Some(yes_no(*x == 1.0)),
        RawValue::Text(w) => match w.trim().to_lowercase().as_str() {
            "true" | "1" => Some(yes_no(true)),
            "false" | "0" => Some(yes_no(false)),
            _ => None,
        },
        _ => None,
    };
    let cell = (word.as_ref().unwrap_or(v), loc);
    let ramp = choice(
        ctx,
        cell,
        field(s, "ramp"),
        Some(at("ramp")),
        &prefix,
        &[true, false],
    )
    .unwrap_or(false);

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
    let s = &schema::SCHEDULE;
    let at = |column| Place::Step { index: i, column };
    let prefix = format!("schedule[{}].", i + 1);
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
    match ctx.number(rh_v, &rh_loc, Unit("%"), Some(place.clone())) {
        Ok(Some(rh)) => {
            if !(0.0..=100.0).contains(&rh) {
                ctx.problem(
                    &rh_loc,
                    Some(place),
                    format!("rh_pct must be between 0 and 100, found {}", show(rh)),
                );
                return Humidity::Unspecified;
            }
            let f = field(s, "rh_pct");
            let x = f.conv.to_si(rh);
            ctx.record(
                format!("{prefix}{}", f.quantity),
                Number(x),
                f.si_unit,
                rh_loc.source(),
            );
            return Humidity::Relative(x);
        }
        Ok(None) => {}
        Err(Bad) => return Humidity::Unspecified,
    }
    let f = field(s, "wet_bulb_c");
    match value(ctx, (wb_v, wb_loc), f, Some(at("wet_bulb_c")), &prefix) {
        Ok(Some(tw)) => Humidity::WetBulb(tw),
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
    let prefix = format!("schedule[{}].", i + 1);
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
            let f = field(&schema::SCHEDULE, column);
            match value(ctx, (v, loc.clone()), f, Some(at(column)), &prefix) {
                Ok(Some(x)) => match *column {
                    "surface_moisture_pct" => Exchange::FixedSurface(x),
                    "surface_coef_m_s" => Exchange::SurfaceCoefficient(x),
                    "hm_m_s" => Exchange::AirSide(x),
                    _ => Exchange::AirVelocity(x),
                },
                _ => Exchange::Unspecified,
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
        let hours = if t.has("hours") {
            let (v, loc) = t.cell(row, "hours");
            ctx.required_number(v, &loc, Unit("h"), Some(Place::Sheet("measured")), "hours")
                .and_then(|h| ctx.check_non_negative(h, &loc, None, "hours"))
        } else {
            Err(Bad)
        };
        let moisture = if t.has("moisture_pct") {
            let (v, loc) = t.cell(row, "moisture_pct");
            match ctx.moisture(v, &loc, None, "moisture_pct") {
                Ok(Some(x)) => {
                    let pct = ctx
                        .number(v, &loc, Unit("%"), None)
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
        let surface = ctx.number(v, &loc, Unit("C"), None);
        let (v, loc) = t.cell(row, "centre_temp_c");
        let centre = ctx.number(v, &loc, Unit("C"), None);
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
