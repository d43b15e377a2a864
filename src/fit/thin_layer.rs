//! Thin-layer drying models fitted by least squares to moisture ratio against time, and the
//! slope method for an effective diffusivity.
//!
//! Models (MR = (X - X_eq) / (X_0 - X_eq), t in hours):
//! - Lewis (Newton): MR = exp(-k t) (W.K. Lewis, Ind. Eng. Chem. 13 (1921) 427; from memory);
//! - Page: MR = exp(-k t^n) (G.E. Page, M.S. thesis, Purdue University, 1949; from memory);
//! - Henderson-Pabis: MR = a exp(-k t) (S.M. Henderson & S. Pabis, J. Agric. Eng. Res. 6 (1961)
//!   169; from memory), the first term of Crank's series;
//! - logarithmic: MR = a exp(-k t) + c (Yagcioglu, Degirmencioglu & Cagatay, 1999; from memory).
//!
//! Each is fitted by Levenberg-Marquardt from a start that the model's linearised form gives,
//! and reported with R², RMSE and reduced chi-square (their common definitions).

use crate::analytic::{Shape, Surface, eigenvalues};

/// A thin-layer drying model.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DryingModel {
    /// MR = exp(-k t).
    Lewis,
    /// MR = exp(-k t^n).
    Page,
    /// MR = a exp(-k t).
    HendersonPabis,
    /// MR = a exp(-k t) + c.
    Logarithmic,
}

impl DryingModel {
    /// Every model, in the order of the format page.
    pub const ALL: [DryingModel; 4] = [
        DryingModel::Lewis,
        DryingModel::Page,
        DryingModel::HendersonPabis,
        DryingModel::Logarithmic,
    ];

    /// The name the `fit` sheet shows.
    pub fn name(self) -> &'static str {
        match self {
            DryingModel::Lewis => "lewis",
            DryingModel::Page => "page",
            DryingModel::HendersonPabis => "henderson_pabis",
            DryingModel::Logarithmic => "logarithmic",
        }
    }

    fn parameters(self) -> usize {
        match self {
            DryingModel::Lewis => 1,
            DryingModel::Page | DryingModel::HendersonPabis => 2,
            DryingModel::Logarithmic => 3,
        }
    }

    /// MR at `t` (h) with parameters `p` (k first, then n or a, then c).
    fn value(self, p: &[f64; 3], t: f64) -> f64 {
        match self {
            DryingModel::Lewis => (-p[0] * t).exp(),
            DryingModel::Page => (-p[0] * t.powf(p[1])).exp(),
            DryingModel::HendersonPabis => p[1] * (-p[0] * t).exp(),
            DryingModel::Logarithmic => p[1] * (-p[0] * t).exp() + p[2],
        }
    }
}

/// Goodness of a fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Goodness {
    /// 1 - SS_res / SS_tot; `None` when the observations do not vary.
    pub r2: Option<f64>,
    /// sqrt(SS_res / N).
    pub rmse: f64,
    /// SS_res / (N - parameters); `None` when there are no more points than parameters.
    pub reduced_chi_square: Option<f64>,
}

/// One fitted model.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ModelFit {
    /// Which model.
    pub model: DryingModel,
    /// k, 1/h (for Page, h^-n).
    pub k_per_h: f64,
    /// Page's exponent.
    pub n: Option<f64>,
    /// Henderson-Pabis and logarithmic a.
    pub a: Option<f64>,
    /// Logarithmic c.
    pub c: Option<f64>,
    /// How well it fits.
    pub goodness: Goodness,
}

/// R², RMSE and reduced chi-square of `predicted` against `observed` for a model with
/// `parameters` parameters (common definitions: R² = 1 - Σ(o - p)² / Σ(o - mean)²,
/// RMSE = sqrt(Σ(o - p)² / N), χ² = Σ(o - p)² / (N - z)).
pub fn goodness(observed: &[f64], predicted: &[f64], parameters: usize) -> Goodness {
    let n = observed.len();
    let mean = observed.iter().sum::<f64>() / n.max(1) as f64;
    let ss_res: f64 = observed
        .iter()
        .zip(predicted)
        .map(|(o, p)| (o - p) * (o - p))
        .sum();
    let ss_tot: f64 = observed.iter().map(|o| (o - mean) * (o - mean)).sum();
    Goodness {
        r2: (ss_tot > 0.0).then(|| 1.0 - ss_res / ss_tot),
        rmse: (ss_res / n.max(1) as f64).sqrt(),
        reduced_chi_square: (n > parameters).then(|| ss_res / (n - parameters) as f64),
    }
}

