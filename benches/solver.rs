//! Solver speed (`cargo bench --bench solver`): one table for the problems P1-P5 of issue 8 at
//! the default and a fine setting (solve time, steps, Newton iterations, cell-iterations per
//! second, error in the mean moisture ratio against Crank's series for P1, P2, P4 and against a
//! very fine reference run for P3 and P5), then the built-in verification cases in the same
//! style.
//!
//! `cargo bench --bench solver -- --peer-json FILE [--p3-workbook PATH]` instead writes what
//! `benches/python_peer.py` needs: for P1-P4 over a grid of cells and tolerances, dampfront's
//! solve time and error, the mesh (cell centres and faces), and the exact moisture ratios at the
//! output times; with `--p3-workbook`, P3 as a case workbook at the cheapest settings reaching
//! 1e-4.

mod common;

use std::collections::BTreeMap;

use common::{Exact, PROBLEMS, error, problem, reference_settings, timed};
use dampfront::case::{Case, DEFAULT_CELLS_PER_LAYER, DEFAULT_TOLERANCE, Geometry};
use dampfront::check::verification_case;
use dampfront::solver::RunResult;

/// The fine setting of the table.
const FINE: (usize, f64) = (160, 1e-6);

fn header() {
    println!(
        "| {:<22} | {:>6} | {:>7} | {:>9} | {:>6} | {:>5} | {:>7} | {:>8} | {:>9} |",
        "case", "cells", "tol", "solve ms", "steps", "rej", "Newton", "Mcell-it/s", "MR error"
    );
    println!(
        "|{:-<24}|{:->8}|{:->9}|{:->11}|{:->8}|{:->7}|{:->9}|{:->12}|{:->11}|",
        ":", ":", ":", ":", ":", ":", ":", ":", ":"
    );
}

fn row(name: &str, case: &Case, secs: f64, run: &RunResult, err: Option<f64>) {
    let s = &run.stats;
    let cell_its = run.cells as f64 * s.newton_iterations as f64 / secs;
    println!(
        "| {:<22} | {:>6} | {:>7.0e} | {:>9.3} | {:>6} | {:>5} | {:>7} | {:>10.1} | {:>9} |",
        name,
        run.cells,
        case.tolerance,
        secs * 1e3,
        s.accepted,
        s.rejected + s.newton_failures,
        s.newton_iterations,
        cell_its / 1e6,
        err.map_or_else(|| String::from("-"), |e| format!("{e:.2e}")),
    );
}

fn table() {
    println!(
        "dampfront {} solver bench, {} (solve only, fastest of repeats)",
        env!("CARGO_PKG_VERSION"),
        machine()
    );
    header();
    for name in PROBLEMS {
        let exact = Exact::of(name);
        let (ref_cells, ref_tol) = reference_settings(name);
        for (label, cells, tol) in [
            ("default", DEFAULT_CELLS_PER_LAYER, DEFAULT_TOLERANCE),
            ("fine", FINE.0, FINE.1),
        ] {
            let case = problem(name, Some(cells), Some(tol));
            let (secs, run) = timed(&case, 0.3);
            let err = error(&case, &run, &exact);
            row(&format!("{name} {label}"), &case, secs, &run, Some(err));
        }
        if common::series_of(name).is_none() {
            println!(
                "| {:<22} | {:>6} | {:>7.0e} | {:>9.0} | {:>6} | {:>5} | {:>7} | {:>10} | {:>9} |",
                format!("{name} reference"),
                ref_cells * problem(name, None, None).layers.len() * sides(name),
                ref_tol,
                exact.seconds * 1e3,
                "",
                "",
                "",
                "",
                "0"
            );
        }
    }
    for geometry in [Geometry::Slab, Geometry::Cylinder, Geometry::Sphere] {
        for biot in [None, Some(1.0)] {
            let case = verification_case(geometry, biot, 40, 1e-4);
            let (secs, run) = timed(&case, 0.2);
            let err = dampfront::check::series_check(&case, &run).map(|t| t.max_abs_difference);
            let b = biot.map_or_else(|| String::from("fixed"), |b| format!("Bi {b}"));
            row(&format!("verify {geometry:?} {b}"), &case, secs, &run, err);
        }
    }
    let case = verification_case(Geometry::Slab, None, 200, 1e-6);
    let (secs, run) = timed(&case, 0.2);
    let err = dampfront::check::series_check(&case, &run).map(|t| t.max_abs_difference);
    row("verify Slab fine", &case, secs, &run, err);
    println!(
        "(P1 slab 10 mm D 1e-9 fixed surface to MR 0.01; P2 the same at Biot 2; P3 D = 2e-10 exp(2X), \
         Biot 5, to X 0.1; P4 sphere 5 mm D 5e-10 to MR 0.01; P5 the wood kiln demo, coupled. \
         steps = accepted, rej = rejected, Newton = iterations, Mcell-it/s = cells x Newton \
         iterations per second, MR error = largest |MR - exact| over the output rows; a reference row is the run P3 and \
         P5 are measured against, with its solve ms; P5's reference has only twice the fine \
         row's cells, so that row's error is on the low side)"
    );
}

