//! Eigenvalue roots and one-term coefficients of `dampfront::analytic` against published tables.
//!
//! Sources: J. Crank, *The Mathematics of Diffusion*, 2nd ed., Oxford 1975 (Table 4.1 and the
//! eigenvalue equations of ch. 4-6); F.P. Incropera & D.P. DeWitt, *Fundamentals of Heat and Mass
//! Transfer* (5th-7th ed.), Table 5.1. The numbers are the project's computed check values: the
//! printed tables have 4 decimals, so the tolerance is 1e-4 (2e-4 for Table 5.1, whose last digit
//! differs from the exact value in a few cells).

use dampfront::analytic::{
    Shape, Surface, bessel_j0_zero, bessel_j1_zero, eigenvalues, one_term_coefficient,
};
use std::f64::consts::PI;

fn evap(biot: f64) -> Surface {
    Surface::Evaporation { biot }
}

fn assert_roots(shape: Shape, surface: Surface, expected: &[f64], tol: f64) {
    let got = eigenvalues(shape, surface, expected.len());
    for (n, (g, e)) in got.iter().zip(expected).enumerate() {
        assert!(
            (g - e).abs() <= tol,
            "{shape:?} {surface:?} root {}: got {g}, expected {e}",
            n + 1
        );
    }
}

// The tables are 4-decimal figures, some of which look like pi/2 or pi to clippy.
#[allow(clippy::approx_constant)]
#[test]
fn slab_roots_crank_table_4_1() {
    // Crank 1975, Table 4.1, roots of beta tan beta = L (layout of the table from memory; the
    // numbers computed from the equation, Crank p. 60). The remembered entries for L = 0.1, 1, 10
    // and beta_1 at L = 100 agree with these to 4 decimals.
    let table: [(f64, [f64; 6]); 9] = [
        (0.01, [0.0998, 3.1448, 6.2848, 9.4258, 12.5672, 15.7086]), // computed
        (0.1, [0.3111, 3.1731, 6.2991, 9.4354, 12.5743, 15.7143]), // computed; Table 4.1 from memory
        (0.5, [0.6533, 3.2923, 6.3616, 9.4775, 12.6060, 15.7397]), // computed
        (1.0, [0.8603, 3.4256, 6.4373, 9.5293, 12.6453, 15.7713]), // computed; Table 4.1 from memory
        (2.0, [1.0769, 3.6436, 6.5783, 9.6296, 12.7223, 15.8336]), // computed
        (5.0, [1.3138, 4.0336, 6.9096, 9.8928, 12.9352, 16.0107]), // computed
        (10.0, [1.4289, 4.3058, 7.2281, 10.2003, 13.2142, 16.2594]), // computed; Table 4.1 from memory
        (100.0, [1.5552, 4.6658, 7.7764, 10.8871, 13.9981, 17.1093]), // computed
        (
            f64::INFINITY,
            [1.5708, 4.7124, 7.8540, 10.9956, 14.1372, 17.2788],
        ), // (n - 1/2) pi
    ];
    for (l, roots) in table {
        assert_roots(Shape::Slab, evap(l), &roots, 1e-4);
    }
    // The fixed surface is the same as L = inf.
    assert_roots(Shape::Slab, Surface::Fixed, &table[8].1, 1e-4);
}

#[test]
fn cylinder_roots() {
    // Zeros of J0 (Crank 1975, ch. 5, fixed surface); numbers computed.
    let j0 = [2.4048, 5.5201, 8.6537, 11.7915, 14.9309, 18.0711];
    assert_roots(Shape::Cylinder, Surface::Fixed, &j0, 1e-4);
    for (n, z) in j0.iter().enumerate() {
        assert!((bessel_j0_zero(n + 1) - z).abs() < 1e-4);
    }
    // Roots of beta J1(beta) = L J0(beta) (Crank 1975, ch. 5, surface evaporation); computed.
    let table: [(f64, [f64; 6]); 4] = [
        (0.1, [0.4417, 3.8577, 7.0298, 10.1833, 13.3312, 16.4767]),
        (1.0, [1.2558, 4.0795, 7.1558, 10.2710, 13.3984, 16.5312]),
        (10.0, [2.1795, 5.0332, 7.9569, 10.9363, 13.9580, 17.0099]),
        (100.0, [2.3809, 5.4652, 8.5678, 11.6747, 14.7834, 17.8931]),
    ];
    for (l, roots) in table {
        assert_roots(Shape::Cylinder, evap(l), &roots, 1e-4);
    }
}

