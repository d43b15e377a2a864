//! The benchmark problems P1-P5 of issue 8 and their error measures, shared by the bench
//! binaries. Only the public API: `Case`, `solver::solve`, `check::series_check`, the templates.

#![allow(dead_code)] // each bench binary uses its own part

use std::time::Instant;

use dampfront::analytic::{Series, Shape, Surface};
use dampfront::case::{Case, Exchange, Exposed, Geometry, Humidity, Material, Step};
use dampfront::check;
use dampfront::solver::{self, RunResult};
use dampfront::workbook::template::{self, Cell, Kind, Sheet};
use dampfront::workbook::{parse, read};

/// The problems, in table order.
pub const PROBLEMS: [&str; 5] = ["P1", "P2", "P3", "P4", "P5"];

/// X0 and X_eq (dry fractions) of P1-P4.
pub const X0: f64 = 0.8;
/// The surface or equilibrium moisture of P1-P4.
pub const X_EQ: f64 = 0.05;

/// P3's target mean moisture (dry fraction).
pub const P3_TARGET: f64 = 0.1;

/// A one-layer case of P1-P4 exposed on face A (a slab's half-thickness: the other face is the
/// plane of symmetry).
fn one_layer(geometry: Geometry, length: f64, material: Material, exchange: Exchange) -> Case {
    let mut step = Step::constant(40.0, Humidity::Unspecified, exchange);
    if matches!(exchange, Exchange::SurfaceCoefficient(_)) {
        step.equilibrium_moisture = Some(X_EQ);
    }
    let mut case = Case::single_layer(geometry, Exposed::A, material, length, X0, vec![step], 1.0);
    case.profile_times = Some(Vec::new());
    case
}

/// Crank's series for the problems that have one (P1, P2, P4): the series, the length and D.
pub fn series_of(name: &str) -> Option<(Series, f64, f64)> {
    match name {
        "P1" => Some((Series::new(Shape::Slab, Surface::Fixed), 0.01, 1e-9)),
        "P2" => Some((
            Series::new(Shape::Slab, Surface::Evaporation { biot: 2.0 }),
            0.01,
            1e-9,
        )),
        "P4" => Some((Series::new(Shape::Sphere, Surface::Fixed), 0.005, 5e-10)),
        _ => None,
    }
}

/// The problem `name` at `cells` per layer and time tolerance `tol` (`None`: the defaults).
///
/// P1 slab, half-thickness 10 mm, D 1e-9 m2/s, X0 0.8, surface held at 0.05, until the mean
/// moisture ratio is 0.01; P2 the same with a surface coefficient giving Biot 2; P3
/// D(X) = 2e-10 exp(2 X) m2/s, Biot 5 on 2e-10, X_eq 0.05, X0 0.8, until the mean is 0.1; P4 a
/// sphere of radius 5 mm, D 5e-10, fixed surface, until MR 0.01; P5 the coupled kiln demo (the
/// `wood` template). Output rows: about 100 before the end (P1-P4), the template's (P5).
pub fn problem(name: &str, cells: Option<usize>, tol: Option<f64>) -> Case {
    let mut case = match name {
        "P1" | "P2" | "P4" => {
            let (series, length, d) = series_of(name).expect("has a series");
            let geometry = if name == "P4" {
                Geometry::Sphere
            } else {
                Geometry::Slab
            };
            let exchange = match name {
                "P2" => Exchange::SurfaceCoefficient(2.0 * d / length),
                _ => Exchange::FixedSurface(X_EQ),
            };
            let mut case = one_layer(
                geometry,
                length,
                Material::constant("p", 500.0, d),
                exchange,
            );
            let t_end = series.time_to_reach(0.99) * length * length / d;
            case.target_moisture = Some(X_EQ + 0.01 * (X0 - X_EQ));
            case.end_time = 1.5 * t_end;
            case.output_every = Some(t_end / 100.0);
            case
        }
        "P3" => {
            let mut material = Material::constant("p3", 500.0, 2e-10);
            material.diffusivity.moisture_coef = 2.0;
            let length = 0.01;
            let mut case = one_layer(
                Geometry::Slab,
                length,
                material,
                Exchange::SurfaceCoefficient(5.0 * 2e-10 / length),
            );
            case.target_moisture = Some(P3_TARGET);
            case.end_time = 1000.0 * 3600.0;
            case.output_every = Some(3600.0);
            case
        }
        "P5" => wood_demo(),
        _ => panic!("no problem {name}"),
    };
    case.title = name.to_string();
    if let Some(c) = cells {
        case.cells_per_layer = c;
    }
    if let Some(t) = tol {
        case.tolerance = t;
    }
    case
}

/// The coupled kiln demo: the `wood` template as `dampfront new wood` writes it.
pub fn wood_demo() -> Case {
    let csv = template::to_csv(&template::sheets(Kind::Wood));
    let book = read::read_bytes(csv.as_bytes(), "csv").expect("the template reads");
    parse::parse(&book, "wood")
        .expect("the template parses")
        .case
        .into_case()
}

/// The settings of the reference runs for the problems without a series (P3, P5).
pub fn reference_settings(name: &str) -> (usize, f64) {
    match name {
        "P5" => (320, 1e-7),
        _ => (1280, 1e-9),
    }
}

/// Moisture ratio of a row: the run's own where it knows X_eq, else the change of the mean
/// over the span `x0 - x_eq`.
fn row_ratio(row: &solver::CurveRow, x0: f64, x_eq: f64) -> f64 {
    row.moisture_ratio
        .unwrap_or((row.mean - x_eq) / (x0 - x_eq))
}

