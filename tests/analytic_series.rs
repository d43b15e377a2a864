//! `Mt/Minf`, half-times and the sheet profile of `dampfront::analytic` against the series of
//! J. Crank, *The Mathematics of Diffusion*, 2nd ed., Clarendon Press, Oxford, 1975.
//!
//! Page numbers are Crank's (sheet p. 47-48, evaporation p. 60, sphere p. 91, sphere evaporation
//! p. 96); equation numbers are from memory. Unless marked otherwise, the tabulated numbers were
//! computed from the named series with 400 terms (the project's check values); 6-decimal values
//! are checked to 1e-6 and 5-decimal ones to 1e-5, i.e. to their printed rounding.

use dampfront::analytic::{Series, Shape, Surface, eigenvalues, slab_profile, weight};
use std::f64::consts::PI;

fn evap(biot: f64) -> Surface {
    Surface::Evaporation { biot }
}

fn check(got: f64, expected: f64, tol: f64, what: &str) {
    assert!(
        (got - expected).abs() <= tol,
        "{what}: got {got}, expected {expected} (tolerance {tol:e})"
    );
}

// ---------------------------------------------------------------------------------------------
// Tabulated Mt/Minf

#[test]
fn sheet_fixed_surface() {
    // Crank 1975 p. 48, eq. 4.18 (eq. no. from memory); computed with 400 terms. The short-time
    // form eq. 4.20 (from memory) gives the same to 6 decimals up to T = 0.5.
    let s = Series::new(Shape::Slab, Surface::Fixed);
    let table = [
        (0.001, 0.035682),
        (0.01, 0.112838),
        (0.05, 0.252313),
        (0.1, 0.356823),
        (0.2, 0.504088),
        (0.3, 0.613236),
        (0.5, 0.763950),
        (1.0, 0.931260),
        (2.0, 0.994170),
    ];
    for (t, m) in table {
        check(s.fraction_exchanged(t), m, 1e-6, &format!("sheet T = {t}"));
        if t <= 0.5 {
            check(
                s.short_time(t),
                m,
                1e-6,
                &format!("sheet eq. 4.20, T = {t}"),
            );
        }
    }
    // Half-time Dt/l^2 = 0.196731 (computed, eq. 4.18); with the full thickness h = 2l,
    // Dt/h^2 = 0.049183 (the sorption half-time constant 0.049, Crank ch. 10, from memory).
    check(s.half_time(), 0.196731, 1e-6, "sheet half-time");
    check(
        s.half_time() / 4.0,
        0.049183,
        1e-6,
        "sheet half-time, full thickness",
    );
}

#[test]
fn sheet_surface_evaporation() {
    // Crank 1975 p. 60 (eqs. about 4.53-4.55, from memory); computed with 400 terms.
    // L, then Mt/Minf at T = 0.05, 0.1, 0.5, 1, 2, then the half-time.
    let table: [(f64, [f64; 5], f64); 5] = [
        (0.1, [0.00492, 0.00977, 0.04743, 0.09241, 0.17611], 7.16183),
        (1.0, [0.04269, 0.08040, 0.31890, 0.52960, 0.77561], 0.91755),
        (10.0, [0.17555, 0.27388, 0.68498, 0.88650, 0.98527], 0.27422),
        (
            100.0,
            [0.24257, 0.34700, 0.75578, 0.92713, 0.99351],
            0.20463,
        ),
        (
            f64::INFINITY,
            [0.25231, 0.35682, 0.76395, 0.93126, 0.99417],
            0.19673,
        ), // eq. 4.18
    ];
    let times = [0.05, 0.1, 0.5, 1.0, 2.0];
    for (l, values, half) in table {
        let s = Series::new(Shape::Slab, evap(l));
        for (t, m) in times.iter().zip(values) {
            check(
                s.fraction_exchanged(*t),
                m,
                1e-5,
                &format!("sheet L = {l}, T = {t}"),
            );
        }
        check(
            s.half_time(),
            half,
            1e-5,
            &format!("sheet L = {l} half-time"),
        );
    }
    // As L -> inf the evaporation series is eq. 4.18: 0.763950 at T = 0.5 (computed).
    let s = Series::new(Shape::Slab, evap(1e9));
    check(s.fraction_exchanged(0.5), 0.763950, 1e-6, "sheet L = 1e9");
}