#[allow(clippy::approx_constant)] // 4-decimal table figures
#[test]
fn sphere_roots() {
    // Roots of beta cot beta = 1 - L (Crank 1975, p. 96); computed.
    let table: [(f64, [f64; 6]); 6] = [
        (0.1, [0.5423, 4.5157, 7.7382, 10.9133, 14.0733, 17.2266]),
        (0.5, [1.1656, 4.6042, 7.7899, 10.9499, 14.1017, 17.2498]),
        (1.0, [1.5708, 4.7124, 7.8540, 10.9956, 14.1372, 17.2788]),
        (2.0, [2.0288, 4.9132, 7.9787, 11.0855, 14.2074, 17.3364]),
        (10.0, [2.8363, 5.7172, 8.6587, 11.6532, 14.6869, 17.7481]),
        (100.0, [3.1102, 6.2204, 9.3308, 12.4414, 15.5521, 18.6632]),
    ];
    for (l, roots) in table {
        assert_roots(Shape::Sphere, evap(l), &roots, 1e-4);
    }
    // Fixed surface: n pi (Crank 1975, p. 91).
    let fixed: Vec<f64> = (1..=6).map(|n| n as f64 * PI).collect();
    assert_roots(Shape::Sphere, Surface::Fixed, &fixed, 1e-14);
}

#[test]
fn sphere_at_biot_one_has_exact_roots() {
    // beta cot beta = 0 gives beta_n = (n - 1/2) pi exactly.
    let roots = eigenvalues(Shape::Sphere, evap(1.0), 50);
    for (n, b) in roots.iter().enumerate() {
        assert_eq!(*b, (n as f64 + 0.5) * PI);
    }
    // Just either side of 1 the roots move continuously through these values.
    for l in [1.0 - 1e-12, 1.0 + 1e-12] {
        let near = eigenvalues(Shape::Sphere, evap(l), 50);
        for (a, b) in near.iter().zip(&roots) {
            assert!((a - b).abs() < 1e-10, "L = {l}: {a} vs {b}");
        }
    }
}

/// The Newton step `f / f'` of the eigenvalue equation at `b`: how far `b` is from its root.
fn newton_step(shape: Shape, l: f64, b: f64) -> f64 {
    let (f, df) = match shape {
        Shape::Slab => (
            b * b.sin() - l * b.cos(),
            b.sin() + b * b.cos() + l * b.sin(),
        ),
        Shape::Cylinder => (
            b * libm::j1(b) - l * libm::j0(b),
            b * libm::j0(b) + l * libm::j1(b),
        ),
        Shape::Sphere => (b * b.cos() - (1.0 - l) * b.sin(), l * b.cos() - b * b.sin()),
    };
    f / df
}

#[test]
fn roots_solve_their_equations_and_interlace() {
    for shape in [Shape::Slab, Shape::Cylinder, Shape::Sphere] {
        for l in [1e-6, 0.01, 0.3, 1.0, 3.0, 47.0, 1e3, 1e6] {
            let roots = eigenvalues(shape, evap(l), 3000);
            let mut prev = 0.0;
            for (i, &b) in roots.iter().enumerate() {
                let n = (i + 1) as f64;
                assert!(b > prev, "{shape:?} L = {l}: roots must increase");
                prev = b;
                // Within a few ulp of the true root.
                let step = newton_step(shape, l, b);
                assert!(
                    step.abs() <= 1e-15 * b,
                    "{shape:?} L = {l} n = {n}: step {step:e}"
                );
                // One root in each interval (Crank ch. 4-6).
                let (lo, hi) = match shape {
                    Shape::Slab => ((n - 1.0) * PI, (n - 0.5) * PI),
                    Shape::Cylinder => (bessel_j1_zero(i), bessel_j0_zero(i + 1)),
                    Shape::Sphere if l < 1.0 => ((n - 1.0) * PI, (n - 0.5) * PI),
                    Shape::Sphere => ((n - 0.5) * PI, n * PI),
                };
                assert!(
                    lo <= b && b <= hi,
                    "{shape:?} L = {l} n = {n}: {b} not in [{lo}, {hi}]"
                );
            }
        }
    }
}