/// The exact mean moisture ratio at the output times of `case`, up to `until` s: Crank's series
/// for P1, P2, P4, or the reference run for P3, P5 (its rows at the same times).
pub struct Exact {
    /// (time s, moisture ratio).
    pub points: Vec<(f64, f64)>,
    /// Seconds the reference run took (0 for a series).
    pub seconds: f64,
}

impl Exact {
    /// The series (P1, P2, P4) or the reference run (P3, P5, which costs seconds).
    pub fn of(name: &str) -> Exact {
        match series_of(name) {
            Some((series, length, d)) => {
                let case = problem(name, None, None);
                let every = case.output_every.expect("set");
                let t_end = series.time_to_reach(0.99) * length * length / d;
                let points = (1..)
                    .map(|k| f64::from(k) * every)
                    .take_while(|&t| t <= t_end)
                    .map(|t| (t, series.moisture_ratio(d * t / (length * length))))
                    .collect();
                Exact {
                    points,
                    seconds: 0.0,
                }
            }
            None => {
                let (cells, tol) = reference_settings(name);
                let case = problem(name, Some(cells), Some(tol));
                let start = Instant::now();
                let run = solver::solve(&case).expect("the reference runs");
                let seconds = start.elapsed().as_secs_f64();
                let (x0, x_eq) = spans(&case, &run);
                let points = run
                    .curves
                    .iter()
                    .filter(|r| r.time > 0.0)
                    .map(|r| (r.time, row_ratio(r, x0, x_eq)))
                    .collect();
                Exact { points, seconds }
            }
        }
    }

    /// Largest |MR(run) - MR(exact)| over the exact points the run also has a row at.
    pub fn error(&self, case: &Case, run: &RunResult) -> f64 {
        let (x0, x_eq) = spans(case, run);
        let mut worst = 0.0_f64;
        let mut rows = run.curves.iter().peekable();
        for &(t, mr) in &self.points {
            while rows.next_if(|r| r.time < t * (1.0 - 1e-9)).is_some() {}
            if let Some(r) = rows.peek().filter(|r| (r.time - t).abs() <= 1e-9 * t) {
                worst = worst.max((row_ratio(r, x0, x_eq) - mr).abs());
            }
        }
        worst
    }
}

/// X0 and the equilibrium used for ratios where the run gives none (the last mean).
fn spans(case: &Case, run: &RunResult) -> (f64, f64) {
    let x0 = case.layers[0].initial_moisture;
    let x_eq = match case.schedule[0].exchange {
        Exchange::FixedSurface(x) => x,
        _ => case.schedule[0]
            .equilibrium_moisture
            .unwrap_or_else(|| run.last().map_or(0.0, |r| r.mean)),
    };
    (x0, x_eq)
}

/// Error against Crank's series with `check::series_check` (P1, P2, P4), else against `exact`.
pub fn error(case: &Case, run: &RunResult, exact: &Exact) -> f64 {
    match check::series_check(case, run) {
        Some(table) => table.max_abs_difference,
        None => exact.error(case, run),
    }
}

/// One timed solve: the fastest of repeats for at least `budget` s (at most 200; a single run
/// when one takes longer than the budget).
pub fn timed(case: &Case, budget: f64) -> (f64, RunResult) {
    let mut best = f64::INFINITY;
    let mut run = None;
    let start = Instant::now();
    let mut n = 0;
    while n < 1 || (start.elapsed().as_secs_f64() < budget && n < 200) {
        let t = Instant::now();
        let r = solver::solve(case).expect("runs");
        best = best.min(t.elapsed().as_secs_f64());
        run = Some(r);
        n += 1;
    }
    (best, run.expect("ran"))
}

/// P3 as a case workbook (key sheet and tables, as a user would type it), at these settings.
pub fn p3_sheets(cells: usize, tol: f64) -> Vec<Sheet> {
    let key = |k: &str, v: Cell| vec![Cell::from(k), v];
    let table = |name: &str, rows: Vec<Vec<Cell>>| Sheet {
        name: name.to_string(),
        rows,
        column_notes: Vec::new(),
    };
    vec![
        table(
            "case",
            vec![
                key("title", Cell::from("P3 variable D, Biot 5")),
                key("geometry", Cell::from("slab")),
                key("exposed", Cell::from("a")),
                key("cells_per_layer", Cell::from(cells as f64)),
                key("tolerance", Cell::from(tol)),
                key("end_hours", Cell::from(1000.0)),
                key("target_moisture_pct", Cell::from(100.0 * P3_TARGET)),
                key("output_every_min", Cell::from(60.0)),
            ],
        ),
        table(
            "layers",
            vec![
                ["name", "material", "thickness_mm", "initial_moisture_pct"]
                    .map(Cell::from)
                    .to_vec(),
                vec![
                    Cell::from("board"),
                    Cell::from("p3"),
                    Cell::from(10.0),
                    Cell::from(100.0 * X0),
                ],
            ],
        ),
        table(
            "materials",
            vec![
                [
                    "material",
                    "dry_density_kg_m3",
                    "d_ref_m2_s",
                    "moisture_coef",
                ]
                .map(Cell::from)
                .to_vec(),
                vec![
                    Cell::from("p3"),
                    Cell::from(500.0),
                    Cell::from(2e-10),
                    Cell::from(2.0),
                ],
            ],
        ),
        table(
            "schedule",
            vec![
                [
                    "step",
                    "dry_bulb_c",
                    "equilibrium_moisture_pct",
                    "surface_coef_m_s",
                ]
                .map(Cell::from)
                .to_vec(),
                vec![
                    Cell::from("hold"),
                    Cell::from(40.0),
                    Cell::from(100.0 * X_EQ),
                    Cell::from(5.0 * 2e-10 / 0.01),
                ],
            ],
        ),
    ]
}
