//! ESDIRK pairs (explicit first stage, singly diagonally implicit, stiffly accurate) behind the
//! [`Method`] interface; the one in use is ESDIRK4(3)6L\[2\]SA ([`ESDIRK43`]).
//!
//! On the stored quantities U (water, and energy in coupled runs) with G their net inflow, stage
//! i of a step of `dt` from y_n solves
//!
//!   U(Y_i) - gamma dt G(Y_i) = U(y_n) + dt sum_{j<i} a_ij G(Y_j),   Y_0 = y_n,
//!
//! every stage with the same matrix coefficient gamma dt (one kept elimination serves every stage
//! of a linear problem). The methods are stiffly accurate (the last stage is the step's end, the
//! weights b are the last row of A), so the end satisfies U(y_n+1) = U(y_n) + dt sum b_j G_j, and
//! the water (and energy) that crossed the faces, integrated as dt sum b_j R_j with the same
//! weights, closes the balances. L-stable: no ringing after a sudden change of the surface.
//!
//! Error estimate: e = dt sum (b_j - bhat_j) G_j with the embedded weights bhat, in stored
//! quantities, filtered by the stage matrix, (dU/dy - gamma dt dG/dy)^-1 e, as Hosea and
//! Shampine advise for stiff problems ("Analysis and implementation of TR-BDF2", Appl. Numer.
//! Math. 20, 1996): it turns the estimate into an error of the unknowns and damps the stiff
//! components that the method damps itself (without the filter stiff diffusion modes would force
//! tiny steps). The scaled error is the dry-mass weighted root mean square over cells of
//! e / (tolerance x moisture scale) (and of the temperature errors against tolerance x
//! temperature scale): it follows the water held, the figure a run reports, rather than the few
//! thin cells at a surface, whose error early in a fixed-surface run would otherwise set every
//! step. The step-size exponent is 1 / (the estimate's order + 1), 1/4 for ESDIRK4(3).
//!
//! Dense output: moisture from the table's own fourth-order continuous weights over the step's
//! stages (`Tableau::dense`; rows between steps as accurate as the steps, about three times
//! closer than a cubic at the same tolerance), wherever the step resolves the cell's change.
//! Where it does not (an end slope more than three times the change: a long step over a fast
//! decay), and for temperatures, the cubic Hermite interpolant through the step's start and end
//! with their slopes, each slope limited to three times the step's change where it points the
//! way the value moves, so that it does not swing past its ends (`monotone_hermite`). After a
//! jump of the conditions (no smooth start slope) the fallback is the quadratic through start
//! and end with the end slope.

use super::flux::{NEWTON_FRACTION, NewtonFailure, NewtonSettings};
use super::method::{Attempt, ConditionsAt, Method};
use super::model::{Model, Rates};
use super::problem::Problem;
use super::state::State;
use super::stepper::Exchanged;
use super::sums::weighted_squares;

/// An ESDIRK pair: the strictly lower part of A row by row (stage 1 on; stage 0 is y_n), the
/// diagonal gamma, the nodes c and the embedded weights bhat. b is the last row of A with gamma.
#[derive(Debug)]
pub struct Tableau {
    /// Stages, the explicit first one included.
    pub stages: usize,
    /// The diagonal coefficient of every implicit stage.
    pub gamma: f64,
    /// a_ij for j < i, rows i = 1 .. stages - 1.
    pub lower: &'static [&'static [f64]],
    /// Stage times as fractions of the step, c_0 = 0 .. c_{s-1} = 1.
    pub c: &'static [f64],
    /// The embedded method's weights.
    pub b_hat: &'static [f64],
    /// Order of the main method.
    pub order: u32,
    /// Order of the embedded method.
    pub embedded_order: u32,
    /// Dense output: stage j's weight at fraction θ of the step is
    /// b_j(θ) = sum_k dense[j][k] θ^(k+1), so y(θ) = y_n + dt sum_j b_j(θ) G_j (in stored
    /// quantities).
    pub dense: &'static [[f64; 4]],
}

impl Tableau {
    /// The weights b_j of the main method (the last row of A, gamma on the diagonal).
    pub fn b(&self, j: usize) -> f64 {
        let last = self.lower[self.stages - 2];
        if j + 1 == self.stages {
            self.gamma
        } else {
            last[j]
        }
    }

    /// The error estimate is O(dt^(this + 1)): the lower of the two orders.
    pub fn error_order(&self) -> u32 {
        self.order.min(self.embedded_order)
    }

    /// a_ij with the diagonal (i, j >= 0).
    pub fn a(&self, i: usize, j: usize) -> f64 {
        if i == 0 || j > i {
            0.0
        } else if j == i {
            self.gamma
        } else {
            self.lower[i - 1][j]
        }
    }
}