#[test]
fn tiny_biot_first_root_follows_its_taylor_series() {
    // From the Taylor series of the equations (computed): slab beta^2 = L (1 - L/3),
    // cylinder beta^2 = 2L (1 - L/4), sphere beta^2 = 3L (1 - L/5), each + O(L^3).
    for l in [1e-4, 1e-8, 1e-30, 1e-300] {
        let cases = [
            (Shape::Slab, 1.0, 3.0),
            (Shape::Cylinder, 2.0, 4.0),
            (Shape::Sphere, 3.0, 5.0),
        ];
        for (shape, k, d) in cases {
            let b = eigenvalues(shape, evap(l), 2)[0];
            let expected = (k * l * (1.0 - l / d)).sqrt();
            assert!(
                (b / expected - 1.0).abs() < 1e-14 + l * l,
                "{shape:?} L = {l:e}: {b:e} vs {expected:e}"
            );
        }
    }
}

#[test]
fn large_biot_roots_tend_to_the_fixed_surface() {
    // For large L (expanding the equations about the fixed roots f, computed): slab
    // beta = f L/(L + 1) and sphere beta = f (L - 1)/L, both + O(f^3/L^3); cylinder
    // beta = f L/(L + 1) + O(f/L^2).
    for shape in [Shape::Slab, Shape::Cylinder, Shape::Sphere] {
        let fixed = eigenvalues(shape, Surface::Fixed, 20);
        for l in [1e3, 1e4, 1e5, 1e6] {
            let roots = eigenvalues(shape, evap(l), 20);
            for (b, f) in roots.iter().zip(&fixed) {
                let approx = match shape {
                    Shape::Sphere => f * (l - 1.0) / l,
                    _ => f * l / (l + 1.0),
                };
                assert!(b < f);
                let tol = f / (l * l) + f * f * f / (l * l * l);
                assert!(
                    (b - approx).abs() < tol,
                    "{shape:?} L = {l}: {b} vs {approx}"
                );
            }
        }
        // Beyond double precision the roots are the fixed ones.
        let huge = eigenvalues(shape, evap(1e300), 20);
        let inf = eigenvalues(shape, evap(f64::INFINITY), 20);
        for ((h, f), i) in huge.iter().zip(&fixed).zip(&inf) {
            assert!((h / f - 1.0).abs() < 1e-15, "{shape:?}");
            assert_eq!(i, f);
        }
    }
}

#[test]
fn zero_and_invalid_biot_numbers() {
    // L = 0: beta tan beta = 0 -> 0, pi, 2 pi; beta J1 = 0 -> 0, zeros of J1;
    // beta cot beta = 1 -> 0, roots of tan beta = beta (4.4934..., standard).
    let slab = eigenvalues(Shape::Slab, evap(0.0), 3);
    assert_eq!(slab[0], 0.0);
    assert!((slab[1] - PI).abs() < 1e-14 && (slab[2] - 2.0 * PI).abs() < 1e-14);
    let cyl = eigenvalues(Shape::Cylinder, evap(0.0), 2);
    assert_eq!(cyl[0], 0.0);
    assert!((cyl[1] - 3.8317).abs() < 1e-4); // first zero of J1, standard tables
    let sph = eigenvalues(Shape::Sphere, evap(0.0), 2);
    assert_eq!(sph[0], 0.0);
    assert!((sph[1] - 4.4934).abs() < 1e-4); // first positive root of tan x = x, standard
    for bad in [-1.0, f64::NAN, f64::NEG_INFINITY] {
        for shape in [Shape::Slab, Shape::Cylinder, Shape::Sphere] {
            let r = eigenvalues(shape, evap(bad), 4);
            assert_eq!(r.len(), 4);
            assert!(r.iter().all(|b| b.is_nan()));
            let (z, c) = one_term_coefficient(shape, bad);
            assert!(z.is_nan() && c.is_nan());
        }
    }
    assert!(eigenvalues(Shape::Slab, Surface::Fixed, 0).is_empty());
}

