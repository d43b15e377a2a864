use dampfront::case::{Case, Coupling, Exchange, Exposed, Geometry, Humidity, Material, Step};
use dampfront::physics::{Diffusivity, Isotherm};
use dampfront::solver;
fn main() {
    let k: f64 = std::env::args().nth(1).unwrap().parse().unwrap();
    let h: f64 = std::env::args().nth(2).unwrap().parse().unwrap();
    let hours: f64 = std::env::args().nth(3).unwrap().parse().unwrap();
    let mut m = Material::constant("m", 500.0, 2e-10);
    m.conductivity = Some(k);
    m.specific_heat = Some(1500.0);
    m.isotherm = Isotherm::Oswin { a: 0.12, b: 0.5 };
    m.diffusivity = Diffusivity {
        activation_energy_j_mol: 30_000.0,
        moisture_coef: 2.0,
        ..Diffusivity::constant(2e-10)
    };
    let mut step = Step::constant(
        50.0,
        Humidity::Relative(0.3),
        Exchange::SurfaceCoefficient(5e-8),
    );
    step.heat_coef = Some(h);
    let mut c = Case::single_layer(
        Geometry::Slab,
        Exposed::A,
        m,
        0.01,
        0.8,
        vec![step],
        hours * 3600.0,
    );
    c.layers[0].initial_temp_c = 50.0;
    c.coupling = Coupling::HeatAndMoisture;
    let t0 = std::time::Instant::now();
    match solver::solve(&c) {
        Ok(r) => println!(
            "{:?} {} {:?} mean {} Ts {}",
            t0.elapsed(),
            r.stats,
            r.energy_balance_error,
            r.last().unwrap().mean,
            r.last().unwrap().surface_temp_c
        ),
        Err(e) => println!("err {e}"),
    }
}
