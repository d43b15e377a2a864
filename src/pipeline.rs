//! One input file from bytes to result: read, parse, solve, write. Shared by `solve`, `batch`
//! and `watch` (through [`watch::Processor`]).

use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use sha2::{Digest, Sha256};

use crate::case::Case;
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
    /// Print one JSON object per finished input on standard output (`batch --json`; `solve`
    /// prints its own).
    pub json_lines: bool,
    /// Threads the variants of a study are solved on, shared by every input this pipeline
    /// runs (the `--jobs` of batch and watch); `None`: rayon's pool, one thread per core.
    pub variant_pool: Option<std::sync::Arc<rayon::ThreadPool>>,
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
    /// The result's summary rows, when a result was written.
    pub summary: Vec<write::SummaryEntry>,
    /// Warnings shown on the result's summary.
    pub warnings: Vec<String>,
    /// Files written for this input.
    pub outputs: Vec<PathBuf>,
    /// The variants of a study, in input order (empty without a `variants` sheet).
    pub variants: Vec<crate::study::run::Outcome>,
}

/// What `--json` prints for one input: one JSON object on one line.
#[derive(Debug, Clone, serde::Serialize)]
pub struct JsonReport {
    /// The input as given.
    pub file: String,
    /// `ok`, `target_not_reached`, `problems`, `not_ready` or `failed`.
    pub status: &'static str,
    /// The summary's keys and values (numbers, text, or null for an empty cell), in the
    /// summary sheet's order.
    pub summary: Ordered,
    /// The summary's units by key, where a key has one.
    pub units: Ordered,
    /// Warnings shown on the result's summary.
    pub warnings: Vec<String>,
    /// Problems found in the input: sheet, cell, problem.
    pub problems: Vec<JsonProblem>,
    /// The variants of a study, as on the result's `variants` sheet (left out without one).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub variants: Vec<JsonVariant>,
    /// Files written: the result workbook (and CSV tables), or the errors workbook.
    pub outputs: Vec<String>,
    /// A short note (the reason for a failure).
    pub detail: String,
}

/// A JSON object whose keys keep the order they were added in.
#[derive(Debug, Clone, Default)]
pub struct Ordered(pub Vec<(String, serde_json::Value)>);

impl serde::Serialize for Ordered {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        let mut map = serializer.serialize_map(Some(self.0.len()))?;
        for (k, v) in &self.0 {
            map.serialize_entry(k, v)?;
        }
        map.end()
    }
}

/// One variant in [`JsonReport`]: the `variants` sheet's columns, null for an empty cell.
#[derive(Debug, Clone, serde::Serialize)]
pub struct JsonVariant {
    /// Its name.
    pub variant: String,
    /// What it replaced, `path=value; ...`.
    pub overrides: String,
    /// `ok`, `target_not_reached`, `input_error` or `solver_error`.
    pub status: &'static str,
    /// When the mean reached the target, h.
    pub drying_time_h: Option<f64>,
    /// Mean moisture at the end, %.
    pub final_mean_moisture_pct: Option<f64>,
    /// Largest surface-centre difference, %.
    pub max_surface_centre_difference_pct: Option<f64>,
    /// Surface temperature at the end, degrees C.
    pub final_surface_temp_c: Option<f64>,
    /// Centre temperature at the end, degrees C.
    pub final_centre_temp_c: Option<f64>,
    /// What kept it from running, each `SHEET!CELL: problem`.
    pub problems: Vec<String>,
}

/// One problem in [`JsonReport`].
#[derive(Debug, Clone, serde::Serialize)]
pub struct JsonProblem {
    /// Sheet name (empty when the problem is with the whole file).
    pub sheet: String,
    /// Cell such as `C4` (empty when it concerns a sheet or the file).
    pub cell: String,
    /// What is wrong.
    pub problem: String,
}