#[allow(clippy::approx_constant)] // 4-decimal table figures
#[test]
fn incropera_table_5_1() {
    // Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, Table 5.1 (5th-7th ed.; table
    // number from memory): Bi, then (zeta_1, C1) for the plane wall, infinite cylinder, sphere.
    // The numbers are computed from the eigenvalue equations and the C1 formulas; the printed
    // table was not available. Where the remembered printed value differs (cylinder Bi = 2:
    // zeta_1 1.5995; cylinder C1 at Bi = 50 and 100 remembered one row out of step; the Bi = inf
    // row: wall C1 1.2733, cylinder 2.4050 / 1.6018, sphere 3.1415) the computed value is used,
    // and the tolerance of 2e-4 covers the printed rounding.
    #[rustfmt::skip]
    let table: [(f64, [(f64, f64); 3]); 13] = [
        (0.01, [(0.0998, 1.0017), (0.1412, 1.0025), (0.1730, 1.0030)]), // computed
        (0.1, [(0.3111, 1.0161), (0.4417, 1.0246), (0.5423, 1.0298)]), // computed
        (0.5, [(0.6533, 1.0701), (0.9408, 1.1143), (1.1656, 1.1441)]), // computed
        (1.0, [(0.8603, 1.1191), (1.2558, 1.2071), (1.5708, 1.2732)]), // computed
        (2.0, [(1.0769, 1.1785), (1.5994, 1.3384), (2.0288, 1.4793)]), // computed (cyl. zeta 1.599449)
        (5.0, [(1.3138, 1.2402), (1.9898, 1.5029), (2.5704, 1.7870)]), // computed
        (10.0, [(1.4289, 1.2620), (2.1795, 1.5677), (2.8363, 1.9249)]), // computed
        (20.0, [(1.4961, 1.2699), (2.2880, 1.5919), (2.9857, 1.9781)]), // computed
        (30.0, [(1.5202, 1.2717), (2.3261, 1.5973), (3.0372, 1.9898)]), // computed
        (40.0, [(1.5325, 1.2723), (2.3455, 1.5993), (3.0632, 1.9942)]), // computed
        (50.0, [(1.5400, 1.2727), (2.3572, 1.6002), (3.0788, 1.9962)]), // computed
        (100.0, [(1.5552, 1.2731), (2.3809, 1.6015), (3.1102, 1.9990)]), // computed
        (f64::INFINITY, [(1.5708, 1.2732), (2.4048, 1.6020), (3.1416, 2.0000)]), // computed
    ];
    for (bi, cells) in table {
        for (shape, (zeta, c1)) in [Shape::Slab, Shape::Cylinder, Shape::Sphere]
            .into_iter()
            .zip(cells)
        {
            let (z, c) = one_term_coefficient(shape, bi);
            assert!(
                (z - zeta).abs() <= 2e-4,
                "{shape:?} Bi = {bi}: zeta {z} vs {zeta}"
            );
            assert!(
                (c - c1).abs() <= 2e-4,
                "{shape:?} Bi = {bi}: C1 {c} vs {c1}"
            );
        }
    }
    // Cylinder, Bi = 2, to more digits than the table (computed).
    assert!((one_term_coefficient(Shape::Cylinder, 2.0).0 - 1.599449).abs() < 1e-6);
}

#[test]
fn one_term_limits() {
    // Bi -> 0: zeta_1 -> 0 and C1 -> 1 (the lumped body); Bi -> inf: C1 = 4/pi (wall),
    // 2/(j01 J1(j01)) (cylinder), 2 (sphere) (from the C1 formulas, computed).
    for shape in [Shape::Slab, Shape::Cylinder, Shape::Sphere] {
        assert_eq!(one_term_coefficient(shape, 0.0), (0.0, 1.0));
        for bi in [1e-6, 1e-12, 1e-200] {
            let (z, c) = one_term_coefficient(shape, bi);
            assert!(
                z > 0.0 && (c - 1.0).abs() < 1e-5,
                "{shape:?} Bi = {bi}: C1 = {c}"
            );
        }
    }
    let (_, c) = one_term_coefficient(Shape::Slab, f64::INFINITY);
    assert!((c - 4.0 / PI).abs() < 1e-14);
    let (z, c) = one_term_coefficient(Shape::Cylinder, f64::INFINITY);
    assert!((c - 2.0 / (z * libm::j1(z))).abs() < 1e-12);
    let (_, c) = one_term_coefficient(Shape::Sphere, f64::INFINITY);
    assert!((c - 2.0).abs() < 1e-12);
    // Small Bi: C1 = 1 + Bi/6 (wall), 1 + Bi/4 (cylinder), 1 + 3 Bi / 10 (sphere) to first order
    // (expanding the C1 formulas with the small-Bi roots, computed).
    let bi = 1e-5;
    for (shape, k) in [
        (Shape::Slab, 1.0 / 6.0),
        (Shape::Cylinder, 0.25),
        (Shape::Sphere, 0.3),
    ] {
        let (_, c) = one_term_coefficient(shape, bi);
        assert!(
            ((c - 1.0) / bi - k).abs() < 1e-4,
            "{shape:?}: {}",
            (c - 1.0) / bi
        );
    }
}