#[test]
fn cylinder() {
    // Crank 1975 ch. 5, fixed surface (eq. 5.23 from memory); computed.
    let s = Series::new(Shape::Cylinder, Surface::Fixed);
    let table = [
        (0.01, 0.215474),
        (0.05, 0.452121),
        (0.1, 0.605824),
        (0.2, 0.782148),
        (0.5, 0.961621),
        (1.0, 0.997870),
    ];
    for (t, m) in table {
        check(
            s.fraction_exchanged(t),
            m,
            1e-6,
            &format!("cylinder T = {t}"),
        );
    }
    check(s.half_time(), 0.063058, 1e-6, "cylinder half-time"); // computed
    // Surface evaporation (Crank ch. 5, eqs. about 5.50-5.51, from memory); computed.
    // L, Mt/Minf at T = 0.1 and 0.5, half-time.
    let table = [
        (0.1, 0.01948, 0.09312, 3.55205),
        (1.0, 0.15673, 0.55262, 0.42950),
        (10.0, 0.49002, 0.92523, 0.10384),
        (100.0, 0.59315, 0.95856, 0.06725),
    ];
    for (l, m1, m5, half) in table {
        let s = Series::new(Shape::Cylinder, evap(l));
        check(
            s.fraction_exchanged(0.1),
            m1,
            1e-5,
            &format!("cylinder L = {l}, T = 0.1"),
        );
        check(
            s.fraction_exchanged(0.5),
            m5,
            1e-5,
            &format!("cylinder L = {l}, T = 0.5"),
        );
        check(
            s.half_time(),
            half,
            1e-5,
            &format!("cylinder L = {l} half-time"),
        );
    }
}

#[test]
fn sphere() {
    // Crank 1975 p. 91, eq. 6.20 (eq. no. from memory); computed.
    let s = Series::new(Shape::Sphere, Surface::Fixed);
    let table = [
        (0.001, 0.104047),
        (0.01, 0.308514),
        (0.05, 0.606940),
        (0.1, 0.770479),
        (0.2, 0.915496),
        (0.5, 0.995628),
    ];
    for (t, m) in table {
        check(s.fraction_exchanged(t), m, 1e-6, &format!("sphere T = {t}"));
    }
    check(s.half_time(), 0.030547, 1e-6, "sphere half-time"); // computed
    // The two-term short-time form 6 sqrt(T/pi) - 3T (Crank ch. 6, from memory) is the exact
    // short-time series without its ierfc terms: it agrees to 6 decimals up to T = 0.05 and
    // gives 0.770474 against 0.770479 at T = 0.1 (computed).
    for t in [0.001, 0.01, 0.05] {
        let two_term = 6.0 * (t / PI).sqrt() - 3.0 * t;
        check(
            s.fraction_exchanged(t),
            two_term,
            1e-6,
            &format!("sphere two-term, T = {t}"),
        );
    }
    check(
        6.0 * (0.1 / PI).sqrt() - 0.3,
        0.770474,
        1e-6,
        "two-term form at T = 0.1",
    );
    // Surface evaporation (Crank 1975 p. 96, eqs. about 6.40-6.41, from memory); computed.
    // L, Mt/Minf at T = 0.1 and 0.5, half-time (NaN: not tabulated).
    let table = [
        (0.1, 0.02912, 0.13688, 2.35652),
        (0.5, 0.13009, f64::NAN, f64::NAN),
        (1.0, 0.22864, 0.71300, 0.27504),
        (2.0, 0.36484, f64::NAN, f64::NAN),
        (10.0, 0.65399, 0.98637, 0.05804),
        (100.0, 0.75882, 0.99503, 0.03339),
    ];
    for (l, m1, m5, half) in table {
        let s = Series::new(Shape::Sphere, evap(l));
        check(
            s.fraction_exchanged(0.1),
            m1,
            1e-5,
            &format!("sphere L = {l}, T = 0.1"),
        );
        if !m5.is_nan() {
            check(
                s.fraction_exchanged(0.5),
                m5,
                1e-5,
                &format!("sphere L = {l}, T = 0.5"),
            );
            check(
                s.half_time(),
                half,
                1e-5,
                &format!("sphere L = {l} half-time"),
            );
        }
    }
}

