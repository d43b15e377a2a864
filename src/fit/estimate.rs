//! Parameter estimation on the full engine: the parameters a user lists are varied, the case is
//! solved for each trial, and the model's mean moisture at the measured times is brought as
//! close to the measured one as least squares allows.
//!
//! The method is the damped Gauss-Newton of Levenberg and Marquardt (K. Levenberg, Q. Appl.
//! Math. 2 (1944) 164; D.W. Marquardt, J. SIAM 11 (1963) 431; from memory) with the damping
//! scaled by the diagonal of JᵀJ. Positive parameters (`d_ref`, `surface_coef`, `hm`) are
//! varied on a log scale, so that no trial is negative and a step is a factor; the others
//! (`activation_energy`, `moisture_coef`) linearly. Every parameter stays within bounds wide
//! around published values (trials outside are projected back onto them).
//!
//! The Jacobian is taken by forward differences of whole engine runs, with the engine's
//! tolerance tightened (see [`FIT_TOLERANCE`]) so that the differences are well above the
//! solver's own error; the runs of one Jacobian are independent and go in parallel (rayon).
//!
//! Approximate 95 % intervals come from the linearised covariance s² (JᵀJ)⁻¹ with
//! s² = SS / (N - P), on the scale the parameter is varied on, times Student's t quantile for
//! N - P degrees of freedom (not 1.96); on the log scale the interval is therefore a factor
//! either side. The correlation matrix follows from the same covariance.
//!
//! `surface_coef` and `hm` are schedule columns: one factor, shared by every step that gives
//! that column, scales them all; the estimate reported is the first such step's value.
//!
//! Points at time 0 carry no information on any parameter (the initial state is given), so
//! they are left out of the estimation.

use std::sync::atomic::AtomicBool;
use std::time::Instant;

use ndarray::{Array1, Array2};
use rayon::prelude::*;

use crate::case::{Case, Exchange, Measured};
use crate::solver::{Problem, RunControl, SolveError, run};

/// Tolerance of the engine's time stepper during estimation (or the case's own, if tighter).
pub const FIT_TOLERANCE: f64 = 1e-7;

/// Most Levenberg-Marquardt iterations.
const MAX_ITERATIONS: usize = 60;

/// A parameter the `fit` sheet may ask for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Parameter {
    /// The material's reference diffusivity (at its own `d_ref_temp_c` and moisture), m²/s.
    DRef,
    /// The material's activation energy, kJ/mol.
    ActivationEnergy,
    /// The material's moisture coefficient b, per unit dry-basis fraction.
    MoistureCoef,
    /// The content-based surface coefficient of the schedule, m/s (one factor for all steps).
    SurfaceCoef,
    /// The air-side mass transfer coefficient of the schedule, m/s (one factor for all steps).
    AirSideCoef,
}

impl Parameter {
    /// Every parameter, in the order of the format page.
    pub const ALL: [Parameter; 5] = [
        Parameter::DRef,
        Parameter::ActivationEnergy,
        Parameter::MoistureCoef,
        Parameter::SurfaceCoef,
        Parameter::AirSideCoef,
    ];

