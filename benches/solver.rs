//! Solver speed: wall time per run of the built-in verification cases and of a long nonlinear
//! case, with the work counters, so that regressions show as figures (`cargo bench`).

use std::time::Instant;

use dampfront::case::{Case, Exchange, Exposed, Geometry, Humidity, Material, Step};
use dampfront::check::verification_case;
use dampfront::physics::Isotherm;
use dampfront::solver;

fn time(case: &Case, repeats: u32) -> (f64, solver::Stats) {
    let mut stats = solver::Stats::default();
    let start = Instant::now();
    for _ in 0..repeats {
        stats = solver::solve(case).expect("runs").stats;
    }
    (start.elapsed().as_secs_f64() / f64::from(repeats), stats)
}

fn main() {
    println!("{:<44} {:>12} {:>10}  work", "case", "ms per run", "cells");
    let mut cases: Vec<(String, Case)> = Vec::new();
    for geometry in [Geometry::Slab, Geometry::Cylinder, Geometry::Sphere] {
        for biot in [None, Some(1.0)] {
            let case = verification_case(geometry, biot, 40, 1e-4);
            cases.push((format!("{geometry:?} {biot:?} 40 cells"), case));
        }
    }
    cases.push((
        "Slab fixed 200 cells tol 1e-6".into(),
        verification_case(Geometry::Slab, None, 200, 1e-6),
    ));
    let mut wood = Material::constant("wood", 550.0, 2e-10);
    wood.isotherm = Isotherm::Wood;
    wood.diffusivity.moisture_coef = 4.0;
    let mut board = Case::single_layer(
        Geometry::Slab,
        Exposed::Both,
        wood,
        0.05,
        0.6,
        vec![Step::constant(
            60.0,
            Humidity::Relative(0.4),
            Exchange::AirSide(0.01),
        )],
        2000.0 * 3600.0,
    );
    board.output_every = Some(3600.0);
    cases.push(("wood board, air side, 2000 h".into(), board));
    for (name, case) in &cases {
        let (secs, stats) = time(case, 5);
        println!(
            "{name:<44} {:>12.3} {:>10}  {stats}",
            secs * 1e3,
            case.cells_per_layer * case.layers.len()
        );
    }
}