#[test]
fn heat_transfer_notation_agrees() {
    // Volume-mean temperature 1 - Q/Q0 from Incropera & DeWitt's exact series equals the
    // moisture ratio 1 - Mt/Minf of Crank's evaporation series (computed, 6 decimals).
    let cases = [
        (1.0, 0.5, [0.681105, 0.447384, 0.287001]),
        (10.0, 0.2, [0.583262, 0.311676, 0.152439]),
    ];
    for (bi, fo, values) in cases {
        for (shape, v) in [Shape::Slab, Shape::Cylinder, Shape::Sphere]
            .into_iter()
            .zip(values)
        {
            let s = Series::new(shape, evap(bi));
            check(
                s.moisture_ratio(fo),
                v,
                1e-6,
                &format!("{shape:?} Bi = {bi}, Fo = {fo}"),
            );
        }
    }
}

#[test]
fn published_worked_values() {
    // Docstring examples of the polykin library (HugoMVale/polykin,
    // src/polykin/transport/diffusion.py), which implements Crank's formulas with his page
    // numbers; the exact series (computed, 400 terms) agrees to 10 digits.
    let sheet = Series::new(Shape::Slab, Surface::Fixed);
    check(
        sheet.fraction_exchanged(0.125),
        0.39892798988456807,
        1e-10,
        "sheet, T = 0.125",
    );
    let sheet = Series::new(Shape::Slab, evap(20.0));
    check(
        sheet.fraction_exchanged(0.125),
        0.3528861780625614,
        1e-10,
        "sheet, L = 20",
    );
    let sphere = Series::new(Shape::Sphere, Surface::Fixed);
    check(
        sphere.fraction_exchanged(0.1),
        0.7704787380259631,
        1e-10,
        "sphere, T = 0.1",
    );
    // Sphere with convection, L = 10, T = 0.1: the docstring's 0.6539883120664335 is 1.5e-7 above
    // the exact series 0.6539881649 (computed; the library's roots are less precise), so the
    // docstring value is checked to 1e-6 only and the exact value to 1e-9.
    let sphere = Series::new(Shape::Sphere, evap(10.0));
    check(
        sphere.fraction_exchanged(0.1),
        0.6539883120664335,
        1e-6,
        "sphere, L = 10 (docstring)",
    );
    check(
        sphere.fraction_exchanged(0.1),
        0.6539881649,
        1e-9,
        "sphere, L = 10 (computed)",
    );
}

// ---------------------------------------------------------------------------------------------
// Properties of the series and their short-time forms

const SURFACES: [Surface; 9] = [
    Surface::Fixed,
    Surface::Evaporation { biot: 1e-4 },
    Surface::Evaporation { biot: 0.1 },
    Surface::Evaporation { biot: 0.5 },
    Surface::Evaporation { biot: 1.0 },
    Surface::Evaporation { biot: 3.0 },
    Surface::Evaporation { biot: 50.0 },
    Surface::Evaporation { biot: 1e3 },
    Surface::Evaporation { biot: 1e6 },
];
const SHAPES: [Shape; 3] = [Shape::Slab, Shape::Cylinder, Shape::Sphere];

#[test]
fn short_and_long_time_forms_agree_at_the_crossover() {
    // Both forms describe the same solution; at the crossover each is accurate to 1e-12 or better
    // (the cylinder with evaporation is the tightest, its short-time form being off by ~4e-13
    // there), so they must agree to 1e-12.
    for shape in SHAPES {
        for surface in SURFACES {
            let s = Series::new(shape, surface);
            let tc = s.crossover();
            let (short, long) = (s.short_time(tc), s.long_time(tc));
            check(
                short,
                long,
                1e-12,
                &format!("{shape:?} {surface:?} at T = {tc:e}"),
            );
            // No visible step in fraction_exchanged where it switches.
            let below = s.fraction_exchanged(tc * (1.0 - 1e-13));
            check(
                below,
                s.fraction_exchanged(tc),
                1e-12,
                "step at the crossover",
            );
        }
    }
}