    /// The word the `fit` sheet's `parameters` list uses.
    pub fn key(self) -> &'static str {
        match self {
            Parameter::DRef => "d_ref",
            Parameter::ActivationEnergy => "activation_energy",
            Parameter::MoistureCoef => "moisture_coef",
            Parameter::SurfaceCoef => "surface_coef",
            Parameter::AirSideCoef => "hm",
        }
    }

    /// The parameter a `parameters` word names (case-insensitive, trimmed); a column name is
    /// accepted too.
    pub fn from_key(word: &str) -> Option<Parameter> {
        let w = word.trim().to_ascii_lowercase();
        Parameter::ALL
            .into_iter()
            .find(|p| p.key() == w || p.column() == w)
    }

    /// The `materials` or `schedule` column it sits in, which names its row on the result.
    pub fn column(self) -> &'static str {
        match self {
            Parameter::DRef => "d_ref_m2_s",
            Parameter::ActivationEnergy => "activation_energy_kj_mol",
            Parameter::MoistureCoef => "moisture_coef",
            Parameter::SurfaceCoef => "surface_coef_m_s",
            Parameter::AirSideCoef => "hm_m_s",
        }
    }

    /// Unit of the estimate as reported.
    pub fn unit(self) -> &'static str {
        match self {
            Parameter::DRef => "m²/s",
            Parameter::ActivationEnergy => "kJ/mol",
            Parameter::MoistureCoef => "per unit dry-basis fraction",
            Parameter::SurfaceCoef | Parameter::AirSideCoef => "m/s",
        }
    }

    /// Varied on a log scale (positive parameters).
    fn log_scale(self) -> bool {
        matches!(
            self,
            Parameter::DRef | Parameter::SurfaceCoef | Parameter::AirSideCoef
        )
    }

    /// Bounds in reported units, wide around published values for foods, wood, clays and
    /// polymers (common practice: D from 1e-14 to 1e-6 m²/s, Ea up to a few hundred kJ/mol).
    fn bounds(self) -> (f64, f64) {
        match self {
            Parameter::DRef => (1e-16, 1e-5),
            Parameter::ActivationEnergy => (0.0, 300.0),
            Parameter::MoistureCoef => (-50.0, 50.0),
            Parameter::SurfaceCoef => (1e-13, 1.0),
            Parameter::AirSideCoef => (1e-7, 10.0),
        }
    }

    /// Forward-difference step on the varied scale.
    fn step(self, theta: f64) -> f64 {
        match self {
            // A relative change of 1e-3 in the value.
            Parameter::DRef | Parameter::SurfaceCoef | Parameter::AirSideCoef => 1e-3,
            Parameter::ActivationEnergy => 1e-3 * theta.abs().max(10.0),
            Parameter::MoistureCoef => 1e-3 * theta.abs().max(1.0),
        }
    }

    fn to_theta(self, value: f64) -> f64 {
        if self.log_scale() { value.ln() } else { value }
    }

    fn value_of(self, theta: f64) -> f64 {
        if self.log_scale() { theta.exp() } else { theta }
    }

    fn theta_bounds(self) -> (f64, f64) {
        let (lo, hi) = self.bounds();
        (self.to_theta(lo), self.to_theta(hi))
    }

    /// The schedule exchange this parameter scales, if it is a schedule column.
    fn exchange_value(self, e: &Exchange) -> Option<f64> {
        match (self, e) {
            (Parameter::SurfaceCoef, Exchange::SurfaceCoefficient(v))
            | (Parameter::AirSideCoef, Exchange::AirSide(v)) => Some(*v),
            _ => None,
        }
    }

    /// The value in `case` in reported units; for a schedule column, the first step's that
    /// gives it. `None` when the case has no such value.
    pub fn value_in(self, case: &Case, material: usize) -> Option<f64> {
        let d = case.materials.get(material).map(|m| m.diffusivity);
        match self {
            Parameter::DRef => d.map(|d| d.d_ref),
            Parameter::ActivationEnergy => d.map(|d| d.activation_energy_j_mol / 1000.0),
            Parameter::MoistureCoef => d.map(|d| d.moisture_coef),
            Parameter::SurfaceCoef | Parameter::AirSideCoef => case
                .schedule
                .iter()
                .find_map(|s| self.exchange_value(&s.exchange)),
        }
    }

    /// Sets the value (reported units) in `case`, where `base` is the value it had: a schedule
    /// column is scaled by value / base in every step that gives it.
    fn set(self, case: &mut Case, material: usize, value: f64, base: f64) {
        if let Some(m) = case.materials.get_mut(material) {
            match self {
                Parameter::DRef => m.diffusivity.d_ref = value,
                Parameter::ActivationEnergy => {
                    m.diffusivity.activation_energy_j_mol = value * 1000.0;
                }
                Parameter::MoistureCoef => m.diffusivity.moisture_coef = value,
                _ => {}
            }
        }
        let factor = value / base;
        for s in &mut case.schedule {
            match (self, &mut s.exchange) {
                (Parameter::SurfaceCoef, Exchange::SurfaceCoefficient(v))
                | (Parameter::AirSideCoef, Exchange::AirSide(v)) => *v *= factor,
                _ => {}
            }
        }
    }
}