/// Least-squares slope and intercept of y against x.
fn line(x: &[f64], y: &[f64]) -> Option<(f64, f64)> {
    let n = x.len() as f64;
    if x.len() < 2 {
        return None;
    }
    let (mx, my) = (x.iter().sum::<f64>() / n, y.iter().sum::<f64>() / n);
    let sxx: f64 = x.iter().map(|v| (v - mx) * (v - mx)).sum();
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
    (sxx > 0.0).then(|| (sxy / sxx, my - sxy / sxx * mx))
}

/// A start for the model from its linearised form on the points with 0 < MR < 1 and t > 0.
fn start(model: DryingModel, t: &[f64], mr: &[f64]) -> Option<[f64; 3]> {
    let usable: Vec<(f64, f64)> = t
        .iter()
        .zip(mr)
        .filter(|&(&t, &m)| t > 0.0 && m > 0.0 && m < 1.0)
        .map(|(&t, &m)| (t, m))
        .collect();
    let (ts, ms): (Vec<f64>, Vec<f64>) = usable.iter().copied().unzip();
    match model {
        DryingModel::Page => {
            // ln(-ln MR) = ln k + n ln t
            let x: Vec<f64> = ts.iter().map(|t| t.ln()).collect();
            let y: Vec<f64> = ms.iter().map(|m| (-m.ln()).ln()).collect();
            let (n, ln_k) = line(&x, &y)?;
            Some([ln_k.exp(), n, 0.0])
        }
        _ => {
            // ln MR = ln a - k t
            let y: Vec<f64> = ms.iter().map(|m| m.ln()).collect();
            let (slope, ln_a) = line(&ts, &y)?;
            let k = (-slope).max(1e-12);
            Some(match model {
                DryingModel::Lewis => [k, 0.0, 0.0],
                _ => [k, ln_a.exp(), 0.0],
            })
        }
    }
}

/// Levenberg-Marquardt on the sum of squares of `model` against (t, mr), from `p`.
fn least_squares(model: DryingModel, t: &[f64], mr: &[f64], mut p: [f64; 3]) -> [f64; 3] {
    let z = model.parameters();
    let ss = |p: &[f64; 3]| -> f64 {
        t.iter()
            .zip(mr)
            .map(|(&t, &m)| {
                let r = m - model.value(p, t);
                r * r
            })
            .sum()
    };
    let mut lambda = 1e-3;
    let mut current = ss(&p);
    for _ in 0..500 {
        // Normal equations J^T J d = J^T r with a finite-difference Jacobian (z <= 3).
        let mut jtj = [[0.0; 3]; 3];
        let mut jtr = [0.0; 3];
        for (&ti, &mi) in t.iter().zip(mr) {
            let f = model.value(&p, ti);
            let mut g = [0.0; 3];
            for (j, gj) in g.iter_mut().enumerate().take(z) {
                let h = 1e-7 * p[j].abs().max(1e-7);
                let mut q = p;
                q[j] += h;
                *gj = (model.value(&q, ti) - f) / h;
            }
            for a in 0..z {
                jtr[a] += g[a] * (mi - f);
                for b in 0..z {
                    jtj[a][b] += g[a] * g[b];
                }
            }
        }
        let mut improved = false;
        for _ in 0..20 {
            let mut m = jtj;
            for (a, row) in m.iter_mut().enumerate().take(z) {
                row[a] *= 1.0 + lambda;
            }
            let Some(d) = solve(&m, &jtr, z) else {
                lambda *= 10.0;
                continue;
            };
            let mut q = p;
            for j in 0..z {
                q[j] += d[j];
            }
            let trial = ss(&q);
            if trial.is_finite() && trial <= current {
                let done = current - trial <= 1e-15 * current.max(1e-300);
                p = q;
                current = trial;
                lambda = (lambda * 0.3).max(1e-12);
                improved = !done;
                break;
            }
            lambda *= 10.0;
        }
        if !improved {
            break;
        }
    }
    p
}

