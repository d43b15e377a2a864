//! Random damage to a valid case never panics: every mutated workbook is either refused with
//! problems or solved, and a solved one writes a result workbook. A fixed seed keeps the run
//! reproducible; a watchdog cancels any solve that runs long, so the test cannot hang.

mod support;

use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Duration;

use dampfront::solver::{self, Problem, RunControl};
use dampfront::workbook::{parse, read, write};
use support::books::{self, V};

/// Values a careless or hostile workbook might hold in any cell.
const GARBAGE: [&str; 16] = [
    "", "abc", "-1", "0", "1e308", "-1e308", "NaN", "inf", "1e-300", "12,5", "100000", "99.99",
    "yes", "gab", "1e-20", "-0",
];

/// A small deterministic generator (64-bit LCG, Knuth's MMIX constants).
struct Lcg(u64);

impl Lcg {
    fn next(&mut self, n: usize) -> usize {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((self.0 >> 33) as usize) % n
    }
}

fn to_csv(sheets: &[(String, Vec<Vec<String>>)]) -> String {
    let mut out = String::new();
    for (name, rows) in sheets {
        out.push_str(&format!("[{name}]\n"));
        for row in rows {
            out.push_str(&row.join(","));
            out.push('\n');
        }
    }
    out
}

fn as_text(sheets: Vec<books::Sheet>) -> Vec<(String, Vec<Vec<String>>)> {
    sheets
        .into_iter()
        .map(|(name, rows)| {
            let rows = rows
                .into_iter()
                .map(|r| {
                    r.into_iter()
                        .map(|v| match v {
                            V::E => String::new(),
                            V::N(x) => format!("{x:e}"),
                            V::T(s) => s.to_string(),
                        })
                        .collect()
                })
                .collect();
            (name.to_string(), rows)
        })
        .collect()
}

#[test]
fn randomly_damaged_cases_are_refused_or_solved_without_panicking() {
    let base = as_text(books::rich_case());
    let mut rng = Lcg(0x5eed);
    let (mut refused, mut solved, mut stopped) = (0, 0, 0);
    for _ in 0..400 {
        let mut sheets = base.clone();
        for _ in 0..1 + rng.next(3) {
            let s = rng.next(sheets.len());
            let rows = &mut sheets[s].1;
            let r = rng.next(rows.len());
            let c = rng.next(rows[r].len());
            rows[r][c] = GARBAGE[rng.next(GARBAGE.len())].to_string();
        }
        let text = to_csv(&sheets);
        let book = match read::read_bytes(text.as_bytes(), "csv") {
            Ok(b) => b,
            Err(_) => {
                refused += 1;
                continue;
            }
        };
        let parsed = match parse::parse(&book, "damaged") {
            Ok(p) => p,
            Err(problems) => {
                assert!(!problems.is_empty());
                refused += 1;
                continue;
            }
        };
        let problem = Problem::new(&parsed.case);
        let cancel = Arc::new(AtomicBool::new(false));
        let watchdog = {
            let cancel = Arc::clone(&cancel);
            std::thread::spawn(move || {
                for _ in 0..100 {
                    if cancel.load(Ordering::Relaxed) {
                        return;
                    }
                    std::thread::sleep(Duration::from_millis(50));
                }
                cancel.store(true, Ordering::Relaxed);
            })
        };
        let control = RunControl {
            cancel: Some(&cancel),
            progress: None,
            ..RunControl::default()
        };
        match solver::run(&problem, &control) {
            Ok(run) => {
                solved += 1;
                let bytes = write::result_workbook(&write::ResultInput {
                    case: &parsed.case,
                    run: &run,
                    warnings: &parsed.warnings,
                    inputs: &parsed.inputs,
                    measured: &parsed.measured,
                    fit: None,
                    check: None,
                    input_sha256: "",
                });
                assert!(bytes.is_ok());
                assert!(run.curves.iter().all(|r| r.mean.is_finite()));
            }
            Err(e) => {
                println!("stopped: {e}\n{text}");
                stopped += 1;
            }
        }
        cancel.store(true, Ordering::Relaxed);
        watchdog.join().expect("watchdog");
    }
    println!("refused {refused}, solved {solved}, stopped {stopped}");
    assert!(refused > 0 && solved > 0);
}