/// ESDIRK4(3)6L\[2\]SA: fourth order, five implicit stages, gamma 1/4, L-stable, stiffly
/// accurate, stage order 2, with a third-order embedded pair (C.A. Kennedy and M.H. Carpenter,
/// "Additive Runge-Kutta schemes for convection-diffusion-reaction equations", Appl. Numer. Math.
/// 44 (2003) 139-181: the implicit table of ARK4(3)6L\[2\]SA). Its stability function stays >= 0
/// on the whole negative real axis (checked in the tests below), so a decaying mode never steps
/// past its equilibrium; TR-BDF2's goes down to -0.21 and ESDIRK3(2)4L\[2\]SA's to -0.13.
pub static ESDIRK43: Tableau = Tableau {
    stages: 6,
    gamma: 0.25,
    lower: &[
        &[0.25],
        &[8611.0 / 62500.0, -1743.0 / 31250.0],
        &[
            5_012_029.0 / 34_652_500.0,
            -654_441.0 / 2_922_500.0,
            174_375.0 / 388_108.0,
        ],
        &[
            15_267_082_809.0 / 155_376_265_600.0,
            -71_443_401.0 / 120_774_400.0,
            730_878_875.0 / 902_184_768.0,
            2_285_395.0 / 8_070_912.0,
        ],
        &[
            82889.0 / 524_892.0,
            0.0,
            15625.0 / 83664.0,
            69875.0 / 102_672.0,
            -2260.0 / 8211.0,
        ],
    ],
    c: &[0.0, 0.5, 83.0 / 250.0, 31.0 / 50.0, 17.0 / 20.0, 1.0],
    b_hat: &[
        4_586_570_599.0 / 29_645_900_160.0,
        0.0,
        178_811_875.0 / 945_068_544.0,
        814_220_225.0 / 1_159_782_912.0,
        -3_700_637.0 / 11_593_932.0,
        61727.0 / 225_920.0,
    ],
    order: 4,
    embedded_order: 3,
    // Fourth-order dense output, derived for this table (the tests below check it): with stage
    // order 2 (A c = c²/2 row by row) the eight fourth-order conditions on the weights b_j(θ)
    // reduce to five, sum b_j = θ, sum b_j c_j = θ²/2, sum b_j c_j² = θ³/3, sum b_j c_j³ = θ⁴/4,
    // sum b_j (A c²)_j = θ⁴/12, met power by power by quartics in θ; add b_j(1) = b_j
    // (continuous at the step's end), b_j'(0) = [j = 0] and b_j'(1) = [j = 5] (the slopes of the
    // step's ends, so the rows are smooth across steps). That leaves one free parameter: this is
    // the least-squares (smallest) solution.
    dense: &[
        [
            1.0,
            -2.597234899897917,
            2.8261349804425215,
            -1.0709837853829327,
        ],
        [
            0.0,
            2.564423996142783,
            -5.128847992285565,
            2.564423996142784,
        ],
        [
            0.0,
            3.1748549266413146,
            -5.602674091186627,
            2.6145781050693127,
        ],
        [
            0.0,
            -3.028610246543375,
            8.779481674324089,
            -5.070306132471379,
        ],
        [
            0.0,
            -1.0327219698892667,
            0.9644818157985141,
            -0.20700037690425283,
        ],
        [
            0.0,
            0.9192881935464632,
            -1.8385763870929306,
            1.169288193546466,
        ],
    ],
};

/// The most stages a table may have (the dense output and the guesses keep their weights on the
/// stack).
const MAX_STAGES: usize = 8;

/// A stiffly accurate ESDIRK pair driven as a [`Method`].
pub struct Esdirk {
    table: &'static Tableau,
    block: usize,
    u0: Vec<f64>,
    rhs: Vec<f64>,
    /// Net inflow of every stage; `g[0]` is the step start's.
    g: Vec<Vec<f64>>,
    /// Face rates of every stage.
    rates: Vec<Rates>,
    g0_valid: bool,
    g0_time: f64,
    /// Stage states 1 .. s-1 (index 0 unused); the last is the attempt's end.
    stage: Vec<State>,
    /// The derivative of the unknowns at the start and at the end of the last attempt.
    start_slope: State,
    end_slope: State,
    /// Whether the start slope continues the step before (no jump), so the cubic may use it.
    start_smooth: bool,
    /// dt times those slopes of the last accepted step, kept for dense output.
    kept_start: State,
    kept_end: State,
    kept_cubic: bool,
    /// The net inflows of the last accepted step's stages and its length, for the quartic.
    kept_g: Vec<Vec<f64>>,
    kept_dt: f64,
    /// Per cell, whether the last accepted step resolves its change (see `accept`), and whether
    /// every cell's does.
    resolved: Vec<bool>,
    all_resolved: bool,
    /// 1 / dry mass of each cell (water held = dry mass x moisture in every model).
    inv_mass: Vec<f64>,
    /// The explicit predictor's weights (`predictor_weights`).
    predictor: Vec<Vec<f64>>,
    err: Vec<f64>,
    settings: NewtonSettings,
    scale: [f64; 2],
    weight: Vec<f64>,
}