/// Solves the z x z system `m d = r` by Gaussian elimination with partial pivoting.
fn solve(m: &[[f64; 3]; 3], r: &[f64; 3], z: usize) -> Option<[f64; 3]> {
    let mut a = *m;
    let mut b = *r;
    for col in 0..z {
        let pivot = (col..z).max_by(|&i, &j| a[i][col].abs().total_cmp(&a[j][col].abs()))?;
        if a[pivot][col] == 0.0 || !a[pivot][col].is_finite() {
            return None;
        }
        a.swap(col, pivot);
        b.swap(col, pivot);
        let pivot_row = a[col];
        for row in col + 1..z {
            let f = a[row][col] / pivot_row[col];
            for (x, p) in a[row][col..z].iter_mut().zip(&pivot_row[col..z]) {
                *x -= f * p;
            }
            b[row] -= f * b[col];
        }
    }
    let mut d = [0.0; 3];
    for row in (0..z).rev() {
        let s: f64 = (row + 1..z).map(|k| a[row][k] * d[k]).sum();
        d[row] = (b[row] - s) / a[row][row];
    }
    d.iter().all(|v| v.is_finite()).then_some(d)
}

/// Fits every model to moisture ratios `mr` at times `t_h` (hours) and ranks them, best
/// (smallest reduced chi-square, then RMSE) first. Models that cannot be fitted (too few
/// usable points) are left out.
pub fn fit_drying_models(t_h: &[f64], mr: &[f64]) -> Vec<ModelFit> {
    let mut fits: Vec<ModelFit> = DryingModel::ALL
        .iter()
        .filter(|m| t_h.len() > m.parameters())
        .filter_map(|&model| {
            let p0 = start(model, t_h, mr)?;
            let p = least_squares(model, t_h, mr, p0);
            let predicted: Vec<f64> = t_h.iter().map(|&t| model.value(&p, t)).collect();
            if !predicted.iter().all(|v| v.is_finite()) {
                return None;
            }
            Some(ModelFit {
                model,
                k_per_h: p[0],
                n: (model == DryingModel::Page).then_some(p[1]),
                a: matches!(
                    model,
                    DryingModel::HendersonPabis | DryingModel::Logarithmic
                )
                .then_some(p[1]),
                c: (model == DryingModel::Logarithmic).then_some(p[2]),
                goodness: goodness(mr, &predicted, model.parameters()),
            })
        })
        .collect();
    let key = |f: &ModelFit| {
        (
            f.goodness.reduced_chi_square.unwrap_or(f64::INFINITY),
            f.goodness.rmse,
        )
    };
    fits.sort_by(|a, b| {
        let (ka, kb) = (key(a), key(b));
        ka.0.total_cmp(&kb.0).then(ka.1.total_cmp(&kb.1))
    });
    fits
}

