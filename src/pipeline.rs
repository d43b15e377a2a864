//! One input file from bytes to result: read, parse, solve, write. Shared by `solve`, `batch`
//! and `watch` (through [`watch::Processor`]).

use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use sha2::{Digest, Sha256};

use crate::check;
use crate::solver::{self, Problem, RunControl, RunStatus, SolveError};
use crate::watch::{self, Attempt, Report, Status};
use crate::workbook::parse::{self, InputProblem};
use crate::workbook::read::{self, Isolation, ReadError};
use crate::workbook::write;

/// Where and what to write.
#[derive(Debug, Clone, Default)]
pub struct Pipeline {
    /// Write outputs here instead of beside the input.
    pub out_dir: Option<PathBuf>,
    /// Also write `<stem>.curves.csv` and `<stem>.profiles.csv`.
    pub csv: bool,
    /// Show a progress bar on standard error for runs longer than a second.
    pub progress: bool,
    /// How spreadsheets are read: in this process, or in a memory-limited child process so
    /// that no input can end the program.
    pub isolation: Isolation,
    /// Seconds one case may compute before it is stopped with a message; `None`: no limit.
    pub case_seconds: Option<f64>,
}

/// The outcome of one file, with the problems for the command line to print.
#[derive(Debug, Clone)]
pub struct FileOutcome {
    /// What happened.
    pub report: Report,
    /// Problems found in the input (when the status is [`Status::Problems`]).
    pub problems: Vec<InputProblem>,
    /// Wall-clock seconds.
    pub seconds: f64,
}

fn file_stem(path: &Path) -> String {
    path.file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| String::from("case"))
}

fn problem(sheet: &str, cell: &str, text: impl Into<String>) -> InputProblem {
    InputProblem {
        sheet: sheet.to_string(),
        cell: cell.to_string(),
        problem: text.into(),
    }
}

/// Formats a problem as the command line prints it: `FILE: SHEET!CELL: problem`.
pub fn problem_line(file: &Path, p: &InputProblem) -> String {
    let place = match (p.sheet.is_empty(), p.cell.is_empty()) {
        (true, _) => String::new(),
        (false, true) => format!("{}: ", p.sheet),
        (false, false) => format!("{}!{}: ", p.sheet, p.cell),
    };
    format!("{}: {}{}", file.display(), place, p.problem)
}

impl Pipeline {
    /// The settings of the command line: spreadsheets read in a child process of this program.
    pub fn isolated() -> Pipeline {
        Pipeline {
            isolation: Isolation::this_program(),
            case_seconds: Some(crate::limits::CASE_SECONDS),
            ..Pipeline::default()
        }
    }

    fn output(&self, path: PathBuf) -> PathBuf {
        match (&self.out_dir, path.file_name()) {
            (Some(dir), Some(name)) => dir.join(name),
            _ => path,
        }
    }

    /// Runs one input file.
    pub fn run_file(&self, input: &Path, attempt: Attempt, cancel: &AtomicBool) -> FileOutcome {
        let started = Instant::now();
        let (report, problems) = self.run_inner(input, attempt, cancel);
        FileOutcome {
            report,
            problems,
            seconds: started.elapsed().as_secs_f64(),
        }
    }

    fn fail(&self, input: &Path, problems: Vec<InputProblem>) -> (Report, Vec<InputProblem>) {
        let errors = self.output(watch::errors_path(input));
        let detail = match write::errors_workbook(&problems)
            .map_err(|e| e.to_string())
            .and_then(|b| write::write_atomically(&errors, &b).map_err(|e| e.to_string()))
        {
            Ok(()) => format!("{} problem(s); see {}", problems.len(), errors.display()),
            Err(e) => {
                return (
                    Report {
                        status: Status::Failed,
                        drying_time_h: None,
                        detail: format!("could not write {}: {e}", errors.display()),
                    },
                    problems,
                );
            }
        };
        (
            Report {
                status: Status::Problems,
                drying_time_h: None,
                detail,
            },
            problems,
        )
    }