impl Esdirk {
    /// The pair `table` for `problem` with `block` unknowns per cell.
    pub fn new(table: &'static Tableau, problem: &Problem, block: usize) -> Esdirk {
        let n = problem.len();
        let coupled = block == 2;
        let nb = n * block;
        let t_scale = problem
            .thermal
            .as_ref()
            .map_or(1.0, |th| th.temperature_scale);
        let scale = [
            problem.tolerance * problem.moisture_scale,
            problem.tolerance * t_scale,
        ];
        let s = table.stages;
        assert!(
            s <= MAX_STAGES,
            "a table of {s} stages needs a larger MAX_STAGES"
        );
        Esdirk {
            table,
            block,
            u0: vec![0.0; nb],
            rhs: vec![0.0; nb],
            g: vec![vec![0.0; nb]; s],
            rates: vec![Rates::default(); s],
            g0_valid: false,
            g0_time: 0.0,
            stage: (0..s).map(|_| State::zeros(n, coupled)).collect(),
            start_slope: State::zeros(n, coupled),
            end_slope: State::zeros(n, coupled),
            start_smooth: false,
            kept_start: State::zeros(n, coupled),
            kept_end: State::zeros(n, coupled),
            kept_cubic: false,
            kept_g: vec![vec![0.0; nb]; s],
            kept_dt: 0.0,
            resolved: vec![false; n],
            all_resolved: false,
            inv_mass: problem.inverse_dry_mass().to_vec(),
            predictor: predictor_weights(table.c),
            err: vec![0.0; nb],
            settings: NewtonSettings {
                tol: [NEWTON_FRACTION * scale[0], NEWTON_FRACTION * scale[1]],
                linear: false,
            },
            scale,
            weight: {
                let total = problem.total_dry_mass();
                problem.dry_mass.iter().map(|m| m / total).collect()
            },
        }
    }

    /// Newton's starting guess for stage `i`: for stage 1 the start's slope continued (only when
    /// it continues the step before: after a jump the surface cells' slopes are huge); for later
    /// ones in moisture-only runs, moisture from the stages' inflows so far (`predictor_weights`,
    /// an explicit formula of order i: the guesses land within a few hundred tolerances, where
    /// one Newton update usually suffices, instead of thousands); otherwise the line through y_n
    /// and the stage before, at most twice as far.
    fn predict(&mut self, i: usize, y: &State, dt: f64) {
        if self.settings.linear {
            // One update from any finite guess solves a linear stage exactly (its faces are
            // linearised at the step's start; a non-finite guess is restarted from there).
            return;
        }
        let (done, rest) = self.stage.split_at_mut(i);
        let guess = &mut rest[0];
        guess.clone_from(y);
        if i == 1 {
            if self.start_smooth {
                let f = self.table.c[1] * dt;
                guess.update_with(y, &self.start_slope, |_, a, m| a + f * m);
            }
            return;
        }
        if self.block == 1 {
            // Moisture alone: the stages' inflows so far integrated to this stage's time by the
            // polynomial through them (an explicit formula of order i), far closer than the line.
            let weights = self.predictor[i].iter().map(|w| w * dt);
            moisture_gaining(&mut guess.moisture, y, &self.inv_mass, &self.g, weights, 1);
        } else {
            // Coupled runs keep the line: with the quadrature their loose-tolerance runs
            // (0.05-0.1) stopped Newton at iterates whose surface ran hotter than the air.
            let f = (self.table.c[i] / self.table.c[i - 1]).min(2.0);
            guess.update_with(y, &done[i - 1], |_, a, b| a + f * (b - a));
        }
    }
}

/// Weights w[i][j] (j < i) integrating from 0 to c_i the polynomial through the values at the
/// nodes c_0 .. c_{i-1}: the explicit predictor of stage i from the stages before it.
fn predictor_weights(c: &[f64]) -> Vec<Vec<f64>> {
    // Three-point Gauss-Legendre on [0, c_i] is exact up to degree five.
    let (nodes, weights) = (
        [-(0.6f64.sqrt()), 0.0, 0.6f64.sqrt()],
        [5.0 / 9.0, 8.0 / 9.0, 5.0 / 9.0],
    );
    (0..c.len())
        .map(|i| {
            (0..i)
                .map(|j| {
                    let basis = |t: f64| {
                        (0..i)
                            .filter(|&k| k != j)
                            .map(|k| (t - c[k]) / (c[j] - c[k]))
                            .product::<f64>()
                    };
                    let half = 0.5 * c[i];
                    nodes
                        .iter()
                        .zip(weights)
                        .map(|(x, w)| half * w * basis(half * (1.0 + x)))
                        .sum()
                })
                .collect()
        })
        .collect()
}

/// Rates times a length of time.
fn over(r: Rates, dt: f64) -> Exchanged {
    Exchanged {
        water: r.water * dt,
        convective: r.convective * dt,
        latent: r.latent * dt,
        energy_in: r.energy_in * dt,
    }
}

/// Scales every value of `s` by `k`.
fn scale_state(s: &mut State, k: f64) {
    for v in s.moisture.iter_mut().chain(s.temperature.iter_mut()) {
        *v *= k;
    }
}