#[test]
fn fraction_exchanged_against_many_root_series() {
    // The long series with 40 000 roots is exact to round-off for T >= 5e-9 (beta^2 T > 50);
    // fraction_exchanged, with its short-time forms, must match it everywhere.
    for shape in SHAPES {
        for surface in SURFACES {
            let reference = Series::with_terms(shape, surface, 40_000);
            let s = Series::new(shape, surface);
            for i in 0..=64 {
                let t = 10f64.powf(-8.0 + 8.5 * i as f64 / 64.0);
                let tol = 1e-12;
                check(
                    s.fraction_exchanged(t),
                    reference.long_time(t),
                    tol,
                    &format!("{shape:?} {surface:?} T = {t:e}"),
                );
            }
        }
    }
}

#[test]
fn weights_sum_to_one_at_time_zero() {
    // Mt/Minf = 0 at T = 0, so the series weights sum to 1 (computed check, residual 1e-10).
    // Evaporation: the weights fall as L^2/beta^4, so 100 000 roots leave a tail below 1e-12.
    for shape in SHAPES {
        for l in [0.1, 1.0, 10.0, 100.0] {
            let roots = eigenvalues(shape, evap(l), 100_000);
            let sum: f64 = roots.iter().rev().map(|&b| weight(shape, l, b)).sum();
            check(
                sum,
                1.0,
                1e-10,
                &format!("{shape:?} L = {l}: sum of weights"),
            );
        }
    }
    // Fixed surface: weights 2/beta^2, 4/beta^2, 6/beta^2, which fall only as 1/n^2; add the tail
    // from n = N+1 on by the midpoint rule, sum_{n>N} 1/(n - a)^2 ~ 1/(N + 1/2 - a).
    let n = 20_000;
    for (shape, a, w) in [
        (Shape::Slab, 0.5, 2.0),
        (Shape::Cylinder, 0.25, 4.0),
        (Shape::Sphere, 0.0, 6.0),
    ] {
        let roots = eigenvalues(shape, Surface::Fixed, n);
        let sum: f64 = roots
            .iter()
            .rev()
            .map(|&b| weight(shape, f64::INFINITY, b))
            .sum();
        let tail = w / (PI * PI) / (n as f64 + 0.5 - a);
        check(
            sum + tail,
            1.0,
            1e-10,
            &format!("{shape:?} fixed: sum of weights"),
        );
    }
    // And the weights held by each Series start the same way.
    for shape in SHAPES {
        let s = Series::new(shape, evap(2.0));
        check(s.long_time(0.0), 0.0, 1e-4, "truncated series at T = 0");
        assert_eq!(s.fraction_exchanged(0.0), 0.0);
    }
}

#[test]
fn large_biot_tends_to_the_fixed_surface() {
    // The gap to the fixed surface shrinks like 1/L (Crank ch. 4: L -> inf is the fixed case).
    for shape in SHAPES {
        let fixed = Series::new(shape, Surface::Fixed);
        let mut last_gap = f64::INFINITY;
        for l in [1e3, 1e4, 1e5, 1e6] {
            let s = Series::new(shape, evap(l));
            let mut gap: f64 = 0.0;
            for t in [1e-6, 1e-4, 1e-2, 0.05, 0.2, 1.0] {
                let d = fixed.fraction_exchanged(t) - s.fraction_exchanged(t);
                assert!(d > 0.0, "{shape:?} L = {l}, T = {t}: evaporation is slower");
                gap = gap.max(d);
            }
            assert!(gap * l < 5.0, "{shape:?} L = {l}: gap {gap:e}");
            assert!(
                gap < last_gap / 5.0,
                "{shape:?} L = {l}: gap must shrink with L"
            );
            last_gap = gap;
            let half_gap = s.half_time() - fixed.half_time();
            assert!(half_gap > 0.0 && half_gap * l < 5.0, "{shape:?} L = {l}");
        }
        // Infinite L is the fixed surface.
        let inf = Series::new(shape, evap(f64::INFINITY));
        for t in [1e-5, 0.01, 0.3] {
            assert_eq!(inf.fraction_exchanged(t), fixed.fraction_exchanged(t));
        }
    }
}

