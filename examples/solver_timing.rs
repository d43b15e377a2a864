//! A private timing run of the solver on the P1-P5 problems of issue 8: solve time (the run
//! only, not building the problem), steps, Newton iterations, linear solves and the largest
//! error in mean moisture ratio against Crank's series (P1, P2, P4) or a fine run (P3).
//!
//! `cargo run --release --example solver_timing [CELLS] [TOLERANCE]`

use std::time::Instant;

use dampfront::analytic::{Series, Shape, Surface};
use dampfront::case::{Case, Exchange, Exposed, Geometry, Humidity, Material, Step};
use dampfront::solver::{self, Problem, RunControl, RunResult};

/// Problem: (name, case, X_eq, series to compare with).
fn problem(id: u32, cells: usize, tol: f64) -> (Case, f64, Option<(Series, f64, f64)>) {
    let (x0, x_eq) = (0.8, 0.05);
    let (geometry, l, d, exchange) = match id {
        1 => (Geometry::Slab, 0.01, 1e-9, Exchange::FixedSurface(x_eq)),
        2 => (
            Geometry::Slab,
            0.01,
            1e-9,
            Exchange::SurfaceCoefficient(2.0 * 1e-9 / 0.01),
        ),
        3 => (
            Geometry::Slab,
            0.01,
            2e-10,
            Exchange::SurfaceCoefficient(5.0 * 2e-10 / 0.01),
        ),
        _ => (Geometry::Sphere, 0.005, 5e-10, Exchange::FixedSurface(x_eq)),
    };
    let mut material = Material::constant("m", 500.0, d);
    if id == 3 {
        material.diffusivity.moisture_coef = 2.0;
    }
    let mut step = Step::constant(40.0, Humidity::Unspecified, exchange);
    if !matches!(exchange, Exchange::FixedSurface(_)) {
        step.equilibrium_moisture = Some(x_eq);
    }
    let end = 4.0 * l * l / d * if id == 3 { 3.0 } else { 1.0 };
    let mut case = Case::single_layer(geometry, Exposed::A, material, l, x0, vec![step], end);
    case.cells_per_layer = cells;
    case.tolerance = tol;
    case.target_moisture = Some(if id == 3 {
        0.1
    } else {
        x_eq + 0.01 * (x0 - x_eq)
    });
    case.output_every = Some(
        end / std::env::var("ROWS")
            .ok()
            .and_then(|r| r.parse().ok())
            .unwrap_or(400.0),
    );
    let series = match id {
        1 => Some((Series::new(Shape::Slab, Surface::Fixed), l, d)),
        2 => Some((
            Series::new(Shape::Slab, Surface::Evaporation { biot: 2.0 }),
            l,
            d,
        )),
        4 => Some((Series::new(Shape::Sphere, Surface::Fixed), l, d)),
        _ => None,
    };
    (case, x_eq, series)
}

fn timed(case: &Case, repeats: u32) -> (f64, RunResult) {
    let valid = case.clone().validated().expect("valid");
    let p = Problem::new(&valid);
    let mut best = f64::INFINITY;
    let mut last = None;
    for _ in 0..repeats {
        let start = Instant::now();
        let r = solver::run(&p, &RunControl::default()).expect("runs");
        best = best.min(start.elapsed().as_secs_f64());
        last = Some(r);
    }
    (best, last.expect("ran"))
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let cells: usize = args.get(1).and_then(|a| a.parse().ok()).unwrap_or(40);
    let tol: f64 = args.get(2).and_then(|a| a.parse().ok()).unwrap_or(1e-4);
    println!(
        "{:<4} {:>9} {:>6} {:>6} {:>7} {:>7} {:>10} {:>10}",
        "case", "ms", "steps", "rej", "newton", "linear", "MR error", "mass bal"
    );
    let only: Option<u32> = std::env::var("ONLY").ok().and_then(|v| v.parse().ok());
    for id in (1..=4).filter(|i| only.is_none_or(|o| o == *i)) {
        let (case, x_eq, series) = problem(id, cells, tol);
        let (secs, run) = timed(&case, if only.is_some() { 2000 } else { 20 });
        let x0 = case.layers[0].initial_moisture;
        let mr = |x: f64| (x - x_eq) / (x0 - x_eq);
        let err = match series {
            Some((s, l, d)) => run
                .curves
                .iter()
                .filter(|r| r.time > 0.0)
                .inspect(|r| {
                    if std::env::var_os("ERRS").is_some() {
                        let tau = d * r.time / (l * l);
                        println!(
                            "  tau {tau:.4} err {:+.2e}",
                            mr(r.mean) - s.moisture_ratio(tau)
                        );
                    }
                })
                .map(|r| (mr(r.mean) - s.moisture_ratio(d * r.time / (l * l))).abs())
                .fold(0.0, f64::max),
            None => {
                let (fine, _, _) = problem(id, 640, 1e-8);
                let (_, reference) = timed(&fine, 1);
                run.curves
                    .iter()
                    .zip(&reference.curves)
                    .filter(|(a, b)| a.time > 0.0 && (a.time - b.time).abs() < 1e-6 * a.time)
                    .map(|(a, b)| (mr(a.mean) - mr(b.mean)).abs())
                    .fold(0.0, f64::max)
            }
        };
        let s = run.stats;
        println!(
            "P{id:<3} {:>9.3} {:>6} {:>6} {:>7} {:>7} {:>10.2e} {:>10.1e}",
            secs * 1e3,
            s.accepted,
            s.rejected + s.newton_failures,
            s.newton_iterations,
            s.linear_solves,
            err,
            run.mass_balance_error
        );
        if std::env::var_os("STATS").is_some() {
            println!("     {s}");
        }
    }
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("inbox-demo/wood-board.xlsx");
    if let (Ok((book, _)), true) = (
        dampfront::workbook::read::read_file(&path),
        only.is_none_or(|o| o == 5),
    ) {
        let parsed = dampfront::workbook::parse::parse(&book, "wood").expect("demo parses");
        let case: Case = (*parsed.case).clone();
        let (secs, run) = timed(&case, 3);
        let s = run.stats;
        println!(
            "P5   {:>9.3} {:>6} {:>6} {:>7} {:>7} {:>10} {:>10.1e} energy {:.1e}",
            secs * 1e3,
            s.accepted,
            s.rejected + s.newton_failures,
            s.newton_iterations,
            s.linear_solves,
            "-",
            run.mass_balance_error,
            run.energy_balance_error.unwrap_or(f64::NAN)
        );
    }
}