/// The cubic Hermite through `y0` and `y1` with dt times their slopes `m0`, `m1`, at fraction `s`
/// of the step, its slopes first limited to at most three times the change over the step where
/// they point the way the value moves: inside that box a cubic Hermite is monotone (F.N. Fritsch
/// and R.E. Carlson, "Monotone piecewise cubic interpolation", SIAM J. Numer. Anal. 17 (1980)).
/// A long step over a fast decay has a start slope many times the change (a mode e^(-5) down over
/// the step starts at 5 times it), and the plain cubic would swing past the step's end, below an
/// equilibrium the steps themselves never cross; limited, it stays between the ends. A slope
/// against the change (the value turns inside the step, as in early condensation on a cold
/// product) is kept as it is, so a peak inside the step still shows above both ends; the other
/// slope is still limited, which keeps a value rising from rest (a slope of about zero, or a
/// little against the change by round-off) from dipping below where it started.
fn monotone_hermite(s: f64, y0: f64, y1: f64, m0: f64, m1: f64) -> f64 {
    let change = y1 - y0;
    let limit = |m: f64| {
        if change > 0.0 {
            m.min(3.0 * change)
        } else if change < 0.0 {
            m.max(3.0 * change)
        } else {
            m
        }
    };
    let (m0, m1) = (limit(m0), limit(m1));
    let (s2, s3) = (s * s, s * s * s);
    let h00 = 2.0 * s3 - 3.0 * s2 + 1.0;
    let h10 = s3 - 2.0 * s2 + s;
    let h01 = -2.0 * s3 + 3.0 * s2;
    let h11 = s3 - s2;
    h00 * y0 + h10 * m0 + h01 * y1 + h11 * m1
}

/// `out = sum_j w_j v_j` over the cells for the (weight, values) `terms`, two terms per sweep
/// of the cells (contiguous, so the loops vectorise): the stages' right-hand sides, the error
/// estimate and the dense output each combine up to six stage inflows, and reading and writing
/// the cells once per pair instead of once per term is a measurable part of a step.
/// Compiled for wider vectors where the processor has them (`wide`).
fn combine(out: &mut [f64], terms: &[(f64, &[f64])]) {
    super::wide::wide(
        #[inline(always)]
        || combine_pairs(out, terms),
    );
}

#[inline(always)]
fn combine_pairs(out: &mut [f64], terms: &[(f64, &[f64])]) {
    let mut pairs = terms.chunks(2);
    match pairs.next() {
        Some(&[(w0, a), (w1, b)]) => {
            for (o, (x, y)) in out.iter_mut().zip(a.iter().zip(b)) {
                *o = w0 * x + w1 * y;
            }
        }
        Some(&[(w0, a)]) => {
            for (o, x) in out.iter_mut().zip(a) {
                *o = w0 * x;
            }
        }
        _ => out.fill(0.0),
    }
    for pair in pairs {
        match *pair {
            [(w0, a), (w1, b)] => {
                for (o, (x, y)) in out.iter_mut().zip(a.iter().zip(b)) {
                    *o += w0 * x + w1 * y;
                }
            }
            [(w0, a)] => {
                for (o, x) in out.iter_mut().zip(a) {
                    *o += w0 * x;
                }
            }
            _ => {}
        }
    }
}

/// The moisture of each cell after `start` gains the water sum_j w_j G_j of the inflows `g`
/// (every block's first value; water held is dry mass times moisture in every model) with
/// weights `w` (s), into `out`: the stage guesses and the dense output both.
fn moisture_gaining(
    out: &mut [f64],
    start: &State,
    inv_mass: &[f64],
    g: &[Vec<f64>],
    w: impl Iterator<Item = f64>,
    block: usize,
) {
    if block == 1 {
        let mut terms = [(0.0, &[][..]); MAX_STAGES];
        let mut count = 0;
        for (t, (w, g)) in terms.iter_mut().zip(w.zip(g)) {
            *t = (w, &g[..]);
            count += 1;
        }
        combine(out, &terms[..count]);
    } else {
        out.fill(0.0);
        for (g, w) in g.iter().zip(w) {
            for (o, g) in out.iter_mut().zip(g.iter().step_by(block)) {
                *o += w * g;
            }
        }
    }
    for ((o, &y0), &inv_m) in out.iter_mut().zip(&start.moisture).zip(inv_mass) {
        *o = y0 + *o * inv_m;
    }
}

impl Method for Esdirk {
    fn error_order(&self) -> u32 {
        self.table.error_order()
    }