#[test]
fn small_biot_tends_to_the_lumped_body() {
    // For L -> 0 the inside is uniform and Mt/Minf = 1 - exp(-(m+1) L T), m = 0, 1, 2, so
    // T_half -> ln 2 / ((m+1) L) (limit of the series, computed). The sheet at L = 0.1 gives
    // 7.16 against ln 2 / L = 6.93, as the internal resistance is not yet negligible.
    // (m+1 is the surface-to-volume ratio times l.)
    for (shape, area) in [
        (Shape::Slab, 1.0),
        (Shape::Cylinder, 2.0),
        (Shape::Sphere, 3.0),
    ] {
        for l in [1e-3, 1e-5, 1e-8] {
            let s = Series::new(shape, evap(l));
            let lumped = 2f64.ln() / (area * l);
            let rel = s.half_time() / lumped - 1.0;
            assert!(
                rel > 0.0 && rel < l,
                "{shape:?} L = {l}: relative gap {rel:e}"
            );
            // Early on the uptake is the surface flux: (m+1) L T.
            let t = 1e-3;
            check(
                s.fraction_exchanged(t) / (area * l * t),
                1.0,
                1e-3,
                "initial rate",
            );
        }
    }
}

#[test]
fn rises_monotonically_from_zero_to_one() {
    for shape in SHAPES {
        for surface in SURFACES {
            let s = Series::new(shape, surface);
            let mut last = 0.0;
            for i in 1..=400 {
                let t = 10f64.powf(-10.0 + 14.0 * i as f64 / 400.0);
                let f = s.fraction_exchanged(t);
                assert!(
                    f >= last && f <= 1.0,
                    "{shape:?} {surface:?} T = {t:e}: {f}"
                );
                check(s.moisture_ratio(t), 1.0 - f, 0.0, "moisture ratio");
                last = f;
            }
            assert_eq!(s.fraction_exchanged(f64::INFINITY), 1.0);
            let half = s.half_time();
            check(s.fraction_exchanged(half), 0.5, 1e-12, "at the half-time");
            let t90 = s.time_to_reach(0.9);
            check(s.fraction_exchanged(t90), 0.9, 1e-12, "at 90 %");
        }
    }
}

#[test]
fn bad_input_gives_nan_not_a_panic() {
    // An absurd number of terms is capped at 1 000 000, not attempted.
    let capped = Series::with_terms(Shape::Slab, evap(1.0), usize::MAX);
    assert_eq!(capped.roots().len(), 1_000_000);
    for shape in SHAPES {
        let s = Series::new(shape, Surface::Fixed);
        for t in [f64::NAN, -1.0, -1e-300, f64::NEG_INFINITY] {
            assert!(s.fraction_exchanged(t).is_nan());
            assert!(s.moisture_ratio(t).is_nan());
            assert!(s.short_time(t).is_nan() && s.long_time(t).is_nan());
        }
        // Short-time forms are not evaluated at long times.
        assert!(s.short_time(1.5).is_nan() && s.short_time(f64::INFINITY).is_nan());
        assert!(s.short_time(1.0).is_finite());

        for f in [0.0, 1.0, -0.5, 2.0, f64::NAN] {
            assert!(s.time_to_reach(f).is_nan());
        }
        for bad in [-1.0, f64::NAN, f64::NEG_INFINITY] {
            let s = Series::new(shape, evap(bad));
            assert!(s.fraction_exchanged(0.1).is_nan());
            assert!(s.half_time().is_nan());
            assert!(s.roots().is_empty());
        }
        // A Biot number of 0 exchanges nothing.
        let s = Series::new(shape, evap(0.0));
        assert_eq!(s.fraction_exchanged(1.0), 0.0);
        assert_eq!(s.half_time(), f64::INFINITY);
    }
}

// ---------------------------------------------------------------------------------------------
// Sheet profile

/// One Simpson panel: end points, their values and the value at the middle.
#[derive(Clone, Copy)]
struct Panel {
    a: f64,
    b: f64,
    fa: f64,
    fm: f64,
    fb: f64,
}

impl Panel {
    fn simpson(&self) -> f64 {
        (self.b - self.a) / 6.0 * (self.fa + 4.0 * self.fm + self.fb)
    }
}