/// What to estimate: the parameters, and the material whose diffusivity they belong to.
#[derive(Debug, Clone, PartialEq)]
pub struct FitRequest {
    /// Parameters in the order given, without repeats.
    pub parameters: Vec<Parameter>,
    /// Index into the case's materials.
    pub material: usize,
}

/// Limits on the engine runs of an estimation: the same cancel flag and deadline as the run.
#[derive(Debug, Clone, Copy, Default)]
pub struct Budget<'a> {
    /// Stop when set.
    pub cancel: Option<&'a AtomicBool>,
    /// Stop once this instant has passed (the budget, s).
    pub deadline: Option<(Instant, f64)>,
}

/// One parameter's result.
#[derive(Debug, Clone, PartialEq)]
pub struct EstimatedParameter {
    /// Which parameter.
    pub parameter: Parameter,
    /// Its value in the input, reported units.
    pub input: Option<f64>,
    /// The estimate; `None` when it was not estimated (see the messages).
    pub estimate: Option<f64>,
    /// Lower end of the approximate 95 % interval.
    pub low_95: Option<f64>,
    /// Upper end of the approximate 95 % interval.
    pub high_95: Option<f64>,
}

/// The outcome of an estimation.
#[derive(Debug, Clone, PartialEq)]
pub struct Estimation {
    /// One entry per requested parameter, in the order asked.
    pub parameters: Vec<EstimatedParameter>,
    /// Correlation matrix of the estimated parameters (those with an estimate, in order);
    /// `None` when it could not be formed.
    pub correlation: Option<Array2<f64>>,
    /// Plain-words findings: what could not be estimated and why, what is poorly determined.
    pub messages: Vec<String>,
    /// Measured points used (time > 0).
    pub points: usize,
    /// Levenberg-Marquardt iterations taken.
    pub iterations: usize,
    /// Engine runs made.
    pub runs: usize,
    /// Student's t quantile (0.975, N - P degrees of freedom) used for the intervals.
    pub t_quantile: Option<f64>,
    /// Residual standard deviation s = sqrt(SS / (N - P)), dry-basis fraction.
    pub residual_sd: Option<f64>,
    /// The model's mean moisture (dry fraction) with the estimates, at each measured point
    /// in the order given (time-0 points included); `None` where it was not computed.
    pub fitted: Option<Vec<f64>>,
    /// The iteration stopped because the sum of squares no longer fell, not for a limit.
    pub converged: bool,
}

impl Estimation {
    fn failed(request: &FitRequest, case: &Case, messages: Vec<String>, points: usize) -> Self {
        Estimation {
            parameters: request
                .parameters
                .iter()
                .map(|&p| EstimatedParameter {
                    parameter: p,
                    input: p.value_in(case, request.material),
                    estimate: None,
                    low_95: None,
                    high_95: None,
                })
                .collect(),
            correlation: None,
            messages,
            points,
            iterations: 0,
            runs: 0,
            t_quantile: None,
            residual_sd: None,
            fitted: None,
            converged: false,
        }
    }
}

/// Why an engine run of the estimation gave no values.
#[derive(Debug, Clone)]
enum Failure {
    /// Cancelled or out of time: the estimation stops.
    Stopped(String),
    /// This trial cannot be run (not valid, or the solver failed).
    Trial(String),
}

impl std::fmt::Display for Failure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Failure::Stopped(s) | Failure::Trial(s) => f.write_str(s),
        }
    }
}

/// The engine as a function of the varied parameters: the mean moisture at the measured times.
struct Forward<'a> {
    base: Case,
    material: usize,
    params: Vec<Parameter>,
    base_values: Vec<f64>,
    /// Distinct measured times, sorted.
    times: Vec<f64>,
    budget: Budget<'a>,
}