    fn attempt(
        &mut self,
        model: &mut dyn Model,
        conditions: &dyn ConditionsAt,
        t: f64,
        dt: f64,
        y: &State,
    ) -> Result<Attempt, NewtonFailure> {
        let tab = self.table;
        let s = tab.stages;
        self.settings.linear = model.is_linear();
        if !self.g0_valid || self.g0_time != t {
            self.rates[0] = model.inflow(&conditions.at(t), y, &mut self.g[0]);
            self.g0_valid = true;
            self.g0_time = t;
            self.start_smooth = false;
        }
        model.state_rates(y, &self.g[0], &mut self.start_slope);
        model.conserved(y, &mut self.u0);
        let mut iterations = 0;
        for i in 1..s {
            // rhs = U(y_n) + dt sum_j a_ij G_j.
            let mut terms = [(0.0, &[][..]); MAX_STAGES + 1];
            terms[0] = (1.0, &self.u0[..]);
            for (t, (j, g)) in terms[1..].iter_mut().zip(self.g[..i].iter().enumerate()) {
                *t = (tab.a(i, j) * dt, &g[..]);
            }
            combine(&mut self.rhs, &terms[..=i]);
            self.predict(i, y, dt);
            let (r, it) = model.solve_stage(
                &conditions.at(t + tab.c[i] * dt),
                tab.gamma * dt,
                &self.rhs,
                &mut self.stage[i],
                y,
                &self.settings,
            )?;
            iterations += it;
            self.rates[i] = r;
            self.g[i].copy_from_slice(model.last_inflow());
        }
        model.state_rates(&self.stage[s - 1], &self.g[s - 1], &mut self.end_slope);
        // Embedded error estimate, filtered by the stage matrix.
        let mut terms = [(0.0, &[][..]); MAX_STAGES];
        for (t, (j, g)) in terms.iter_mut().zip(self.g.iter().enumerate()) {
            *t = (dt * (tab.b(j) - tab.b_hat[j]), &g[..]);
        }
        combine(&mut self.err, &terms[..s]);
        if !model.filter(&mut self.err) {
            return Err(NewtonFailure::Breakdown);
        }
        let sum = if self.block == 1 {
            weighted_squares(&self.weight, &self.err) / (self.scale[0] * self.scale[0])
        } else {
            let mut sum = 0.0;
            for (cell, &w) in self.err.chunks_exact(self.block).zip(&self.weight) {
                for (e, scale) in cell.iter().zip(self.scale) {
                    let v = e / scale;
                    sum += w * v * v;
                }
            }
            sum
        };
        let error = sum.sqrt();
        if !error.is_finite() {
            return Err(NewtonFailure::Breakdown);
        }
        let mut rates = Rates::default();
        for j in 0..s {
            let (b, r) = (tab.b(j), self.rates[j]);
            rates.water += b * r.water;
            rates.convective += b * r.convective;
            rates.latent += b * r.latent;
            rates.energy_in += b * r.energy_in;
        }
        Ok(Attempt {
            error,
            exchanged: over(rates, dt),
            newton_iterations: iterations,
        })
    }

    fn candidate(&self) -> &State {
        &self.stage[self.table.stages - 1]
    }

    fn candidate_gain(&self) -> [f64; 4] {
        // The dense output's weights (`Tableau::dense`) applied to each stage's total water
        // inflow (every block's first value): every model holds water as dry mass times
        // moisture, so the water gained is the mean's change times the dry mass.
        let mut w = [0.0; 4];
        for (row, g) in self.table.dense.iter().zip(&self.g) {
            let inflow: f64 = g.iter().step_by(self.block).sum();
            for (w, d) in w.iter_mut().zip(row) {
                *w += d * inflow;
            }
        }
        w
    }

    fn accept(&mut self, state: &mut State, t_end: f64, dt: f64) {
        let s = self.table.stages;
        std::mem::swap(state, &mut self.stage[s - 1]);
        // The stages' inflows are kept for dense output; the end's starts the next step (until
        // the conditions jump).
        for (kept, g) in self.kept_g.iter_mut().zip(self.g.iter_mut()) {
            std::mem::swap(kept, g);
        }
        self.g[0].copy_from_slice(&self.kept_g[s - 1]);
        self.kept_dt = dt;
        self.rates[0] = self.rates[s - 1];
        self.g0_valid = true;
        self.g0_time = t_end;
        // Dense output keeps dt times the slopes.
        self.kept_start.clone_from(&self.start_slope);
        scale_state(&mut self.kept_start, dt);
        std::mem::swap(&mut self.kept_end, &mut self.end_slope);
        scale_state(&mut self.kept_end, dt);
        self.kept_cubic = self.start_smooth;
        self.start_smooth = true;
        // Which cells the step resolves (both end slopes within three times the cell's change:
        // the monotone box of `monotone_hermite`); their rows come from the quartic.
        let ends = self.stage[s - 1].moisture.iter().zip(&state.moisture);
        let slopes = self.kept_start.moisture.iter().zip(&self.kept_end.moisture);
        for ((r, (&y0, &y1)), (&m0, &m1)) in self.resolved.iter_mut().zip(ends).zip(slopes) {
            let change = (y1 - y0).abs();
            *r = m0.abs() <= 3.0 * change && m1.abs() <= 3.0 * change;
        }
        self.all_resolved = self.resolved.iter().all(|&r| r);
    }

