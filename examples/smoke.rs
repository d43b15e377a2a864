use dampfront::case::*;
use dampfront::solver;
fn series(t: f64) -> f64 {
    // slab fixed surface MR
    let mut s = 0.0;
    for n in 0..2000 {
        let k = (2 * n + 1) as f64;
        s += 8.0 / (k * k * std::f64::consts::PI.powi(2))
            * (-k * k * std::f64::consts::PI.powi(2) * t / 4.0).exp();
    }
    s
}
fn main() {
    let d = 1e-9;
    let l = 0.01;
    for cells in [40usize, 80, 200] {
        let mut case = Case::single_layer(
            Geometry::Slab,
            Exposed::A,
            Material::constant("m", 500.0, d),
            l,
            0.5,
            vec![Step::constant(
                20.0,
                Humidity::Unspecified,
                Exchange::FixedSurface(0.1),
            )],
            2.0 * l * l / d,
        );
        case.cells_per_layer = cells;
        if cells == 200 {
            case.tolerance = 1e-6;
        }
        let r = solver::solve(&case).unwrap();
        let mut worst: f64 = 0.0;
        for row in r.curves.iter().skip(1) {
            let t = d * row.time / (l * l);
            let mr = (row.mean - 0.1) / 0.4;
            worst = worst.max((mr - series(t)).abs());
        }
        println!(
            "cells {cells}: max err {worst:.3e}, rows {}, mb {:.2e}, {}",
            r.curves.len(),
            r.mass_balance_error,
            r.stats
        );
    }
}