impl Forward<'_> {
    fn case_at(&self, theta: &[f64]) -> Case {
        let mut case = self.base.clone();
        for ((p, &t), &b) in self.params.iter().zip(theta).zip(&self.base_values) {
            p.set(&mut case, self.material, p.value_of(t), b);
        }
        case
    }

    /// Mean moisture (dry fraction) at each of `self.times`, or why not.
    fn means(&self, theta: &[f64]) -> Result<Vec<f64>, Failure> {
        let valid = self.case_at(theta).validated().map_err(|problems| {
            let first = problems.first().map(|p| p.to_string()).unwrap_or_default();
            Failure::Trial(format!("a trial case was not valid ({first})"))
        })?;
        let problem = Problem::new(&valid);
        let control = RunControl {
            cancel: self.budget.cancel,
            progress: None,
            deadline: self.budget.deadline,
        };
        let result = run(&problem, &control).map_err(|e| match e {
            SolveError::Cancelled { .. } | SolveError::OutOfTime { .. } => {
                Failure::Stopped(e.to_string())
            }
            other => Failure::Trial(other.to_string()),
        })?;
        self.times
            .iter()
            .map(|&t| {
                result
                    .profiles
                    .iter()
                    .find(|pr| (pr.time - t).abs() <= 1e-9 * t.max(1.0))
                    .and_then(|pr| pr.moisture.as_ref())
                    .map(|x| problem.mean(x))
                    .filter(|m| m.is_finite())
                    .ok_or_else(|| {
                        Failure::Trial(format!("the run did not reach {:.4} h", t / 3600.0))
                    })
            })
            .collect()
    }
}