    fn interpolate(&self, s: f64, start: &State, end: &State, out: &mut State) {
        // The fallback for each value: the limited cubic, or after a jump the quadratic.
        let fallback = |y0: f64, y1: f64, m0: f64, m1: f64| {
            if self.kept_cubic {
                monotone_hermite(s, y0, y1, m0, m1)
            } else {
                let (a, b) = (s * (2.0 - s), s * (s - 1.0));
                y0 + a * (y1 - y0) + b * m1
            }
        };
        out.temperature.clone_from(&end.temperature);
        for (((o, &y0), &m0), &m1) in out
            .temperature
            .iter_mut()
            .zip(&start.temperature)
            .zip(&self.kept_start.temperature)
            .zip(&self.kept_end.temperature)
        {
            *o = fallback(y0, *o, m0, m1);
        }
        // Moisture: the table's quartic where the step resolves the cell's change (both end
        // slopes within three times it, the monotone box of `monotone_hermite`), else the
        // fallback. The quartic is as accurate as the steps themselves; the cubic's error is
        // a power of dt larger, and rows between steps would set the tolerance a run needs.
        // First the water gained since the step's start, sum_j dt b_j(s) G_j, cell by cell.
        let weights = (self.table.dense.iter())
            .map(|row| self.kept_dt * s * (row[0] + s * (row[1] + s * (row[2] + s * row[3]))));
        let (inv_mass, block) = (&self.inv_mass, self.block);
        moisture_gaining(
            &mut out.moisture,
            start,
            inv_mass,
            &self.kept_g,
            weights,
            block,
        );
        if !self.all_resolved {
            let ends = start.moisture.iter().zip(&end.moisture);
            let slopes = self.kept_start.moisture.iter().zip(&self.kept_end.moisture);
            let cells = out
                .moisture
                .iter_mut()
                .zip(&self.resolved)
                .zip(ends)
                .zip(slopes);
            for (((o, &resolved), (&y0, &y1)), (&m0, &m1)) in cells {
                if !resolved {
                    *o = fallback(y0, y1, m0, m1);
                }
            }
        }
    }