impl FileOutcome {
    /// The `--json` object of this outcome.
    pub fn json(&self, file: &Path) -> JsonReport {
        use serde_json::Value;
        let status = match self.report.status {
            Status::Solved => "ok",
            Status::TargetNotReached => "target_not_reached",
            Status::Problems => "problems",
            Status::NotReady => "not_ready",
            Status::Failed => "failed",
        };
        let mut summary = Ordered::default();
        let mut units = Ordered::default();
        for e in &self.summary {
            let value = match &e.value {
                write::SummaryValue::Text(t) => Value::from(t.as_str()),
                write::SummaryValue::Number(v) if e.style == write::NumberStyle::Count => {
                    Value::from(*v as i64)
                }
                write::SummaryValue::Number(v) => {
                    serde_json::Number::from_f64(*v).map_or(Value::Null, Value::Number)
                }
                write::SummaryValue::Empty => Value::Null,
            };
            summary.0.push((e.key.to_string(), value));
            if !e.unit.is_empty() {
                units.0.push((e.key.to_string(), Value::from(e.unit)));
            }
        }
        JsonReport {
            file: file.display().to_string(),
            status,
            summary,
            units,
            warnings: self.warnings.clone(),
            problems: self
                .problems
                .iter()
                .map(|p| JsonProblem {
                    sheet: p.sheet.clone(),
                    cell: p.cell.clone(),
                    problem: p.problem.clone(),
                })
                .collect(),
            outputs: self
                .outputs
                .iter()
                .map(|p| p.display().to_string())
                .collect(),
            variants: self
                .variants
                .iter()
                .map(|v| JsonVariant {
                    variant: v.name.clone(),
                    overrides: v.overrides.clone(),
                    status: v.status.word(),
                    drying_time_h: v.drying_time_h,
                    final_mean_moisture_pct: v.final_mean_moisture_pct,
                    max_surface_centre_difference_pct: v.max_surface_centre_difference_pct,
                    final_surface_temp_c: v.final_surface_temp_c,
                    final_centre_temp_c: v.final_centre_temp_c,
                    problems: v.problems.iter().map(ToString::to_string).collect(),
                })
                .collect(),
            detail: self.report.detail.clone(),
        }
    }

    /// The `--json` line of this outcome (no trailing newline).
    pub fn json_line(&self, file: &Path) -> String {
        serde_json::to_string(&self.json(file)).unwrap_or_else(|e| {
            format!(
                "{{\"file\":{:?},\"status\":\"failed\",\"detail\":\"could not encode: {e}\"}}",
                file.display().to_string()
            )
        })
    }

    /// The plain line `solve` prints for an input that ran: drying time in hours and days,
    /// final mean moisture, status. `None` when no result was written.
    pub fn plain_line(&self, file: &Path) -> Option<String> {
        let number = |key: &str| {
            self.summary
                .iter()
                .find(|e| e.key == key)
                .and_then(|e| match e.value {
                    write::SummaryValue::Number(v) => Some(v),
                    _ => None,
                })
        };
        let text = |key: &str| {
            self.summary
                .iter()
                .find(|e| e.key == key)
                .and_then(|e| match &e.value {
                    write::SummaryValue::Text(t) => Some(t.clone()),
                    _ => None,
                })
        };
        let status = text("status")?;
        let basis = text("moisture_basis").unwrap_or_default();
        let mean = number("final_mean_moisture_pct")?;
        let final_h = number("final_hours").unwrap_or(0.0);
        let time = match (number("drying_time_h"), number("target_moisture_pct")) {
            (Some(h), _) => format!("drying time {h:.2} h ({:.2} days)", h / 24.0),
            (None, Some(_)) => format!("target not reached in {final_h:.2} h"),
            (None, None) => format!("no target; ran {final_h:.2} h"),
        };
        Some(format!(
            "{}: {time}, final mean {mean:.2} % ({basis} basis), {status}",
            file.display()
        ))
    }
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

    /// The same pipeline for many inputs: a pipeline that reads spreadsheets in one-shot child
    /// processes reads them in children that stay up between files instead
    /// ([`Isolation::Pooled`]), with the same limits per file.
    pub fn reading_many(self) -> Pipeline {
        let isolation = match self.isolation {
            Isolation::Child { .. } => Isolation::pooled_this_program(),
            other => other,
        };
        Pipeline { isolation, ..self }
    }