/// Estimates `request.parameters` of `case` from `measured` by Levenberg-Marquardt on the
/// engine; never panics, and says in plain words what could not be done.
pub fn estimate(
    case: &Case,
    measured: &[Measured],
    request: &FitRequest,
    budget: Budget<'_>,
) -> Estimation {
    let points: Vec<&Measured> = measured
        .iter()
        .filter(|m| m.time > 0.0 && m.time.is_finite() && m.moisture.is_finite())
        .collect();
    let n = points.len();
    let fail = |messages: Vec<String>| Estimation::failed(request, case, messages, n);
    if request.parameters.is_empty() {
        return fail(Vec::new());
    }
    if request.material >= case.materials.len() {
        return fail(vec![String::from(
            "the material to fit is not among the case's materials; nothing was estimated",
        )]);
    }

    // Parameters that cannot be varied at all are reported and left out.
    let mut messages = Vec::new();
    let mut params = Vec::new();
    let mut base_values = Vec::new();
    for &p in &request.parameters {
        match p.value_in(case, request.material) {
            Some(v) if !(p.log_scale() && v <= 0.0) => {
                params.push(p);
                base_values.push(v);
            }
            Some(_) => messages.push(format!(
                "{} is not positive in the input, so it cannot be varied as a factor; it was \
                 not estimated",
                p.key()
            )),
            None => messages.push(format!(
                "no schedule step gives {}, so {} has nothing to act on; it was not estimated",
                p.column(),
                p.key()
            )),
        }
    }
    let p_count = params.len();
    if p_count == 0 {
        return fail(messages);
    }
    if n <= p_count {
        messages.push(format!(
            "only {n} measured point{} after time 0 for {p_count} parameter{}: at least {} are \
             needed to estimate anything; nothing was estimated",
            if n == 1 { "" } else { "s" },
            if p_count == 1 { "" } else { "s" },
            p_count + 1
        ));
        return fail(messages);
    }
    let y: Vec<f64> = points.iter().map(|m| m.moisture).collect();
    let (lo, hi) = y
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    if hi - lo <= 1e-12 * hi.abs().max(1e-12) {
        messages.push(String::from(
            "the measured moisture is the same at every point: the data hold no drying curve \
             to fit; nothing was estimated",
        ));
        return fail(messages);
    }
    let mut times: Vec<f64> = points.iter().map(|m| m.time).collect();
    times.sort_by(f64::total_cmp);
    times.dedup();
    if times.len() > crate::limits::MAX_PROFILE_TIMES {
        messages.push(format!(
            "{} distinct measured times is more than the {} an estimation can follow; nothing \
             was estimated",
            times.len(),
            crate::limits::MAX_PROFILE_TIMES
        ));
        return fail(messages);
    }

    let mut base = case.clone();
    base.tolerance = base.tolerance.min(FIT_TOLERANCE);
    base.target_moisture = None;
    let last = times.last().copied().unwrap_or(0.0);
    base.end_time = last.max(3.6);
    base.output_every = Some(base.end_time);
    base.profile_times = Some(times.clone());
    let forward = Forward {
        base,
        material: request.material,
        params: params.clone(),
        base_values: base_values.clone(),
        times: times.clone(),
        budget,
    };
    // Index of each point's time in `times`.
    let index: Vec<usize> = points
        .iter()
        .map(|m| times.partition_point(|&t| t < m.time).min(times.len() - 1))
        .collect();
    let model_at = |means: &[f64]| -> Vec<f64> { index.iter().map(|&i| means[i]).collect() };
    let ss = |f: &[f64]| -> f64 { y.iter().zip(f).map(|(a, b)| (a - b) * (a - b)).sum() };

    let bounds: Vec<(f64, f64)> = params.iter().map(|p| p.theta_bounds()).collect();
    let clamp = |theta: &mut [f64]| {
        for (t, &(lo, hi)) in theta.iter_mut().zip(&bounds) {
            *t = t.clamp(lo, hi);
        }
    };
    let mut theta: Vec<f64> = params
        .iter()
        .zip(&base_values)
        .map(|(p, &v)| p.to_theta(v))
        .collect();
    clamp(&mut theta);

    let mut runs = 0usize;
    let f0 = match forward.means(&theta) {
        Ok(m) => model_at(&m),
        Err(e) => {
            messages.push(format!(
                "the model could not be run with the input's parameters ({e}); nothing was \
                 estimated"
            ));
            return fail(messages);
        }
    };
    runs += 1;
    let mut f = f0;
    let mut s = ss(&f);
    // Differences smaller than this are the engine's own error, not an influence.
    let noise = 10.0 * forward.base.tolerance * hi.abs().max(lo.abs());

    let jacobian = |theta: &[f64], f: &[f64]| -> Result<(Array2<f64>, Vec<bool>), Failure> {
        let columns: Vec<Result<(Vec<f64>, bool), Failure>> = (0..p_count)
            .into_par_iter()
            .map(|j| {
                let h0 = params[j].step(theta[j]);
                // Step inwards at an upper bound.
                let h = if theta[j] + h0 > bounds[j].1 { -h0 } else { h0 };
                let mut shifted = theta.to_vec();
                shifted[j] += h;
                let g = model_at(&forward.means(&shifted)?);
                let biggest = g
                    .iter()
                    .zip(f)
                    .map(|(a, b)| (a - b).abs())
                    .fold(0.0, f64::max);
                let column = g.iter().zip(f).map(|(a, b)| (a - b) / h).collect();
                Ok((column, biggest > noise))
            })
            .collect();
        let mut jac = Array2::zeros((f.len(), p_count));
        let mut influence = vec![false; p_count];
        for (j, c) in columns.into_iter().enumerate() {
            let (column, has) = c?;
            for (i, v) in column.into_iter().enumerate() {
                jac[[i, j]] = v;
            }
            influence[j] = has;
        }
        Ok((jac, influence))
    };

    let (mut jac, influence) = match jacobian(&theta, &f) {
        Ok(j) => j,
        Err(e) => {
            messages.push(format!(
                "the model could not be run near the input's parameters ({e}); nothing was \
                 estimated"
            ));
            return fail(messages);
        }
    };
    runs += p_count;
    // A parameter with no influence on the curve cannot be estimated: hold it at its input.
    let active: Vec<usize> = (0..p_count).filter(|&j| influence[j]).collect();
    for j in (0..p_count).filter(|&j| !influence[j]) {
        let key = params[j].key();
        let why = if key.starts_with("activation_energy") {
            "the temperature stays at the material's reference temperature, so the activation \
             energy changes nothing"
                .to_string()
        } else {
            format!(
                "at its starting value the model may already be dry, or not yet drying, at every \
                 measured time; type a starting {key} nearer to what the data suggest (the slope \
                 method's diffusivity on this sheet is a guide) and run again"
            )
        };
        messages.push(format!(
            "{key} has no influence on the model's mean moisture at the measured times ({why}): \
             it cannot be estimated from this start and was held at its input value"
        ));
    }
    let mut result = Estimation::failed(request, case, Vec::new(), n);
    if active.is_empty() {
        result.messages = messages;
        result.runs = runs;
        return result;
    }
    if n <= active.len() {
        messages.push(format!(
            "only {n} measured points for {} parameters with an influence; nothing was \
             estimated",
            active.len()
        ));
        result.messages = messages;
        result.runs = runs;
        return result;
    }
    let sub = |jac: &Array2<f64>| -> Array2<f64> {
        Array2::from_shape_fn((jac.nrows(), active.len()), |(i, k)| jac[[i, active[k]]])
    };

    let mut lambda = 1e-3;
    let mut iterations = 0;
    let mut converged = false;
    let mut stopped: Option<String> = None;
    let mut j_active = sub(&jac);
    while iterations < MAX_ITERATIONS {
        iterations += 1;
        let r = Array1::from_iter(y.iter().zip(&f).map(|(a, b)| a - b));
        let a = j_active.t().dot(&j_active);
        let g = j_active.t().dot(&r);
        let mut accepted = false;
        let mut tiny_step = false;
        for _ in 0..12 {
            let mut damped = a.clone();
            for k in 0..active.len() {
                damped[[k, k]] += lambda * a[[k, k]].max(1e-300);
            }
            let Some(delta) = solve(&damped, &g) else {
                lambda *= 10.0;
                continue;
            };
            let mut trial = theta.clone();
            for (k, &j) in active.iter().enumerate() {
                // At most a factor e per step on the log scale, a tenth of the range otherwise.
                let limit = if params[j].log_scale() {
                    1.0
                } else {
                    0.1 * (bounds[j].1 - bounds[j].0)
                };
                trial[j] += delta[k].clamp(-limit, limit);
            }
            clamp(&mut trial);
            let moved = active
                .iter()
                .map(|&j| (trial[j] - theta[j]).abs() / params[j].step(theta[j]))
                .fold(0.0, f64::max);
            if moved < 1e-4 {
                tiny_step = true;
                break;
            }
            runs += 1;
            match forward.means(&trial) {
                Ok(m) => {
                    let ft = model_at(&m);
                    let st = ss(&ft);
                    if st < s {
                        let small_gain = s - st <= 1e-10 * s;
                        theta = trial;
                        f = ft;
                        s = st;
                        lambda = (lambda / 3.0).max(1e-9);
                        accepted = true;
                        tiny_step = small_gain;
                        break;
                    }
                    lambda *= 4.0;
                }
                Err(Failure::Stopped(e)) => {
                    stopped = Some(e);
                    break;
                }
                // A trial the engine cannot run counts as a worse one.
                Err(_) => lambda *= 4.0,
            }
        }
        if stopped.is_some() {
            break;
        }
        if !accepted || tiny_step {
            converged = true;
            break;
        }
        match jacobian(&theta, &f) {
            Ok((j, _)) => {
                jac = j;
                j_active = sub(&jac);
                runs += p_count;
            }
            Err(e) => {
                stopped = Some(e.to_string());
                break;
            }
        }
    }
    if let Some(e) = stopped {
        messages.push(format!(
            "the estimation stopped before it converged ({e}); the values below are the best \
             found so far"
        ));
    } else if !converged {
        messages.push(format!(
            "the estimation did not settle within {MAX_ITERATIONS} iterations; the values \
             below are the best found so far"
        ));
    }

    // Statistics at the estimate.
    let m = active.len();
    let dof = n - m;
    let s2 = s / dof as f64;
    let t_q = t_quantile_975(dof);
    let a = j_active.t().dot(&j_active);
    let scale: Vec<f64> = (0..m).map(|k| a[[k, k]].sqrt()).collect();
    let unit = Array2::from_shape_fn((m, m), |(i, k)| a[[i, k]] / (scale[i] * scale[k]));
    let inverse = invert_spd(&unit);
    if inverse.is_none() {
        messages.push(String::from(
            "the parameters' effects on the curve are nearly the same (JᵀJ is close to \
             singular): the data cannot separate them, so no interval or correlation is given; \
             estimate fewer parameters or add data that tell them apart",
        ));
    }
    let covariance = inverse.map(|inv| {
        Array2::from_shape_fn((m, m), |(i, k)| s2 * inv[[i, k]] / (scale[i] * scale[k]))
    });
    let correlation = covariance.as_ref().map(|c| {
        Array2::from_shape_fn((m, m), |(i, k)| {
            let v = c[[i, k]] / (c[[i, i]] * c[[k, k]]).sqrt();
            if v.is_finite() {
                v.clamp(-1.0, 1.0)
            } else {
                0.0
            }
        })
    });
    for (k, &j) in active.iter().enumerate() {
        let p = params[j];
        let Some(entry) = result.parameters.iter_mut().find(|e| e.parameter == p) else {
            continue;
        };
        let est = p.value_of(theta[j]);
        entry.estimate = est.is_finite().then_some(est);
        let (lo_b, hi_b) = bounds[j];
        if theta[j] <= lo_b || theta[j] >= hi_b {
            messages.push(format!(
                "{} ran into the edge of the range this program allows ({} to {} {}): the \
                 data push it further, so the model may not describe them",
                p.key(),
                p.bounds().0,
                p.bounds().1,
                p.unit()
            ));
        }
        if let Some(c) = &covariance {
            let se = c[[k, k]].sqrt();
            if se.is_finite() {
                let (lo, hi) = (
                    p.value_of(theta[j] - t_q * se),
                    p.value_of(theta[j] + t_q * se),
                );
                if lo.is_finite() && hi.is_finite() {
                    entry.low_95 = Some(lo);
                    entry.high_95 = Some(hi);
                }
                let wide = if p.log_scale() {
                    hi / lo > 100.0
                } else {
                    hi - lo > 2.0 * est.abs().max(1e-300)
                };
                if wide {
                    messages.push(format!(
                        "the 95 % interval of {} is very wide ({}): the data hardly determine it",
                        p.key(),
                        if p.log_scale() {
                            format!("a factor of {:.3e} from end to end", hi / lo)
                        } else {
                            String::from("wider than the estimate itself")
                        }
                    ));
                }
            }
        }
    }
    if let Some(r) = &correlation {
        for i in 0..m {
            for k in i + 1..m {
                if r[[i, k]].abs() > 0.99 {
                    messages.push(format!(
                        "{} and {} are almost perfectly correlated (r = {:.4}): the data cannot \
                         tell them apart; fix one of them or add data that separate them (for \
                         example measurements at another temperature or thickness)",
                        params[active[i]].key(),
                        params[active[k]].key(),
                        r[[i, k]]
                    ));
                }
            }
        }
    }
    // The fitted model at every point, time 0 included (the initial mean there).
    let fitted_all = forward.means(&theta).ok().map(|means| {
        let initial = {
            let valid = forward.case_at(&theta).validated().ok();
            valid.map(|v| {
                let p = Problem::new(&v);
                p.mean(&p.initial)
            })
        };
        measured
            .iter()
            .map(|mp| {
                if mp.time > 0.0 {
                    let i = times.partition_point(|&t| t < mp.time).min(times.len() - 1);
                    means[i]
                } else {
                    initial.unwrap_or(f64::NAN)
                }
            })
            .collect::<Vec<f64>>()
    });
    runs += 1;
    result.correlation = correlation;
    result.messages = messages;
    result.iterations = iterations;
    result.runs = runs;
    result.t_quantile = Some(t_q);
    result.residual_sd = Some(s2.sqrt()).filter(|v| v.is_finite());
    result.fitted = fitted_all.filter(|v| v.iter().all(|x| x.is_finite()));
    result.converged = converged;
    result
}