    fn restart(&mut self) {
        self.g0_valid = false;
        self.start_smooth = false;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The water gain the stepper locates a trigger with (`candidate_gain`) is the dense
    /// output's: at the attempt's end it is the water the step added (the methods are stiffly
    /// accurate), and in between it moves monotonically from 0 there on a drying slab.
    #[test]
    fn the_candidate_gain_ends_at_the_water_the_step_added() {
        use crate::case::{Case, Exchange, Exposed, Geometry, Humidity, Material, Step};
        use crate::solver::flux::FaceLaws;
        use crate::solver::model::{self, Conditions};
        use crate::solver::problem::{Air, FaceLaw};

        let mut material = Material::constant("p", 500.0, 2e-10);
        material.diffusivity.moisture_coef = 2.0;
        let mut step = Step::constant(
            40.0,
            Humidity::Unspecified,
            Exchange::SurfaceCoefficient(1e-7),
        );
        step.equilibrium_moisture = Some(0.05);
        let case = Case::single_layer(
            Geometry::Slab,
            Exposed::A,
            material,
            0.01,
            0.8,
            vec![step],
            3.6e5,
        );
        let problem = Problem::new(&case.validated().expect("a valid case"));
        let air = Air {
            dry_bulb_c: 40.0,
            rh: None,
        };
        let law = problem.face_law(&problem.steps[0], air, 0);
        assert!(matches!(law, FaceLaw::Linear { .. }));
        let heat = crate::solver::coupled::HeatFace {
            law,
            h: 0.0,
            t_air: 40.0,
        };
        struct Fixed(Conditions);
        impl ConditionsAt for Fixed {
            fn at(&self, _t: f64) -> Conditions {
                self.0
            }
        }
        let conditions = Fixed(Conditions {
            laws: FaceLaws {
                a: law,
                b: FaceLaw::Sealed,
            },
            t_air: 40.0,
            heat: crate::solver::coupled::HeatFaces { a: heat, b: heat },
        });
        let mut model = model::for_problem(&problem);
        let mut method = Esdirk::new(&ESDIRK43, &problem, 1);
        let y = State {
            moisture: problem.initial.clone(),
            temperature: Vec::new(),
        };
        method
            .attempt(model.as_mut(), &conditions, 0.0, 1800.0, &y)
            .expect("the stage solves converge");
        let (w, dt) = (method.candidate_gain(), 1800.0);
        let gain = |s: f64| dt * s * (w[0] + s * (w[1] + s * (w[2] + s * w[3])));
        let added = problem.water(&method.candidate().moisture) - problem.water(&y.moisture);
        assert!(added < 0.0, "the slab dries");
        assert!(
            (gain(1.0) - added).abs() <= 1e-12 * added.abs(),
            "{} {added}",
            gain(1.0)
        );
        let mut last = 0.0;
        for k in 1..=20 {
            let g = gain(f64::from(k) / 20.0);
            assert!(g < last, "step {k}: {g} after {last}");
            last = g;
        }
    }

    /// `combine` against the plain sum of its terms, on the baseline path and, where the
    /// processor has AVX2, the wide one, which must give the same bits.
    #[test]
    fn combine_sums_its_terms_alike_on_every_path() {
        let n = 43; // Not a multiple of the vector width.
        let v: Vec<Vec<f64>> = (0..5)
            .map(|j| (0..n).map(|i| ((i * 7 + j * 3) as f64).sin()).collect())
            .collect();
        let w = [0.3, -1.7, 2.25, 1e-3, -0.6];
        let terms: Vec<(f64, &[f64])> = w.iter().zip(&v).map(|(&w, v)| (w, &v[..])).collect();
        for count in 0..=5 {
            let terms = &terms[..count];
            let mut narrow = vec![f64::NAN; n];
            crate::solver::wide::narrow(|| combine_pairs(&mut narrow, terms));
            for (i, &o) in narrow.iter().enumerate() {
                let plain: f64 = terms.iter().map(|(w, v)| w * v[i]).sum();
                assert!((o - plain).abs() <= 1e-15 * 8.0, "{count} terms, cell {i}");
            }
            if crate::solver::wide::is_wide() {
                let mut wide = vec![f64::NAN; n];
                combine(&mut wide, terms);
                let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                assert_eq!(bits(&narrow), bits(&wide), "{count} terms");
            }
        }
    }

    /// The order conditions up to order `p` for the weights `b` (Butcher trees up to order 4).
    fn order_conditions(t: &Tableau, b: &dyn Fn(usize) -> f64, p: u32) -> Vec<f64> {
        let s = t.stages;
        let c = |i: usize| (0..s).map(|j| t.a(i, j)).sum::<f64>();
        let ac = |i: usize| (0..s).map(|j| t.a(i, j) * c(j)).sum::<f64>();
        let sum = |f: &dyn Fn(usize) -> f64| (0..s).map(|i| b(i) * f(i)).sum::<f64>();
        let mut r = vec![sum(&|_| 1.0) - 1.0];
        if p >= 2 {
            r.push(sum(&c) - 0.5);
        }
        if p >= 3 {
            r.push(sum(&|i| c(i) * c(i)) - 1.0 / 3.0);
            r.push(sum(&ac) - 1.0 / 6.0);
        }
        if p >= 4 {
            r.push(sum(&|i| c(i).powi(3)) - 0.25);
            r.push(sum(&|i| c(i) * ac(i)) - 0.125);
            r.push(sum(&|i| (0..s).map(|j| t.a(i, j) * c(j) * c(j)).sum::<f64>()) - 1.0 / 12.0);
            r.push(sum(&|i| (0..s).map(|j| t.a(i, j) * ac(j)).sum::<f64>()) - 1.0 / 24.0);
        }
        r
    }

    #[test]
    fn the_pairs_meet_their_order_conditions_and_their_nodes_are_the_row_sums() {
        // The classical Runge-Kutta order conditions (Butcher trees up to order 4; e.g. Hairer,
        // Norsett & Wanner, Solving ODEs I, 2nd ed., section II.2, Table 2.2).
        for t in [&ESDIRK43] {
            for r in order_conditions(t, &|j| t.b(j), t.order) {
                assert!(r.abs() < 1e-11, "main weights: residual {r}");
            }
            for r in order_conditions(t, &|j| t.b_hat[j], t.embedded_order) {
                assert!(r.abs() < 1e-11, "embedded weights: residual {r}");
            }
            // The pair differs (otherwise the estimate would be zero).
            assert!((0..t.stages).any(|j| (t.b(j) - t.b_hat[j]).abs() > 1e-3));
            for i in 0..t.stages {
                let row: f64 = (0..t.stages).map(|j| t.a(i, j)).sum();
                assert!((row - t.c[i]).abs() < 1e-11, "c[{i}] = {} vs {row}", t.c[i]);
            }
        }
    }

    #[test]
    fn the_dense_output_of_a_long_step_over_a_fast_decay_stays_between_its_ends() {
        // y = e^(-k t) over a step with k dt = 5: the plain cubic Hermite dips to -0.12 at
        // s = 0.6; limited it stays in [y1, y0].
        let k: f64 = 5.0;
        let (y0, y1) = (1.0, (-k).exp());
        let (m0, m1) = (-k * y0, -k * y1);
        for i in 0..=100 {
            let s = f64::from(i) / 100.0;
            let v = monotone_hermite(s, y0, y1, m0, m1);
            assert!(v >= y1 - 1e-15 && v <= y0 + 1e-15, "s {s}: {v}");
        }
        // A turning point inside the step (the end slope against the change) still shows a
        // peak above both ends.
        assert!(monotone_hermite(0.5, 0.0, 0.1, 1.0, -0.5) > 0.1);
        // A value rising from rest over a long step (start slope about zero, end slope ten
        // times the change) never dips below its start; the plain cubic would, to -0.5 x 0.1.
        for i in 0..=100 {
            let s = f64::from(i) / 100.0;
            let v = monotone_hermite(s, 0.0, 0.1, -1e-12, 1.0);
            assert!((-1e-12..=0.1).contains(&v), "s {s}: {v}");
        }
        // A smooth change keeps the full cubic, within its error bound max|y(4)| dt^4 / 384
        // (2.6e-7 for e^(-0.1 t) over a unit step).
        let k = 0.1_f64;
        let (y1, m0, m1) = ((-k).exp(), -k, -k * (-k).exp());
        for i in 0..=10 {
            let s = f64::from(i) / 10.0;
            let v = monotone_hermite(s, 1.0, y1, m0, m1);
            assert!(
                (v - (-k * s).exp()).abs() <= k.powi(4) / 384.0,
                "s {s}: {v}"
            );
        }
    }

    #[test]
    fn the_stability_function_vanishes_at_infinity_and_never_turns_negative() {
        // R(z) for y' = z y / dt: the stage values of one step from y = 1, solved row by row
        // (y_0 = 1 explicit, y_i = 1 + z sum_{j<=i} a_ij y_j); stiffly accurate, so R is the
        // last stage. L-stability
        // (R -> 0 as z -> -inf) and R >= 0 on the negative real axis (no step past equilibrium).
        let t = &ESDIRK43;
        let r = |z: f64| {
            let s = t.stages;
            let mut y = vec![0.0; s];
            y[0] = 1.0;
            for i in 1..s {
                let known: f64 = (0..i).map(|j| t.a(i, j) * y[j]).sum();
                y[i] = (1.0 + z * known) / (1.0 - z * t.gamma);
            }
            y[s - 1]
        };
        assert!(r(-1e8).abs() < 1e-6, "R(-1e8) = {}", r(-1e8));
        for k in 0..=800 {
            let z = -(10f64.powf(-2.0 + 10.0 * f64::from(k) / 800.0));
            assert!(r(z) >= 0.0, "R({z}) = {}", r(z));
        }
        // And it follows exp(z) to fourth order for small steps.
        let z = -1e-2;
        assert!((r(z) - z.exp()).abs() < 1e-11, "{} vs {}", r(z), z.exp());
    }

    #[test]
    fn the_dense_output_is_fourth_order_continuous_and_smooth_at_the_ends() {
        let t = &ESDIRK43;
        let weight = |j: usize, th: f64| {
            let r = t.dense[j];
            th * (r[0] + th * (r[1] + th * (r[2] + th * r[3])))
        };
        let slope = |j: usize, th: f64| {
            let r = t.dense[j];
            r[0] + th * (2.0 * r[1] + th * (3.0 * r[2] + th * 4.0 * r[3]))
        };
        // The order conditions of a continuous Runge-Kutta method at fraction θ (Hairer, Norsett
        // & Wanner, Solving ODEs I, 2nd ed., section II.6, dense output): for every Butcher tree
        // of order ρ <= 4, sum_j b_j(θ) Φ_j = θ^ρ / γ(tree).
        let c = |i: usize| (0..t.stages).map(|j| t.a(i, j)).sum::<f64>();
        let ac = |i: usize| (0..t.stages).map(|j| t.a(i, j) * c(j)).sum::<f64>();
        let ac2 = |i: usize| (0..t.stages).map(|j| t.a(i, j) * c(j) * c(j)).sum::<f64>();
        let aac = |i: usize| (0..t.stages).map(|j| t.a(i, j) * ac(j)).sum::<f64>();
        type Tree<'a> = (&'a dyn Fn(usize) -> f64, i32, f64);
        let trees: [Tree; 8] = [
            (&|_| 1.0, 1, 1.0),
            (&c, 2, 2.0),
            (&|i| c(i) * c(i), 3, 3.0),
            (&ac, 3, 6.0),
            (&|i| c(i).powi(3), 4, 4.0),
            (&|i| c(i) * ac(i), 4, 8.0),
            (&ac2, 4, 12.0),
            (&aac, 4, 24.0),
        ];
        for th in [0.1, 0.37, 0.5, 0.81, 1.0] {
            for (phi, rho, gamma) in &trees {
                let sum: f64 = (0..t.stages).map(|j| weight(j, th) * phi(j)).sum();
                let exact = th.powi(*rho) / gamma;
                assert!(
                    (sum - exact).abs() < 1e-12,
                    "θ {th}, order {rho}: {sum} vs {exact}"
                );
            }
        }
        for j in 0..t.stages {
            // Continuous with the step's end, and with the slopes of both ends (f at y_n is
            // stage 0's, f at y_n+1 the last stage's).
            assert!((weight(j, 1.0) - t.b(j)).abs() < 1e-12, "b_{j}(1)");
            let start = if j == 0 { 1.0 } else { 0.0 };
            let end = if j + 1 == t.stages { 1.0 } else { 0.0 };
            assert!((slope(j, 0.0) - start).abs() < 1e-12, "b_{j}'(0)");
            assert!((slope(j, 1.0) - end).abs() < 1e-12, "b_{j}'(1)");
        }
    }

    #[test]
    fn the_predictor_integrates_the_polynomial_through_the_stages_before() {
        // Stage i's weights integrate every polynomial of degree < i through the nodes before it
        // exactly: sum_j w_ij c_j^k = c_i^(k+1) / (k + 1).
        let c = ESDIRK43.c;
        let w = predictor_weights(c);
        for i in 1..c.len() {
            for k in 0..i {
                let sum: f64 = (0..i).map(|j| w[i][j] * c[j].powi(k as i32)).sum();
                let exact = c[i].powi(k as i32 + 1) / (k as f64 + 1.0);
                assert!(
                    (sum - exact).abs() < 1e-13,
                    "stage {i}, degree {k}: {sum} vs {exact}"
                );
            }
        }
    }
}