/// Adaptive Simpson quadrature of `f` on `[a, b]` to an absolute tolerance `tol`
/// (with Richardson's correction on each accepted panel).
fn integrate(f: &dyn Fn(f64) -> f64, a: f64, b: f64, tol: f64) -> f64 {
    fn step(f: &dyn Fn(f64) -> f64, p: Panel, tol: f64, depth: u32) -> f64 {
        let m = 0.5 * (p.a + p.b);
        let left = Panel {
            a: p.a,
            b: m,
            fa: p.fa,
            fm: f(0.5 * (p.a + m)),
            fb: p.fm,
        };
        let right = Panel {
            a: m,
            b: p.b,
            fa: p.fm,
            fm: f(0.5 * (m + p.b)),
            fb: p.fb,
        };
        let (l, r) = (left.simpson(), right.simpson());
        let delta = l + r - p.simpson();
        if depth == 0 || delta.abs() <= 15.0 * tol {
            l + r + delta / 15.0
        } else {
            step(f, left, 0.5 * tol, depth - 1) + step(f, right, 0.5 * tol, depth - 1)
        }
    }
    let whole = Panel {
        a,
        b,
        fa: f(a),
        fm: f(0.5 * (a + b)),
        fb: f(b),
    };
    step(f, whole, tol, 40)
}

const PROFILE_SURFACES: [Surface; 6] = [
    Surface::Fixed,
    Surface::Evaporation { biot: 0.1 },
    Surface::Evaporation { biot: 1.0 },
    Surface::Evaporation { biot: 10.0 },
    Surface::Evaporation { biot: 100.0 },
    Surface::Evaporation { biot: 1e5 },
];
const PROFILE_TIMES: [f64; 8] = [1e-6, 1e-4, 1e-3, 0.01, 0.05, 0.15, 0.5, 2.0];

#[test]
fn profile_mean_is_the_fraction_exchanged() {
    // Mt/Minf is the mean of the profile over the sheet (Crank p. 47-48 and p. 60); the profile
    // is symmetric, so the mean is its integral over [0, 1].
    for surface in PROFILE_SURFACES {
        let series = Series::new(Shape::Slab, surface);
        for t in PROFILE_TIMES {
            let f = |xi: f64| slab_profile(surface, t, xi);
            // Split near the face, where a thin layer of width ~sqrt(T) holds the change.
            let split = (1.0 - 20.0 * t.sqrt()).max(0.0);
            let mean = integrate(&f, 0.0, split, 1e-12) + integrate(&f, split, 1.0, 1e-12);
            check(
                mean,
                series.fraction_exchanged(t),
                1e-8,
                &format!("{surface:?} T = {t}"),
            );
        }
    }
}

#[test]
fn profile_is_symmetric_and_bounded() {
    for surface in PROFILE_SURFACES {
        for t in PROFILE_TIMES {
            let mut last = -1.0;
            for i in 0..=100 {
                let xi = i as f64 / 100.0;
                let c = slab_profile(surface, t, xi);
                check(slab_profile(surface, t, -xi), c, 1e-15, "symmetric");
                assert!(
                    (-1e-15..=1.0 + 1e-15).contains(&c),
                    "{surface:?} T = {t} xi = {xi}: {c}"
                );
                assert!(c >= last - 1e-15, "rises towards the face");
                last = c;
            }
        }
    }
}

#[test]
fn fixed_surface_profile() {
    // At the face the profile is the surface value, 1, at every T > 0 (Crank p. 47).
    for t in [1e-10, 1e-6, 1e-3, 0.05, 0.0999, 0.1, 0.5, 10.0] {
        for xi in [-1.0, 1.0] {
            check(
                slab_profile(Surface::Fixed, t, xi),
                1.0,
                1e-14,
                &format!("face, T = {t}"),
            );
        }
    }
    // The Fourier series of Crank p. 47 (eq. 4.17 from memory), summed here directly with
    // 20 000 terms, against both forms used by slab_profile.
    for t in [1e-3, 0.02, 0.08, 0.12, 0.4] {
        for xi in [0.0, 0.3, 0.7, 0.95, 0.99] {
            let mut sum = 0.0;
            for n in (0..20_000).rev() {
                let k = (2 * n + 1) as f64;
                let sign = if n % 2 == 0 { 1.0 } else { -1.0 };
                sum += sign / k * (-k * k * PI * PI * t / 4.0).exp() * (k * PI * xi / 2.0).cos();
            }
            let fourier = 1.0 - 4.0 / PI * sum;
            let got = slab_profile(Surface::Fixed, t, xi);
            check(got, fourier, 1e-12, &format!("T = {t}, xi = {xi}"));
        }
    }
}

