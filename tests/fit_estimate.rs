//! Parameter estimation on the full engine against data made from Crank's series solution
//! (J. Crank, The Mathematics of Diffusion, 2nd ed., Clarendon Press, Oxford, 1975, eq. 4.18:
//! the mean of a plane sheet with its surface held, as implemented in `dampfront::analytic`
//! and checked there against the book's tables). A slab exposed on face A with face B sealed is
//! the half of a sheet of thickness 2l dried from both faces, so l is its whole thickness.

use dampfront::analytic::{Series, Shape, Surface};
use dampfront::case::{Case, Exchange, Exposed, Geometry, Humidity, Material, Measured, Step};
use dampfront::fit::{Budget, FitRequest, Parameter, estimate, t_quantile_975};

/// A tiny fixed-seed generator (xorshift64*, G. Marsaglia, J. Stat. Softw. 8 (2003), and
/// S. Vigna's multiplier; from memory) and Box-Muller normal deviates, for repeatable noise.
struct Noise(u64);

impl Noise {
    fn uniform(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let v = self.0.wrapping_mul(0x2545_F491_4F6C_DD1D);
        ((v >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    fn normal(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
    }
}

const X0: f64 = 0.8;
const XS: f64 = 0.1;

fn slab(d: f64, l: f64, cells: usize, schedule: Vec<Step>, end: f64) -> Case {
    let mut case = Case::single_layer(
        Geometry::Slab,
        Exposed::A,
        Material::constant("sample", 600.0, d),
        l,
        X0,
        schedule,
        end,
    );
    case.cells_per_layer = cells;
    case
}

fn held(dry_bulb_c: f64, hours: Option<f64>) -> Step {
    let mut s = Step::constant(
        dry_bulb_c,
        Humidity::Unspecified,
        Exchange::FixedSurface(XS),
    );
    s.duration = hours.map(|h| h * 3600.0);
    s
}

/// Points every 1.5 h to 45 h of a sheet with D, from the series in T = D t / l².
fn series_points(d: f64, l: f64, noise: Option<&mut Noise>) -> Vec<Measured> {
    let series = Series::new(Shape::Slab, Surface::Fixed);
    let mut noise = noise;
    (1..=30)
        .map(|i| {
            let t = 1.5 * 3600.0 * i as f64;
            let x = XS + (X0 - XS) * series.moisture_ratio(d * t / (l * l));
            let e = noise.as_mut().map_or(0.0, |n| 0.01 * n.normal());
            Measured::new(t, x * (1.0 + e))
        })
        .collect()
}

fn d_only() -> FitRequest {
    FitRequest {
        parameters: vec![Parameter::DRef],
        material: 0,
    }
}

#[test]
fn exact_series_data_give_back_d_within_0_1_percent() {
    let (d, l) = (2e-10, 0.005);
    let measured = series_points(d, l, None);
    // Start from a D 2.5 times too large; a fine mesh, so that the engine is near the series.
    let case = slab(5e-10, l, 200, vec![held(30.0, None)], 45.0 * 3600.0);
    let e = estimate(&case, &measured, &d_only(), Budget::default());
    let got = e.parameters[0].estimate.expect("estimated");
    println!("{e:#?}");
    assert!((got - d).abs() <= 1e-3 * d, "{got:e}");
    assert!(e.converged, "{e:#?}");
    assert!(e.messages.is_empty(), "{:?}", e.messages);
}

#[test]
fn series_data_with_one_percent_noise_give_back_d_within_3_percent() {
    let (d, l) = (2e-10, 0.005);
    let mut noise = Noise(0x5eed_1234_abcd_0042);
    let measured = series_points(d, l, Some(&mut noise));
    let case = slab(8e-11, l, 40, vec![held(30.0, None)], 45.0 * 3600.0);
    let e = estimate(&case, &measured, &d_only(), Budget::default());
    println!("{e:#?}");
    let p = &e.parameters[0];
    let got = p.estimate.expect("estimated");
    assert!((got - d).abs() <= 0.03 * d, "{got:e}");
    let (lo, hi) = (p.low_95.expect("low"), p.high_95.expect("high"));
    assert!(
        lo < d && d < hi,
        "95 % interval {lo:e}..{hi:e} misses {d:e}"
    );
    // 30 points, one parameter: t at 29 degrees of freedom.
    assert_eq!(e.t_quantile, Some(t_quantile_975(29)));
}

#[test]
fn d_ref_and_activation_energy_from_one_curve_under_stepped_temperatures() {
    // 10 h each at 40, 60 and 80 °C with the surface held; the product is at the air
    // temperature (moisture-only run), D independent of moisture and Arrhenius in T:
    // D(T) = d_ref exp(-Ea/R (1/T - 1/T_ref)), R = 8.314 J/(mol K) as on the format page.
    // With D a function of time only, the series holds in tau = ∫ D dt / l² (Crank 1975,
    // §4.3: a time-dependent diffusion coefficient is a change of the time variable).
    let (d_ref, ea, t_ref, l) = (3e-10, 35.0, 60.0, 0.006);
    let d_at = |t_c: f64| {
        d_ref * (-ea * 1000.0 / 8.314 * (1.0 / (t_c + 273.15) - 1.0 / (t_ref + 273.15))).exp()
    };
    let temps = [40.0, 60.0, 80.0];
    let series = Series::new(Shape::Slab, Surface::Fixed);
    let measured: Vec<Measured> = (1..=30)
        .map(|i| {
            let t_h = i as f64;
            let mut tau_dt = 0.0;
            for (k, &tc) in temps.iter().enumerate() {
                let inside = (t_h - 10.0 * k as f64).clamp(0.0, 10.0);
                tau_dt += d_at(tc) * inside * 3600.0;
            }
            let x = XS + (X0 - XS) * series.moisture_ratio(tau_dt / (l * l));
            Measured::new(t_h * 3600.0, x)
        })
        .collect();
    let schedule: Vec<Step> = temps.iter().map(|&t| held(t, Some(10.0))).collect();
    let mut case = slab(1e-10, l, 80, schedule, 30.0 * 3600.0);
    case.materials[0].diffusivity.t_ref_c = t_ref;
    case.materials[0].diffusivity.activation_energy_j_mol = 20_000.0;
    let request = FitRequest {
        parameters: vec![Parameter::DRef, Parameter::ActivationEnergy],
        material: 0,
    };
    let e = estimate(&case, &measured, &request, Budget::default());
    println!("{e:#?}");
    let got_d = e.parameters[0].estimate.expect("d_ref");
    let got_ea = e.parameters[1].estimate.expect("Ea");
    assert!((got_d - d_ref).abs() <= 0.05 * d_ref, "{got_d:e}");
    assert!((got_ea - ea).abs() <= 0.05 * ea, "{got_ea}");
    let r = e.correlation.as_ref().expect("correlation");
    assert_eq!(r.shape(), [2, 2]);
    assert!((r[[0, 0]] - 1.0).abs() < 1e-12 && r[[0, 1]].abs() < 1.0);
}

#[test]
fn fits_that_cannot_work_say_so_without_numbers_that_are_not() {
    let (d, l) = (2e-10, 0.005);
    let case = slab(d, l, 20, vec![held(25.0, None)], 45.0 * 3600.0);
    let all = series_points(d, l, None);
    let says = |e: &dampfront::fit::Estimation, words: &str| {
        assert!(
            e.messages.iter().any(|m| m.contains(words)),
            "{:?}",
            e.messages
        );
        for p in &e.parameters {
            for v in [p.estimate, p.low_95, p.high_95].into_iter().flatten() {
                assert!(v.is_finite(), "{p:?}");
            }
        }
    };
    // One point.
    let e = estimate(&case, &all[..1], &d_only(), Budget::default());
    says(&e, "only 1 measured point");
    assert!(e.parameters[0].estimate.is_none());
    // All equal values.
    let flat: Vec<Measured> = all.iter().map(|m| Measured::new(m.time, 0.5)).collect();
    let e = estimate(&case, &flat, &d_only(), Budget::default());
    says(&e, "the same at every point");
    // An activation energy with the air at the reference temperature (25 °C) all along has
    // no influence: it is held, D is still estimated.
    let request = FitRequest {
        parameters: vec![Parameter::DRef, Parameter::ActivationEnergy],
        material: 0,
    };
    let e = estimate(&case, &all, &request, Budget::default());
    says(&e, "activation_energy has no influence");
    assert!(e.parameters[1].estimate.is_none());
    assert!(e.parameters[0].estimate.is_some());
    // d_ref and an activation energy from one curve at one temperature away from the
    // reference: both only scale D, so the data cannot tell them apart.
    let mut away = slab(d, l, 20, vec![held(40.0, None)], 45.0 * 3600.0);
    away.materials[0].diffusivity.t_ref_c = 60.0;
    away.materials[0].diffusivity.activation_energy_j_mol = 30_000.0;
    let e = estimate(&away, &all, &request, Budget::default());
    assert!(
        e.messages
            .iter()
            .any(|m| m.contains("correlated") || m.contains("cannot separate")),
        "{:?}",
        e.messages
    );
    says(&e, "");
    // A schedule column no step gives.
    let request = FitRequest {
        parameters: vec![Parameter::AirSideCoef],
        material: 0,
    };
    let e = estimate(&case, &all, &request, Budget::default());
    says(&e, "no schedule step gives hm_m_s");
}

#[test]
fn the_t_quantile_follows_the_tables() {
    // Student's t at 0.975 (common statistical tables, from memory): 20 -> 2.086,
    // 30 -> 2.042, 60 -> 2.000, 120 -> 1.980.
    for (dof, t) in [(20, 2.086), (30, 2.042), (60, 2.000), (120, 1.980)] {
        assert!((t_quantile_975(dof) - t).abs() < 1e-3, "{dof}");
    }
    assert_eq!(t_quantile_975(1), 12.7062);
}
