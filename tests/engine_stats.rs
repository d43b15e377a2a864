//! Solver work counters of a few fixed cases, compared with a committed snapshot so that a step
//! controller or Newton change that quietly does more (or less) work shows up in review.
//! Set `DAMPFRONT_UPDATE_SNAPSHOTS=1` to rewrite `tests/snapshots/engine_stats.txt` after an
//! intended change, and say why in the commit.

use dampfront::case::{Case, Exchange, Exposed, Geometry, Humidity, Material, Step};
use dampfront::check::verification_case;
use dampfront::physics::Isotherm;
use dampfront::solver;

fn cases() -> Vec<(&'static str, Case)> {
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
        500.0 * 3600.0,
    );
    board.output_every = Some(3600.0);
    vec![
        (
            "slab fixed 40",
            verification_case(Geometry::Slab, None, 40, 1e-4),
        ),
        (
            "cylinder biot 1 40",
            verification_case(Geometry::Cylinder, Some(1.0), 40, 1e-4),
        ),
        (
            "sphere biot 100 40",
            verification_case(Geometry::Sphere, Some(100.0), 40, 1e-4),
        ),
        ("wood board air side", board),
    ]
}

#[test]
fn solver_work_matches_the_snapshot() {
    let mut text = String::new();
    for (name, case) in cases() {
        let stats = solver::solve(&case).expect("runs").stats;
        text.push_str(&format!("{name}: {stats}\n"));
    }
    let path =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/snapshots/engine_stats.txt");
    if std::env::var_os("DAMPFRONT_UPDATE_SNAPSHOTS").is_some() {
        std::fs::write(&path, &text).expect("snapshot written");
        return;
    }
    let expected = std::fs::read_to_string(&path).expect("snapshot exists");
    assert_eq!(
        text, expected,
        "solver work changed; if intended, rerun with DAMPFRONT_UPDATE_SNAPSHOTS=1"
    );
}
