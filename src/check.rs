//! Comparison of a run with Crank's series solution, where the case has one, and the built-in
//! verification cases behind `dampfront verify`.
//!
//! A case has a series solution when it is one layer of one material with constant D, one
//! schedule step of constant air, and a fixed surface or a content-based surface coefficient
//! with a known equilibrium moisture (Crank, The Mathematics of Diffusion, 2nd ed., 1975:
//! sheet pp. 47-48 and 60, cylinder ch. 5, sphere pp. 91 and 96).

use crate::analytic::{Series, Shape, Surface};
use crate::case::{Case, Exchange, Exposed, Geometry, Humidity, Material, Step};
use crate::solver::{self, RunResult};

/// One row of a series comparison.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CheckRow {
    /// Time, h.
    pub hours: f64,
    /// Moisture ratio of the run.
    pub model: f64,
    /// Moisture ratio of the series solution.
    pub series: f64,
}

/// A run compared with its series solution.
#[derive(Debug, Clone, PartialEq)]
pub struct CheckTable {
    /// What the series solution is, in words.
    pub description: String,
    /// Half-thickness or radius, m.
    pub length: f64,
    /// Diffusivity, m2/s.
    pub diffusivity: f64,
    /// Biot number L = l beta / D, `None` for a fixed surface.
    pub biot: Option<f64>,
    /// Rows at the run's output times after t = 0.
    pub rows: Vec<CheckRow>,
    /// Largest |model - series| over the rows.
    pub max_abs_difference: f64,
}

/// The series solution that applies to `case`, with its length scale, D and equilibrium moisture.
fn applicable(case: &Case) -> Option<(Series, f64, f64, Option<f64>, f64, String)> {
    let [layer] = case.layers.as_slice() else {
        return None;
    };
    let [step] = case.schedule.as_slice() else {
        return None;
    };
    let material = case.materials.get(layer.material)?;
    if material.diffusivity.moisture_coef != 0.0 || step.ramp {
        return None;
    }
    let d = material
        .diffusivity
        .at(layer.initial_moisture, step.dry_bulb_c);
    let (shape, length) = match (case.geometry, case.exposed) {
        (_, Exposed::None) => return None,
        (Geometry::Slab, Exposed::Both) => (Shape::Slab, 0.5 * layer.thickness),
        (Geometry::Slab, _) => (Shape::Slab, layer.thickness),
        (Geometry::Cylinder, _) => (Shape::Cylinder, layer.thickness),
        (Geometry::Sphere, _) => (Shape::Sphere, layer.thickness),
    };
    let rh = step.relative_humidity();
    let (surface, x_eq, biot) = match step.exchange {
        Exchange::FixedSurface(x) => (Surface::Fixed, x, None),
        Exchange::SurfaceCoefficient(beta) => {
            let x_eq = step.equilibrium_moisture.or_else(|| {
                rh.and_then(|rh| material.isotherm.equilibrium_moisture(rh, step.dry_bulb_c))
            })?;
            let biot = length * beta / d;
            (Surface::Evaporation { biot }, x_eq, Some(biot))
        }
        _ => return None,
    };
    let description = match biot {
        None => format!("{shape:?}, fixed surface, Crank (1975) series"),
        Some(b) => format!("{shape:?}, surface evaporation L = {b:.6}, Crank (1975) series"),
    };
    Some((
        Series::new(shape, surface),
        length,
        d,
        biot,
        x_eq,
        description,
    ))
}

/// Compares a finished run with the series solution, when the case has one.
pub fn series_check(case: &Case, run: &RunResult) -> Option<CheckTable> {
    let (series, length, d, biot, x_eq, description) = applicable(case)?;
    let x0 = case.layers.first()?.initial_moisture;
    let span = x0 - x_eq;
    if span.abs() < 1e-12 {
        return None;
    }
    let rows: Vec<CheckRow> = run
        .curves
        .iter()
        .filter(|r| r.time > 0.0)
        .map(|r| CheckRow {
            hours: r.time / 3600.0,
            model: (r.mean - x_eq) / span,
            series: series.moisture_ratio(d * r.time / (length * length)),
        })
        .collect();
    let max_abs_difference = rows
        .iter()
        .map(|r| (r.model - r.series).abs())
        .fold(0.0, f64::max);
    Some(CheckTable {
        description,
        length,
        diffusivity: d,
        biot,
        rows,
        max_abs_difference,
    })
}