    /// The same pipeline with the variants of studies solved on `jobs` threads (0: one per
    /// core), shared by all its inputs. Falls back to rayon's own pool if no pool can be made.
    pub fn with_jobs(self, jobs: usize) -> Pipeline {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(watch::worker_count(jobs))
            .thread_name(|i| format!("dampfront-variant-{i}"))
            .build()
            .ok()
            .map(std::sync::Arc::new);
        Pipeline {
            variant_pool: pool,
            ..self
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
        let mut written = Written::default();
        let (report, problems) = self.run_inner(input, attempt, cancel, &mut written);
        if report.status == Status::Problems {
            // A study whose base ran has its result as well as the errors of its bad variants.
            written.outputs.push(self.output(watch::errors_path(input)));
        }
        FileOutcome {
            report,
            problems,
            seconds: started.elapsed().as_secs_f64(),
            summary: written.summary,
            warnings: written.warnings,
            outputs: written.outputs,
            variants: written.variants,
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
        written: &mut Written,
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
        // The mesh is graded for the earliest time the result shows, measured points included.
        let measured_times: Vec<f64> = parsed.measured_si().iter().map(|m| m.time).collect();
        let problem_data = Problem::with_measured_times(case, &measured_times);
        let target_warning = target_warning(case, &problem_data);
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
        warnings.extend(target_warning);
        warnings.extend(run.warnings.iter().cloned());
        let check = check::series_check(case, &run);
        let budget = crate::fit::Budget {
            cancel: Some(cancel),
            deadline,
        };
        let fit_report = parsed.fit_report(&run, budget);
        warnings.extend(measured_after_end(&parsed.measured, &run));
        let study = self.study(&book, input, &run, case, &warnings, cancel);
        if let Some(s) = &study {
            warnings.extend(s.problems.iter().map(ToString::to_string));
            warnings.extend(s.warnings.iter().cloned());
        }
        let variants = study
            .as_ref()
            .map(|s| crate::workbook::write_variants::Variants {
                outcomes: &s.outcomes,
                base_curve: &s.base_curve,
                basis: write::basis_word(case),
            });
        let bytes = write::result_workbook_with(
            &write::ResultInput {
                case,
                run: &run,
                warnings: &warnings,
                inputs: &parsed.inputs,
                measured: &parsed.measured,
                fit: fit_report.as_ref(),
                check: check.as_ref(),
                input_sha256: &sha,
            },
            variants.as_ref(),
        );
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
        let written_ok = write::write_atomically(&result_path, &bytes).map_err(|e| e.to_string());
        if let Err(e) = written_ok {
            return (
                Report {
                    status: Status::Failed,
                    drying_time_h: None,
                    detail: format!("could not write {}: {e}", result_path.display()),
                },
                Vec::new(),
            );
        }
        written.outputs.push(result_path.clone());
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
                let path = dir.join(&name);
                if let Err(e) = write::write_atomically(&path, text.as_bytes()) {
                    return (
                        Report {
                            status: Status::Failed,
                            drying_time_h: None,
                            detail: format!("could not write {name}: {e}"),
                        },
                        Vec::new(),
                    );
                }
                written.outputs.push(path);
            }
        }
        written.summary = write::summary_entries(case, &run, &sha);
        let study = study.map(|mut s| {
            written.variants = std::mem::take(&mut s.outcomes);
            s
        });
        written.warnings = warnings;
        // Variants that could not run: their problems in an errors workbook beside the result,
        // and exit code 1, while every variant that ran is in the result.
        if let Some(s) = study.filter(|s| !s.problems.is_empty()) {
            let (mut report, problems) = self.fail(input, s.problems);
            if report.status == Status::Problems {
                report.detail = format!(
                    "{} with the variants that ran; {} variant(s) could not run: {}",
                    result_path.display(),
                    s.failed,
                    report.detail
                );
                // The base case did run: its drying time belongs in the run's table.
                report.drying_time_h = run.drying_time.map(|t| t / 3600.0);
            }
            return (report, problems);
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

/// A warning when the target lies beyond every equilibrium the schedule's air can bring the
/// body to (below the lowest for a drying run, above the highest for a wetting one): the mean
/// only approaches that equilibrium, so the run would end with `target_not_reached`.
pub fn target_warning(case: &Case, p: &Problem) -> Option<String> {
    let target = p.target?;
    let initial = p.mean(&p.initial);
    let equilibria: Vec<(f64, &str)> = p
        .steps
        .iter()
        .filter_map(|s| {
            p.equilibrium_mean(s, s.to)
                .filter(|x| x.is_finite())
                .map(|x| (x, s.label.as_str()))
        })
        .collect();
    let pct = |x: f64| case.basis.from_dry_fraction(x);
    let margin = 1e-9 * target.abs().max(1e-6);
    let (beyond, which) = if target < initial {
        let lowest = equilibria.iter().min_by(|a, b| a.0.total_cmp(&b.0))?;
        (target < lowest.0 - margin, ("lowest", lowest))
    } else if target > initial {
        let highest = equilibria.iter().max_by(|a, b| a.0.total_cmp(&b.0))?;
        (target > highest.0 + margin, ("highest", highest))
    } else {
        return None;
    };
    let (word, (eq, label)) = which;
    beyond.then(|| {
        format!(
            "target_moisture_pct {:.2} % lies beyond the {word} equilibrium the schedule's air can \
             bring the body to, {:.2} % (step {label}): the mean only approaches it, so the \
             target cannot be reached",
            pct(target),
            pct(*eq)
        )
    })
}

/// A study's variants as solved beside the base case.
struct Solved {
    outcomes: Vec<crate::study::run::Outcome>,
    base_curve: Vec<(f64, f64)>,
    /// Problems of the variants that could not run, at their variants cells.
    problems: Vec<InputProblem>,
    /// How many variants could not run.
    failed: usize,
    /// Warnings of the variants that the base case does not have, each `variants!CELL: variant
    /// NAME: ...`, and names used twice.
    warnings: Vec<String>,
}

impl Pipeline {
    /// Solves the variants of the book's `variants` sheet, if it has one.
    fn study(
        &self,
        book: &crate::workbook::raw::RawBook,
        input: &Path,
        run: &solver::RunResult,
        case: &Case,
        base_warnings: &[String],
        cancel: &AtomicBool,
    ) -> Option<Solved> {
        use crate::study::{self, Status as V};
        let s = study::read(book)?;
        let budget = study::run::Budget {
            cancel: Some(cancel),
            case_seconds: self.case_seconds,
        };
        let outcomes = study::run::solve_all(
            book,
            &s,
            &file_stem(input),
            budget,
            self.variant_pool.as_deref(),
        );
        let bad: Vec<&study::run::Outcome> = outcomes
            .iter()
            .filter(|o| matches!(o.status, V::InputError | V::SolverError))
            .collect();
        let problems = bad
            .iter()
            .flat_map(|o| o.problems.iter().cloned())
            .collect();
        let failed = bad.len();
        let warnings = variant_warnings(&s, &outcomes, base_warnings);
        let base_curve = study::run::thin(
            study::run::mean_curve(case, run),
            crate::limits::MAX_VARIANT_CURVE_POINTS,
        );
        Some(Solved {
            outcomes,
            base_curve,
            problems,
            failed,
            warnings,
        })
    }
}

/// A warning when measured points lie after the run's end: the comparison leaves them out.
fn measured_after_end(
    measured: &[crate::workbook::parse::Measured],
    run: &solver::RunResult,
) -> Option<String> {
    let end_h = run.last()?.time / 3600.0;
    let after: Vec<f64> = measured
        .iter()
        .map(|m| m.hours)
        .filter(|&h| h > end_h * (1.0 + 1e-9))
        .collect();
    let last = after.iter().copied().fold(f64::NAN, f64::max);
    (!after.is_empty()).then(|| {
        format!(
            "measured: {} point(s) lie after the run's end at {} h (the last at {} h); the \
             model-against-measured rows and their goodness of fit leave them out, while a \
             parameter estimation runs the model on to them. Raise end_hours to compare them all",
            after.len(),
            crate::text::compact(end_h),
            crate::text::compact(last)
        )
    })
}

/// The variants' own warnings (those the base case does not give too), at each variant's cell,
/// and a warning for a variant name used twice (the table and chart could not tell them apart).
fn variant_warnings(
    study: &crate::study::Study,
    outcomes: &[crate::study::run::Outcome],
    base_warnings: &[String],
) -> Vec<String> {
    let mut out: Vec<String> = study
        .unused_columns
        .iter()
        .map(|(cell, path)| {
            format!(
                "{}!{cell}: no variant gives a value under {path}; the column changed nothing",
                study.sheet
            )
        })
        .collect();
    let mut seen: Vec<&str> = Vec::new();
    for (v, o) in study.variants.iter().zip(outcomes) {
        let at = format!("{}!{}", study.sheet, v.cell);
        if seen.contains(&v.name.as_str()) {
            out.push(format!(
                "{at}: the variant name \"{}\" is used twice; the variants table and chart \
                 cannot tell the two apart",
                v.name
            ));
        }
        seen.push(&v.name);
        for w in o.warnings.iter().filter(|w| !base_warnings.contains(w)) {
            out.push(format!("{at}: variant {}: {w}", v.name));
        }
    }
    out
}

/// What a run wrote, for the command line's answer.
#[derive(Debug, Default)]
struct Written {
    variants: Vec<crate::study::run::Outcome>,
    summary: Vec<write::SummaryEntry>,
    warnings: Vec<String>,
    outputs: Vec<PathBuf>,
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
        if self.json_lines && outcome.report.status != Status::NotReady {
            print_line(&outcome.json_line(input));
        }
        outcome.report
    }
}

/// Prints one line on standard output at once (lines of parallel runs never interleave); a
/// closed pipe is not an error.
pub fn print_line(line: &str) {
    use std::io::Write as _;
    let mut out = std::io::stdout().lock();
    let _ = writeln!(out, "{line}").and_then(|()| out.flush());
}
