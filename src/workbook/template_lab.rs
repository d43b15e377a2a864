//! The lab demo: an invented apple slice dried on a balance in a lab oven, with a `measured`
//! sheet and a `fit` sheet that estimates the diffusivity and the surface coefficient.
//!
//! The "measured" points are not measurements: they are Crank's series for a sheet with
//! surface evaporation (J. Crank, The Mathematics of Diffusion, 2nd ed., 1975, §4.3.2, as in
//! [`crate::analytic::Series`]) with a known D and surface coefficient, times a little noise
//! from a fixed-seed generator, so that the fit has a known answer. The demo's title and notes
//! say so.

use super::{Cell, Sheet, key_sheet, n, t, table};
use crate::analytic::{Series, Shape, Surface};

/// D the "measured" points were made with, m²/s.
pub const LAB_TRUE_D: f64 = 4e-10;
/// Surface coefficient the points were made with, m/s.
pub const LAB_TRUE_BETA: f64 = 6.667e-7;

const HALF_THICKNESS_M: f64 = 0.003;
const X0_PCT: f64 = 560.0;
const XEQ_PCT: f64 = 12.0;

/// Fixed-seed uniform numbers (xorshift64*, G. Marsaglia, J. Stat. Softw. 8 (2003) with
/// S. Vigna's multiplier; from memory), for repeatable demo noise.
struct Noise(u64);

impl Noise {
    fn uniform(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let v = self.0.wrapping_mul(0x2545_F491_4F6C_DD1D);
        ((v >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
}

/// The demo's measured rows: every half hour to 10 h, the series' mean moisture times
/// (1 + e), e uniform within ±0.5 %, rounded to 0.1 % as a balance log would be.
fn measured_rows() -> Vec<Vec<Cell>> {
    let biot = HALF_THICKNESS_M * LAB_TRUE_BETA / LAB_TRUE_D;
    let series = Series::new(Shape::Slab, Surface::Evaporation { biot });
    let mut noise = Noise(0x001a_b0fa_991e);
    (1..=20)
        .map(|i| {
            let hours = 0.5 * i as f64;
            let tau = LAB_TRUE_D * hours * 3600.0 / (HALF_THICKNESS_M * HALF_THICKNESS_M);
            let x = XEQ_PCT + (X0_PCT - XEQ_PCT) * series.moisture_ratio(tau);
            let e = 0.01 * (noise.uniform() - 0.5);
            vec![n(hours), n((x * (1.0 + e) * 10.0).round() / 10.0)]
        })
        .collect()
}

/// The lab demo's sheets.
pub fn lab() -> Vec<Sheet> {
    vec![
        key_sheet(&[
            (
                "title",
                t("Demo: lab apple slice on a balance, D fitted (invented data)"),
                "the measured points are made up: Crank's series with D 4e-10 m2/s and \
                 surface_coef 6.667e-7 m/s, plus fixed-seed noise of 0.5 %",
            ),
            ("geometry", t("slab"), "slab, cylinder or sphere"),
            (
                "exposed",
                t("both"),
                "a 6 mm slice on a mesh dries from both faces",
            ),
            (
                "coupling",
                t("moisture"),
                "isothermal at the oven temperature (a thin slice warms up quickly)",
            ),
            (
                "moisture_basis",
                t("dry"),
                "dry: kg water per kg dry solid x 100",
            ),
            ("cells_per_layer", n(40.0), "finite-volume cells per layer"),
            ("end_hours", n(10.0), "simulated time limit, h"),
            (
                "output_every_min",
                n(5.0),
                "spacing of rows on sheet curves, min",
            ),
            (
                "profile_hours",
                t("0, 1, 2, 4, 6, 10"),
                "times of whole profiles, h",
            ),
        ]),
        table(
            "layers",
            &["name", "material", "thickness_mm", "initial_moisture_pct"],
            vec![vec![t("slice"), t("demo apple"), n(6.0), n(X0_PCT)]],
        ),
        table(
            "materials",
            &[
                "material",
                "dry_density_kg_m3",
                "d_ref_m2_s",
                "d_ref_temp_c",
                "isotherm",
            ],
            // A first guess from the literature's range, three times too small: the fit
            // finds the value the points were made with.
            vec![vec![
                t("demo apple"),
                n(130.0),
                n(1.3e-10),
                n(60.0),
                t("none"),
            ]],
        ),
        table(
            "schedule",
            &[
                "step",
                "dry_bulb_c",
                "equilibrium_moisture_pct",
                "surface_coef_m_s",
            ],
            vec![vec![t("oven 60 C"), n(60.0), n(XEQ_PCT), n(2e-6)]],
        ),
        table("measured", &["hours", "moisture_pct"], measured_rows()),
        Sheet {
            name: String::from("fit"),
            rows: vec![
                vec![
                    t("parameters"),
                    t("d_ref, surface_coef"),
                    t("estimated from sheet measured on the full model"),
                ],
                vec![
                    t("material"),
                    t("demo apple"),
                    t("whose d_ref is estimated"),
                ],
            ],
            column_notes: Vec::new(),
        },
    ]
}