#[test]
fn evaporation_profile() {
    // The series of Crank ch. 4, surface evaporation, summed here with 20 000 roots:
    // 1 - sum 2 L cos(beta xi) exp(-beta^2 T) / ((beta^2 + L^2 + L) cos beta).
    for l in [0.1, 1.0, 10.0, 100.0] {
        let roots = eigenvalues(Shape::Slab, evap(l), 20_000);
        for t in [1e-3, 0.015, 0.025, 0.3] {
            for xi in [0.0, 0.5, 0.9, 1.0] {
                let sum: f64 = roots
                    .iter()
                    .rev()
                    .map(|&b| {
                        2.0 * l * (b * xi).cos() * (-b * b * t).exp()
                            / ((b * b + l * l + l) * b.cos())
                    })
                    .sum();
                let got = slab_profile(evap(l), t, xi);
                check(
                    got,
                    1.0 - sum,
                    1e-12,
                    &format!("L = {l}, T = {t}, xi = {xi}"),
                );
            }
        }
    }
    // Centre of a wall at Bi = 1, Fo = 0.2: the full series gives theta = 0.950642, the one-term
    // approximation 0.965141 (computed; Incropera & DeWitt's one-term form, Table 5.1 values).
    check(
        1.0 - slab_profile(evap(1.0), 0.2, 0.0),
        0.950642,
        1e-6,
        "centre, Bi = 1",
    );
    let (z, c1) = dampfront::analytic::one_term_coefficient(Shape::Slab, 1.0);
    check(
        c1 * (-z * z * 0.2).exp(),
        0.965141,
        1e-6,
        "one-term centre, Bi = 1",
    );
}

#[test]
fn evaporation_profile_obeys_the_surface_condition() {
    // Surface evaporation (Crank ch. 4): -D dC/dx = alpha (C - C_inf) at x = l, i.e.
    // dC/dxi = L (1 - C) at xi = 1 for the scaled C. One-sided second-order difference.
    for l in [0.1, 1.0, 10.0, 100.0] {
        for t in [1e-3_f64, 0.01, 0.019, 0.021, 0.05, 0.5] {
            let h = 1e-3 * t.sqrt().min(0.1);
            let c = |xi: f64| slab_profile(evap(l), t, xi);
            let slope = (3.0 * c(1.0) - 4.0 * c(1.0 - h) + c(1.0 - 2.0 * h)) / (2.0 * h);
            let robin = l * (1.0 - c(1.0));
            check(slope / robin, 1.0, 1e-5, &format!("L = {l}, T = {t}"));
        }
    }
}

#[test]
fn profile_limits_and_bad_input() {
    // L -> inf gives the fixed profile; T = 0 the initial state; T = inf equilibrium.
    for t in [1e-4, 0.01, 0.3] {
        for xi in [0.0, 0.5, 0.99] {
            let gap = slab_profile(Surface::Fixed, t, xi) - slab_profile(evap(1e9), t, xi);
            assert!(gap.abs() < 1e-6, "T = {t}, xi = {xi}: {gap:e}");
        }
    }
    assert_eq!(slab_profile(Surface::Fixed, 0.0, 0.5), 0.0);
    assert_eq!(slab_profile(Surface::Fixed, 0.0, 1.0), 1.0);
    assert_eq!(slab_profile(evap(2.0), 0.0, 1.0), 0.0);
    assert_eq!(slab_profile(evap(2.0), f64::INFINITY, 0.0), 1.0);
    assert_eq!(slab_profile(evap(0.0), 1.0, 0.0), 0.0);
    for (t, xi) in [
        (f64::NAN, 0.0),
        (-1.0, 0.0),
        (0.1, 1.5),
        (0.1, -1.01),
        (0.1, f64::NAN),
    ] {
        assert!(slab_profile(Surface::Fixed, t, xi).is_nan());
        assert!(slab_profile(evap(1.0), t, xi).is_nan());
    }
    assert!(slab_profile(evap(-2.0), 0.1, 0.0).is_nan());
}