/// One built-in verification case and its outcome.
#[derive(Debug, Clone, PartialEq)]
pub struct VerifyRow {
    /// Case name.
    pub name: String,
    /// Largest |model - series| moisture ratio over the run.
    pub max_error: f64,
    /// The limit it must meet.
    pub limit: f64,
    /// Relative mass-balance error of the run.
    pub mass_balance_error: f64,
}

impl VerifyRow {
    /// Whether the case met its limits (and conserved water to 1e-9).
    pub fn passed(&self) -> bool {
        self.max_error <= self.limit && self.mass_balance_error <= 1e-9
    }
}

/// A single-layer verification case: thickness 10 mm, D 1e-9 m2/s, from 50 % to 10 % moisture,
/// run to a dimensionless time of 1.5 (slab) or 0.6 (cylinder, sphere) at the fixed surface,
/// longer for small Biot numbers so the curve covers most of the change.
pub fn verification_case(
    geometry: Geometry,
    biot: Option<f64>,
    cells: usize,
    tolerance: f64,
) -> Case {
    let (length, d, beta_density) = (0.01, 1e-9, 500.0);
    let exchange = match biot {
        None => Exchange::FixedSurface(0.1),
        Some(b) => Exchange::SurfaceCoefficient(b * d / length),
    };
    let mut step = Step::constant(40.0, Humidity::Unspecified, exchange);
    if biot.is_some() {
        step.equilibrium_moisture = Some(0.1);
    }
    let base = if geometry == Geometry::Slab { 1.5 } else { 0.6 };
    let t_dimless = match biot {
        Some(b) if b < 1.0 => base / b,
        _ => base,
    };
    let mut case = Case::single_layer(
        geometry,
        Exposed::A,
        Material::constant("verification", beta_density, d),
        length,
        0.5,
        vec![step],
        t_dimless * length * length / d,
    );
    case.title = format!("{geometry:?}");
    case.cells_per_layer = cells;
    case.tolerance = tolerance;
    case
}

/// Runs the built-in verification cases: slab, cylinder and sphere with a fixed surface and
/// Biot numbers 0.1, 1, 10 and 100 at the default mesh (limit 1e-3), and a fine slab (limit 1e-5).
pub fn verify() -> Vec<VerifyRow> {
    let mut cases = Vec::new();
    for geometry in [Geometry::Slab, Geometry::Cylinder, Geometry::Sphere] {
        for biot in [None, Some(0.1), Some(1.0), Some(10.0), Some(100.0)] {
            cases.push((
                verification_case(
                    geometry,
                    biot,
                    crate::case::DEFAULT_CELLS_PER_LAYER,
                    crate::case::DEFAULT_TOLERANCE,
                ),
                1e-3,
            ));
        }
    }
    cases.push((verification_case(Geometry::Slab, None, 200, 1e-6), 1e-5));
    cases
        .into_iter()
        .map(|(case, limit)| verify_one(&case, limit))
        .collect()
}

/// Runs one case against its series solution.
pub fn verify_one(case: &Case, limit: f64) -> VerifyRow {
    let name = describe(case);
    match solver::solve(case) {
        Ok(run) => {
            let table = series_check(case, &run);
            VerifyRow {
                name,
                max_error: table.map_or(f64::INFINITY, |t| t.max_abs_difference),
                limit,
                mass_balance_error: run.mass_balance_error,
            }
        }
        Err(_) => VerifyRow {
            name,
            max_error: f64::INFINITY,
            limit,
            mass_balance_error: f64::INFINITY,
        },
    }
}

fn describe(case: &Case) -> String {
    let surface = match case.schedule.first().map(|s| s.exchange) {
        Some(Exchange::SurfaceCoefficient(beta)) => {
            let d = case.materials.first().map_or(1.0, |m| m.diffusivity.d_ref);
            format!(
                "Biot {}",
                crate::text::compact(beta * case.total_thickness() / d)
            )
        }
        _ => String::from("fixed surface"),
    };
    format!(
        "{:?}, {}, {} cells",
        case.geometry, surface, case.cells_per_layer
    )
    .to_lowercase()
}
