//! Whole-program figures (`cargo bench --bench process`): time per step from 40 to 20,000 cells
//! with the fitted exponent, the peak memory of a 20,000-cell coupled case, the whole-process
//! time of `dampfront solve` on a P3 workbook, and `batch` throughput of small workbooks in
//! workbooks per CPU second (user + sys of the whole process and its children).

mod common;

use std::path::Path;
use std::process::Command;
use std::time::Instant;

use common::{p3_sheets, problem, timed};
use dampfront::case::{DEFAULT_CELLS_PER_LAYER, DEFAULT_TOLERANCE};
use dampfront::solver;
use dampfront::workbook::template;

const EXE: &str = env!("CARGO_BIN_EXE_dampfront");

/// User + sys seconds of this process's finished (waited-for) children, from /proc/self/stat.
fn children_cpu_seconds() -> f64 {
    let stat = std::fs::read_to_string("/proc/self/stat").unwrap_or_default();
    // Fields after the command name (which may hold spaces) start at field 3.
    let rest = stat.rsplit_once(')').map_or("", |(_, r)| r);
    let fields: Vec<&str> = rest.split_whitespace().collect();
    // cutime and cstime are fields 16 and 17 (1-based), i.e. 13 and 14 here.
    let ticks: f64 = [13, 14]
        .iter()
        .filter_map(|&i| fields.get(i).and_then(|v| v.parse::<f64>().ok()))
        .sum();
    ticks / clock_ticks()
}

/// Clock ticks per second (`getconf CLK_TCK`; 100 on Linux).
fn clock_ticks() -> f64 {
    Command::new("getconf")
        .arg("CLK_TCK")
        .output()
        .ok()
        .and_then(|o| String::from_utf8(o.stdout).ok())
        .and_then(|s| s.trim().parse().ok())
        .unwrap_or(100.0)
}

/// Peak resident memory of this process, kB (VmHWM).
fn peak_kb() -> u64 {
    std::fs::read_to_string("/proc/self/status")
        .unwrap_or_default()
        .lines()
        .find_map(|l| l.strip_prefix("VmHWM:"))
        .and_then(|v| v.trim().trim_end_matches("kB").trim().parse().ok())
        .unwrap_or(0)
}

/// Least-squares slope of log(y) on log(x).
fn fitted_exponent(points: &[(f64, f64)]) -> f64 {
    let n = points.len() as f64;
    let (lx, ly): (Vec<f64>, Vec<f64>) = points.iter().map(|(x, y)| (x.ln(), y.ln())).unzip();
    let (mx, my) = (lx.iter().sum::<f64>() / n, ly.iter().sum::<f64>() / n);
    let sxy: f64 = lx.iter().zip(&ly).map(|(x, y)| (x - mx) * (y - my)).sum();
    let sxx: f64 = lx.iter().map(|x| (x - mx) * (x - mx)).sum();
    sxy / sxx
}

fn scaling() {
    println!(
        "time per step against cells (P3 for 10 h, P5 for 2 h, cells_per_layer from 40 (P5: 20 \
         per face) to 20,000 cells; fastest of repeats)"
    );
    println!(
        "| {:<4} | {:>6} | {:>6} | {:>7} | {:>9} | {:>11} | {:>13} | {:>15} |",
        "case",
        "cells",
        "steps",
        "Newton",
        "solve ms",
        "us per step",
        "ns/cell/step",
        "ns/cell/Newton"
    );
    println!(
        "|------|-------:|-------:|--------:|----------:|------------:|--------------:|----------------:|"
    );
    for (name, hours, per_face) in [("P3", 10.0, 1), ("P5", 2.0, 2)] {
        let (mut points, mut per_newton) = (Vec::new(), Vec::new());
        for cells in [40, 160, 640, 2560, 10_000, 20_000] {
            let mut case = problem(name, Some(cells / per_face), Some(DEFAULT_TOLERANCE));
            case.end_time = hours * 3600.0;
            case.target_moisture = None;
            case.output_every = Some(1800.0);
            case.profile_times = Some(Vec::new());
            let (secs, run) = timed(&case, 0.3);
            let s = &run.stats;
            let attempts = (s.accepted + s.rejected + s.newton_failures).max(1) as f64;
            let per_step = secs / attempts;
            let per_iteration = secs / s.newton_iterations.max(1) as f64;
            points.push((run.cells as f64, per_step));
            per_newton.push((run.cells as f64, per_iteration));
            println!(
                "| {:<4} | {:>6} | {:>6} | {:>7} | {:>9.2} | {:>11.1} | {:>13.1} | {:>15.1} |",
                name,
                run.cells,
                s.accepted,
                s.newton_iterations,
                secs * 1e3,
                per_step * 1e6,
                per_step * 1e9 / run.cells as f64,
                per_iteration * 1e9 / run.cells as f64
            );
        }
        println!(
            "{name}: time per step ~ cells^{:.3}, per Newton iteration ~ cells^{:.3} (least \
             squares, 40 to 20,000 cells)",
            fitted_exponent(&points),
            fitted_exponent(&per_newton)
        );
    }
}