/// Solves `a x = b` by Gaussian elimination with partial pivoting; `None` when singular.
fn solve(a: &Array2<f64>, b: &Array1<f64>) -> Option<Array1<f64>> {
    let n = b.len();
    let mut m = a.clone();
    let mut x = b.clone();
    for col in 0..n {
        let pivot = (col..n).max_by(|&i, &j| m[[i, col]].abs().total_cmp(&m[[j, col]].abs()))?;
        let pv = m[[pivot, col]];
        if pv == 0.0 || !pv.is_finite() {
            return None;
        }
        if pivot != col {
            for k in 0..n {
                m.swap([pivot, k], [col, k]);
            }
            x.swap(pivot, col);
        }
        for row in col + 1..n {
            let factor = m[[row, col]] / m[[col, col]];
            for k in col..n {
                m[[row, k]] -= factor * m[[col, k]];
            }
            x[row] -= factor * x[col];
        }
    }
    for row in (0..n).rev() {
        let s: f64 = (row + 1..n).map(|k| m[[row, k]] * x[k]).sum();
        x[row] = (x[row] - s) / m[[row, row]];
    }
    x.iter().all(|v| v.is_finite()).then_some(x)
}

/// The inverse of a symmetric positive definite matrix with unit diagonal (a scaled JᵀJ) by
/// Cholesky; `None` where a pivot falls below 1e-10 (so near-singular that the inverse would be
/// ruled by round-off).
fn invert_spd(a: &Array2<f64>) -> Option<Array2<f64>> {
    let n = a.nrows();
    let mut l = Array2::<f64>::zeros((n, n));
    for i in 0..n {
        for j in 0..=i {
            let s: f64 = a[[i, j]] - (0..j).map(|k| l[[i, k]] * l[[j, k]]).sum::<f64>();
            if i == j {
                if s.is_nan() || s <= 1e-10 {
                    return None;
                }
                l[[i, i]] = s.sqrt();
            } else {
                l[[i, j]] = s / l[[j, j]];
            }
        }
    }
    let mut inv = Array2::<f64>::zeros((n, n));
    for c in 0..n {
        // Solve L y = e_c, then Lᵀ x = y.
        let mut y = vec![0.0; n];
        for i in 0..n {
            let e = if i == c { 1.0 } else { 0.0 };
            let s: f64 = (0..i).map(|k| l[[i, k]] * y[k]).sum();
            y[i] = (e - s) / l[[i, i]];
        }
        for i in (0..n).rev() {
            let s: f64 = (i + 1..n).map(|k| l[[k, i]] * inv[[k, c]]).sum();
            inv[[i, c]] = (y[i] - s) / l[[i, i]];
        }
    }
    inv.iter().all(|v| v.is_finite()).then_some(inv)
}

