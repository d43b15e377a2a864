//! The `fit` sheet's drying-model table (format 1.1) from measured points: the points follow
//! Crank's series for a slab with a fixed surface and a known D, so the slope method must give
//! that D back and every model must be fitted, best first.

mod support;

use calamine::Data;
use support::result::{num, sheet, text};
use support::{keep_outputs, output_text, run_in, scratch};

use dampfront::analytic::{Series, Shape, Surface};

#[test]
fn measured_points_get_ranked_drying_models_and_the_slope_method_diffusivity() {
    // Slab 10 mm exposed on face A (l = 10 mm), D 1e-9 m²/s, 60 % -> surface 10 % (dry basis).
    let (l, d, x0, xs) = (0.01, 1e-9, 0.6, 0.1);
    // Crank (1975) eq. 4.18: the mean of a sheet with a fixed surface.
    let series = Series::new(Shape::Slab, Surface::Fixed);
    let mut measured = String::from("[measured]\nhours,moisture_pct\n");
    for i in 1..=40 {
        let hours = 2.0 * i as f64;
        let mr = series.moisture_ratio(d * hours * 3600.0 / (l * l));
        measured.push_str(&format!("{hours},{}\n", 100.0 * (xs + mr * (x0 - xs))));
    }
    let csv = format!(
        "[case]\nend_hours,80\n\
         [layers]\nmaterial,thickness_mm,initial_moisture_pct\nm,10,60\n\
         [materials]\nmaterial,dry_density_kg_m3,d_ref_m2_s\nm,500,1e-9\n\
         [schedule]\nstep,dry_bulb_c,surface_moisture_pct\nheld,30,10\n{measured}"
    );
    let dir = scratch();
    std::fs::write(dir.path().join("lab.csv"), csv).expect("written");
    let out = run_in(dir.path(), &["solve", "lab.csv"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    keep_outputs(dir.path(), "workbook_fit");
    let fit = sheet(&dir.path().join("lab.result.xlsx"), "fit");
    let rows: Vec<Vec<Data>> = fit.rows().map(|r| r.to_vec()).collect();
    let header = rows
        .iter()
        .position(|r| r.first().map(text).as_deref() == Some("drying_model"))
        .expect("drying-model table");
    let names: Vec<String> = rows[header]
        .iter()
        .map(text)
        .filter(|s| !s.is_empty())
        .collect();
    assert_eq!(
        names,
        [
            "drying_model",
            "k_per_h",
            "n",
            "a",
            "c",
            "r2",
            "rmse",
            "reduced_chi_square"
        ]
    );
    let models: Vec<String> = rows[header + 1..header + 5]
        .iter()
        .map(|r| text(&r[0]))
        .collect();
    let mut sorted = models.clone();
    sorted.sort();
    assert_eq!(sorted, ["henderson_pabis", "lewis", "logarithmic", "page"]);
    // Ranked best first by reduced chi-square (column H).
    let chi: Vec<f64> = rows[header + 1..header + 5]
        .iter()
        .map(|r| num(&r[7]))
        .collect();
    assert!(chi.windows(2).all(|w| w[0] <= w[1]), "{chi:?}");
    let slope = rows
        .iter()
        .find(|r| r.first().map(text).as_deref() == Some("slope_method_d_eff_m2_s"))
        .expect("slope method row");
    let got = num(&slope[1]);
    assert!((got - d).abs() <= 0.01 * d, "{got}");
}