/// In a child process: run P5 with `cells` in all (half per face) for `hours` and print VmHWM
/// (kB).
fn memory_child(cells: usize, hours: f64) {
    let mut case = problem("P5", Some(cells / 2), None);
    case.end_time = hours * 3600.0;
    case.target_moisture = None;
    case.output_every = Some(1800.0);
    let run = solver::solve(&case).expect("runs");
    println!("{} {}", run.cells, peak_kb());
}

fn memory() {
    println!("peak memory (VmHWM of a child process running only that case, P5 coupled, 2 h)");
    for cells in [40, 20_000] {
        let exe = std::env::current_exe().expect("own path");
        let out = Command::new(exe)
            .args(["--memory-child", &cells.to_string(), "2"])
            .output()
            .expect("the child runs");
        let text = String::from_utf8_lossy(&out.stdout);
        let mut it = text.split_whitespace();
        let (n, kb) = (it.next().unwrap_or("?"), it.next().unwrap_or("?"));
        println!("  {n} cells: peak {kb} kB");
    }
}

/// Runs `dampfront ARGS` `repeats` times: (median wall s, CPU s per run of it and its children).
/// `DAMPFRONT_BENCH_EXE` names another build of the program to time (e.g. one linked
/// differently).
fn run_exe(args: &[&str], dir: &Path, repeats: usize) -> (f64, f64) {
    let exe = std::env::var_os("DAMPFRONT_BENCH_EXE").unwrap_or_else(|| EXE.into());
    let cpu0 = children_cpu_seconds();
    let mut wall: Vec<f64> = (0..repeats)
        .map(|_| {
            let t = Instant::now();
            let out = Command::new(&exe)
                .args(args)
                .current_dir(dir)
                .output()
                .expect("dampfront runs");
            assert!(
                out.status.code() == Some(0),
                "dampfront {args:?} failed: {}",
                String::from_utf8_lossy(&out.stderr)
            );
            t.elapsed().as_secs_f64()
        })
        .collect();
    let cpu = (children_cpu_seconds() - cpu0) / repeats as f64;
    wall.sort_by(f64::total_cmp);
    (wall[wall.len() / 2], cpu)
}

fn whole_process(dir: &Path) {
    let (cells, tol) = (DEFAULT_CELLS_PER_LAYER, DEFAULT_TOLERANCE);
    let book = dir.join("p3.xlsx");
    let bytes = template::to_xlsx(&p3_sheets(cells, tol)).expect("builds");
    std::fs::write(&book, bytes).expect("writes");
    let case = problem("P3", Some(cells), Some(tol));
    let (solve, _) = timed(&case, 0.3);
    let out = dir.join("out");
    std::fs::create_dir_all(&out).expect("a folder");
    let (wall, cpu) = run_exe(&["solve", "p3.xlsx", "--out", "out"], dir, 21);
    println!(
        "whole process: `dampfront solve p3.xlsx` (P3, {cells} cells, tol {tol:.0e}, xlsx in, \
         result with charts out): {:.1} ms wall (median of 21), {:.1} ms CPU; the solve alone {:.2} ms",
        wall * 1e3,
        cpu * 1e3,
        solve * 1e3
    );
}

fn batch(dir: &Path) {
    let n = 100;
    let folder = dir.join("batch");
    std::fs::create_dir_all(&folder).expect("a folder");
    // Small isothermal cases: P3 at 20 cells, each its own file.
    let bytes = template::to_xlsx(&p3_sheets(20, DEFAULT_TOLERANCE)).expect("builds");
    for i in 0..n {
        std::fs::write(folder.join(format!("case{i:03}.xlsx")), &bytes).expect("writes");
    }
    let folder_arg = folder.to_string_lossy().to_string();
    let args = ["batch", folder_arg.as_str(), "--force", "--settle-ms", "0"];
    let (wall, cpu) = run_exe(&args, dir, 3);
    println!(
        "batch: {n} small xlsx workbooks (P3 at 20 cells) with `dampfront batch --force`: \
         {:.0} workbooks per CPU second (user + sys, {:.2} ms CPU each), {:.0} per wall second",
        n as f64 / cpu,
        cpu * 1e3 / n as f64,
        n as f64 / wall
    );
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if let Some(i) = args.iter().position(|a| a == "--memory-child") {
        let cells = args.get(i + 1).and_then(|v| v.parse().ok()).unwrap_or(40);
        let hours = args.get(i + 2).and_then(|v| v.parse().ok()).unwrap_or(2.0);
        memory_child(cells, hours);
        return;
    }
    // `cargo bench --bench process -- batch whole` runs only the parts named (cargo passes
    // `--bench` itself, which is not a filter).
    let filters: Vec<&String> = args
        .iter()
        .skip(1)
        .filter(|a| !a.starts_with("--"))
        .collect();
    let wanted =
        |part: &str| filters.is_empty() || filters.iter().any(|f| part.contains(f.as_str()));
    let scratch = tempfile::tempdir().expect("a scratch folder");
    if wanted("whole") {
        whole_process(scratch.path());
    }
    if wanted("batch") {
        batch(scratch.path());
    }
    if wanted("memory") {
        memory();
    }
    if wanted("scaling") {
        scaling();
    }
}