/// Student's t quantile at 0.975 for `dof` degrees of freedom: tabulated for 1 to 10 (common
/// statistical tables, from memory), beyond by the Cornish-Fisher expansion about the normal
/// quantile 1.959964 (Abramowitz & Stegun, Handbook of Mathematical Functions, 1964, eq.
/// 26.7.5; from memory), which is within 1e-4 of the tables from 10 degrees of freedom on.
pub fn t_quantile_975(dof: usize) -> f64 {
    const TABLE: [f64; 10] = [
        12.7062, 4.3027, 3.1824, 2.7764, 2.5706, 2.4469, 2.3646, 2.3060, 2.2622, 2.2281,
    ];
    if dof == 0 {
        return f64::INFINITY;
    }
    if dof <= TABLE.len() {
        return TABLE[dof - 1];
    }
    let z: f64 = 1.959_963_984_540_054;
    let v = dof as f64;
    let g1 = (z.powi(3) + z) / 4.0;
    let g2 = (5.0 * z.powi(5) + 16.0 * z.powi(3) + 3.0 * z) / 96.0;
    let g3 = (3.0 * z.powi(7) + 19.0 * z.powi(5) + 17.0 * z.powi(3) - 15.0 * z) / 384.0;
    let g4 = (79.0 * z.powi(9) + 776.0 * z.powi(7) + 1482.0 * z.powi(5)
        - 1920.0 * z.powi(3)
        - 945.0 * z)
        / 92160.0;
    z + g1 / v + g2 / (v * v) + g3 / v.powi(3) + g4 / v.powi(4)
}