/// The slope method: Crank's first series term for a fixed surface, MR = B1 exp(-β1² D t / l²)
/// (Crank, The Mathematics of Diffusion, 2nd ed., 1975: eq. 4.18 for the sheet, 5.22 for the
/// cylinder, 6.20 for the sphere; β1 = π/2, 2.4048, π), fitted as a straight line to ln MR
/// against t (s) over its straight part, the points with MR <= 0.6 (common practice: the first
/// term alone is within about 1 % of the series there). Returns D (m²/s) for half-thickness or
/// radius `l` (m); `None` with fewer than two such points or a slope that does not fall.
pub fn slope_method(shape: Shape, l: f64, t_s: &[f64], mr: &[f64]) -> Option<f64> {
    let (x, y): (Vec<f64>, Vec<f64>) = t_s
        .iter()
        .zip(mr)
        .filter(|&(_, &m)| m > 0.0 && m <= 0.6)
        .map(|(&t, &m)| (t, m.ln()))
        .unzip();
    let (slope, _) = line(&x, &y)?;
    let beta = *eigenvalues(shape, Surface::Fixed, 1).first()?;
    (slope < 0.0).then(|| -slope * l * l / (beta * beta))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn times(n: usize, step: f64) -> Vec<f64> {
        (1..=n).map(|i| i as f64 * step).collect()
    }

    #[test]
    fn exact_page_data_gives_back_k_and_n() {
        let (k, n) = (0.31, 1.27);
        let t = times(25, 0.5);
        let mr: Vec<f64> = t.iter().map(|t| (-k * t.powf(n)).exp()).collect();
        let fits = fit_drying_models(&t, &mr);
        let page = fits
            .iter()
            .find(|f| f.model == DryingModel::Page)
            .expect("page");
        assert!((page.k_per_h - k).abs() <= 1e-4 * k, "{page:?}");
        assert!((page.n.expect("n") - n).abs() <= 1e-4 * n, "{page:?}");
        assert_eq!(fits[0].model, DryingModel::Page, "exact data ranks first");
    }

    #[test]
    fn exact_logarithmic_data_gives_back_its_three_parameters() {
        let (k, a, c) = (0.4, 0.9, 0.05);
        let t = times(30, 0.4);
        let mr: Vec<f64> = t.iter().map(|t| a * (-k * t).exp() + c).collect();
        let fit = fit_drying_models(&t, &mr)
            .into_iter()
            .find(|f| f.model == DryingModel::Logarithmic)
            .expect("logarithmic");
        assert!((fit.k_per_h - k).abs() < 1e-6, "{fit:?}");
        assert!((fit.a.expect("a") - a).abs() < 1e-6);
        assert!((fit.c.expect("c") - c).abs() < 1e-6);
    }

    #[test]
    fn the_slope_method_recovers_d_from_the_first_series_term() {
        // Pure first-term data for a slab of half-thickness l: MR = (8/π²) exp(-(π/2)² D t / l²)
        // (Crank 1975, eq. 4.18, first term).
        let (d, l) = (3.2e-10, 0.004);
        let pi = std::f64::consts::PI;
        let t: Vec<f64> = (1..=60).map(|i| i as f64 * 1800.0).collect();
        let mr: Vec<f64> = t
            .iter()
            .map(|t| 8.0 / (pi * pi) * (-(pi / 2.0).powi(2) * d * t / (l * l)).exp())
            .collect();
        let got = slope_method(Shape::Slab, l, &t, &mr).expect("D");
        assert!((got - d).abs() <= 1e-6 * d, "{got}");
    }

    #[test]
    fn fits_to_the_exact_slab_curve_match_the_reference_targets() {
        // Exact slab curve MR(T) = 1 - Mt/M∞ at T = 0.05..1.5 (30 points), fitted in T;
        // targets computed for the project's references (shared/references.md §8, flagged
        // computed, not published): Lewis k 3.06412; Henderson-Pabis k 2.52109, a 0.83138;
        // Page k 2.56992, n 0.79400.
        let series = crate::analytic::Series::new(Shape::Slab, Surface::Fixed);
        let t: Vec<f64> = (1..=30).map(|i| 0.05 * i as f64).collect();
        let mr: Vec<f64> = t.iter().map(|&t| series.moisture_ratio(t)).collect();
        let fits = fit_drying_models(&t, &mr);
        let of = |m| fits.iter().find(|f| f.model == m).expect("fitted");
        assert!((of(DryingModel::Lewis).k_per_h - 3.06412).abs() < 2e-4);
        let hp = of(DryingModel::HendersonPabis);
        assert!((hp.k_per_h - 2.52109).abs() < 2e-4, "{hp:?}");
        assert!((hp.a.expect("a") - 0.83138).abs() < 2e-4, "{hp:?}");
        let page = of(DryingModel::Page);
        assert!((page.k_per_h - 2.56992).abs() < 2e-4, "{page:?}");
        assert!((page.n.expect("n") - 0.79400).abs() < 2e-4, "{page:?}");
        assert!(
            (hp.goodness.r2.expect("r2") - 0.999659).abs() < 2e-6,
            "{hp:?}"
        );
    }

    #[test]
    fn too_few_points_or_flat_data_give_no_nan() {
        assert!(fit_drying_models(&[1.0], &[0.5]).is_empty());
        let flat = fit_drying_models(&[1.0, 2.0, 3.0, 4.0], &[0.5, 0.5, 0.5, 0.5]);
        for f in &flat {
            assert!(
                f.k_per_h.is_finite() && f.goodness.rmse.is_finite(),
                "{f:?}"
            );
            assert!(f.goodness.r2.is_none(), "{f:?}");
        }
        assert!(slope_method(Shape::Slab, 0.01, &[1.0], &[0.5]).is_none());
    }
}