/// How many times `cells_per_layer` a layer gets: twice for a slab exposed on both faces.
fn sides(name: &str) -> usize {
    let case = problem(name, None, None);
    if case.exposed == dampfront::case::Exposed::Both {
        2
    } else {
        1
    }
}

/// "N cores, CPU model" from /proc, for the bench header.
pub fn machine() -> String {
    let cpu = std::fs::read_to_string("/proc/cpuinfo").unwrap_or_default();
    let model = cpu
        .lines()
        .find_map(|l| l.strip_prefix("model name"))
        .map(|l| l.trim_start_matches([' ', '\t', ':']).to_string())
        .unwrap_or_else(|| String::from("unknown CPU"));
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    format!("{cores} cores, {model}")
}

/// The peer's data (see the module documentation).
fn peer_json(path: &str, p3_workbook: Option<&str>) {
    // Quarter-octave steps in cells and quarter-decade steps in tolerance, so that each side's
    // cheapest setting is found to within a factor ~1.2 in cells and ~1.8 in tolerance (the
    // scipy side uses the same meshes and rtol steps).
    let cells_grid = [
        10, 12, 14, 17, 20, 24, 28, 34, 40, 48, 56, 67, 80, 95, 112, 134, 160, 190, 224, 267, 320,
    ];
    let tol_grid: Vec<f64> = (0..=16)
        .map(|k| 10f64.powf(-3.0 - f64::from(k) / 4.0))
        .collect();
    let mut out = BTreeMap::new();
    for name in &PROBLEMS[..4] {
        let exact = Exact::of(name);
        let base = problem(name, None, None);
        let layer = &base.layers[0];
        let material = &base.materials[layer.material];
        let step = &base.schedule[0];
        let mut meshes = BTreeMap::new();
        let mut faces = BTreeMap::new();
        let mut grid = Vec::new();
        for &cells in &cells_grid {
            for &tol in &tol_grid {
                let case = problem(name, Some(cells), Some(tol));
                let (secs, run) = timed(&case, 0.1);
                meshes
                    .entry(cells.to_string())
                    .or_insert_with(|| run.positions.clone());
                faces.entry(cells.to_string()).or_insert_with(|| {
                    let valid = case.clone().validated().expect("a valid case");
                    dampfront::solver::Problem::new(&valid).mesh.faces
                });
                grid.push(serde_json::json!({
                    "cells": cells, "tol": tol, "solve_s": secs,
                    "error": error(&case, &run, &exact),
                    "steps": run.stats.accepted, "newton": run.stats.newton_iterations,
                }));
            }
        }
        let (surface, beta) = match step.exchange {
            dampfront::case::Exchange::SurfaceCoefficient(b) => ("coefficient", b),
            _ => ("fixed", 0.0),
        };
        out.insert(
            name.to_string(),
            serde_json::json!({
                "geometry_m": match base.geometry { Geometry::Slab => 0, Geometry::Cylinder => 1, Geometry::Sphere => 2 },
                "length": layer.thickness,
                "x0": layer.initial_moisture,
                "x_eq": common::X_EQ,
                "d_ref": material.diffusivity.d_ref,
                "moisture_coef": material.diffusivity.moisture_coef,
                "surface": surface,
                "beta": beta,
                "times": exact.points.iter().map(|p| p.0).collect::<Vec<_>>(),
                "exact_mr": exact.points.iter().map(|p| p.1).collect::<Vec<_>>(),
                "centres": meshes,
                "faces": faces,
                "dampfront": grid,
            }),
        );
    }
    let text = serde_json::to_string(&out).expect("serialises");
    std::fs::write(path, text).expect("writes the peer data");
    if let Some(book) = p3_workbook {
        // The cheapest setting reaching 1e-4 in the grid above.
        let best = out["P3"]["dampfront"]
            .as_array()
            .expect("a grid")
            .iter()
            .filter(|g| g["error"].as_f64().unwrap_or(1.0) <= 1e-4)
            .min_by(|a, b| {
                let t = |g: &serde_json::Value| g["solve_s"].as_f64().unwrap_or(f64::MAX);
                t(a).total_cmp(&t(b))
            })
            .cloned()
            .expect("a setting reaches 1e-4");
        let cells = best["cells"].as_u64().expect("cells") as usize;
        let tol = best["tol"].as_f64().expect("tol");
        let bytes =
            dampfront::workbook::template::to_xlsx(&common::p3_sheets(cells, tol)).expect("builds");
        std::fs::write(book, bytes).expect("writes the P3 workbook");
    }
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let value = |flag: &str| {
        args.iter()
            .position(|a| a == flag)
            .and_then(|i| args.get(i + 1))
            .map(String::as_str)
    };
    match value("--peer-json") {
        Some(path) => peer_json(path, value("--p3-workbook")),
        None => table(),
    }
}