    fn run_inner(
        &self,
        input: &Path,
        attempt: Attempt,
        cancel: &AtomicBool,
    ) -> (Report, Vec<InputProblem>) {
        let (book, bytes) = match read::read_file_with(input, &self.isolation) {
            Ok(ok) => ok,
            Err(ReadError::Io { .. }) if attempt != Attempt::Final => {
                return (not_ready("the file could not be read yet"), Vec::new());
            }
            Err(e @ ReadError::NotAWorkbook { .. }) if attempt != Attempt::Final => {
                return (not_ready(&e.to_string()), Vec::new());
            }
            // A file that is missing or unreadable is a system error, not a problem of the
            // input's content: nothing is written beside it.
            Err(e @ ReadError::Io { .. }) => {
                return (
                    Report {
                        status: Status::Failed,
                        drying_time_h: None,
                        detail: e.to_string(),
                    },
                    Vec::new(),
                );
            }
            Err(e) => return self.fail(input, vec![problem("", "", e.to_string())]),
        };
        let sha = hex(&Sha256::digest(&bytes));
        let parsed = match parse::parse(&book, &file_stem(input)) {
            Ok(p) => p,
            Err(problems) => return self.fail(input, problems),
        };
        let case = &parsed.case;
        let problem_data = Problem::new(case);
        let bar = ProgressBar::hidden();
        bar.set_length(1000);
        bar.set_style(
            ProgressStyle::with_template("{msg} [{bar:30}] {percent}% of end time")
                .unwrap_or_else(|_| ProgressStyle::default_bar()),
        );
        bar.set_message(input.display().to_string());
        let started = Instant::now();
        let show = |fraction: f64| {
            // Only runs longer than a second get a bar; short ones would just flicker.
            if bar.is_hidden() && started.elapsed().as_secs_f64() > 1.0 {
                bar.set_draw_target(ProgressDrawTarget::stderr());
            }
            bar.set_position((fraction.clamp(0.0, 1.0) * 1000.0) as u64);
        };
        let deadline = self.case_seconds.and_then(|s| {
            Some((
                started.checked_add(Duration::try_from_secs_f64(s).ok()?)?,
                s,
            ))
        });
        let control = RunControl {
            cancel: Some(cancel),
            progress: self.progress.then_some(&show as &dyn Fn(f64)),
            deadline,
        };
        let solved = solver::run(&problem_data, &control);
        bar.finish_and_clear();
        let run = match solved {
            Ok(run) => run,
            Err(SolveError::Cancelled { .. }) => {
                return (
                    Report {
                        status: Status::Failed,
                        drying_time_h: None,
                        detail: String::from("cancelled; nothing written"),
                    },
                    Vec::new(),
                );
            }
            Err(e) => {
                // A run that took too long or too many steps is eased by a larger tolerance
                // (or fewer cells, a shorter end): point at the first of those the input gives.
                let (sheet, cell) = match e {
                    SolveError::OutOfTime { .. } | SolveError::TooManySteps { .. } => {
                        given_cell(&parsed.inputs, &["case.tolerance", "case.cells_per_layer"])
                            .unwrap_or_else(|| (String::from("case"), String::new()))
                    }
                    _ => (String::new(), String::new()),
                };
                return self.fail(
                    input,
                    vec![problem(&sheet, &cell, format!("the solver stopped: {e}"))],
                );
            }
        };
        let mut warnings = parsed.warnings.clone();
        warnings.extend(run.warnings.iter().cloned());
        let check = check::series_check(case, &run);
        let bytes = write::result_workbook(&write::ResultInput {
            case,
            run: &run,
            warnings: &warnings,
            inputs: &parsed.inputs,
            measured: &parsed.measured,
            check: check.as_ref(),
            input_sha256: &sha,
        });
        let result_path = self.output(watch::result_path(input));
        let bytes = match bytes {
            Ok(b) => b,
            // The workbook could not be built from what the input holds: an input problem,
            // answered by an errors workbook rather than a system error with nothing written.
            Err(e) => {
                let text = format!("the result workbook could not be built from this input: {e}");
                return self.fail(input, vec![problem("", "", text)]);
            }
        };
        let written = write::write_atomically(&result_path, &bytes).map_err(|e| e.to_string());
        if let Err(e) = written {
            return (
                Report {
                    status: Status::Failed,
                    drying_time_h: None,
                    detail: format!("could not write {}: {e}", result_path.display()),
                },
                Vec::new(),
            );
        }
        if self.csv {
            let stem = file_stem(input);
            let dir = result_path
                .parent()
                .map(Path::to_path_buf)
                .unwrap_or_default();
            for (name, text) in [
                (format!("{stem}.curves.csv"), write::curves_csv(case, &run)),
                (
                    format!("{stem}.profiles.csv"),
                    write::profiles_csv(case, &run),
                ),
            ] {
                if let Err(e) = write::write_atomically(&dir.join(&name), text.as_bytes()) {
                    return (
                        Report {
                            status: Status::Failed,
                            drying_time_h: None,
                            detail: format!("could not write {name}: {e}"),
                        },
                        Vec::new(),
                    );
                }
            }
        }
        // A stale errors workbook from an earlier failure no longer applies.
        let errors = self.output(watch::errors_path(input));
        if errors.exists() {
            let _ = std::fs::remove_file(&errors);
        }
        let status = match run.status {
            RunStatus::Ok => Status::Solved,
            RunStatus::TargetNotReached => Status::TargetNotReached,
        };
        let hours = run.last().map_or(0.0, |l| l.time / 3600.0);
        (
            Report {
                status,
                drying_time_h: run.drying_time.map(|t| t / 3600.0),
                detail: format!(
                    "{} ({} steps, {:.3} h simulated)",
                    result_path.display(),
                    run.stats.accepted,
                    hours
                ),
            },
            Vec::new(),
        )
    }
}

/// The sheet and cell of the first of `quantities` the input gave (not a default).
fn given_cell(inputs: &[parse::InputRecord], quantities: &[&str]) -> Option<(String, String)> {
    quantities.iter().find_map(|q| {
        let record = inputs.iter().find(|r| r.quantity == *q)?;
        let (sheet, cell) = record.source.split_once('!')?;
        Some((sheet.to_string(), cell.to_string()))
    })
}

fn not_ready(why: &str) -> Report {
    Report {
        status: Status::NotReady,
        drying_time_h: None,
        detail: why.to_string(),
    }
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

impl watch::Processor for Pipeline {
    fn process(&self, input: &Path, attempt: Attempt, cancel: &AtomicBool) -> Report {
        let outcome = self.run_file(input, attempt, cancel);
        for p in &outcome.problems {
            tracing::warn!("{}", problem_line(input, p));
        }
        outcome.report
    }
}
