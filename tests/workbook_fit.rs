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

/// A slab case as CSV with `measured` points from Crank's series (eq. 4.18, D 1e-9 m²/s,
/// l 10 mm), the material's D given as `d_input`, and the `fit` sheet's rows.
fn lab_csv(d_input: f64, points: &[(f64, f64)], fit: &str) -> String {
    let mut measured = String::from("[measured]\nhours,moisture_pct\n");
    for (h, m) in points {
        measured.push_str(&format!("{h},{m}\n"));
    }
    format!(
        "[case]\nend_hours,80\n\
         [layers]\nmaterial,thickness_mm,initial_moisture_pct\nm,10,60\n\
         [materials]\nmaterial,dry_density_kg_m3,d_ref_m2_s\nm,500,{d_input}\n\
         [schedule]\nstep,dry_bulb_c,surface_moisture_pct\nheld,30,10\n{measured}{fit}"
    )
}

/// Hours and moisture %.
type Point = (f64, f64);

fn series_points() -> Vec<(f64, f64)> {
    // Crank (1975) eq. 4.18: the mean of a sheet with a fixed surface, D 1e-9 m²/s, l 10 mm.
    let series = Series::new(Shape::Slab, Surface::Fixed);
    (1..=40)
        .map(|i| {
            let hours = 2.0 * i as f64;
            let mr = series.moisture_ratio(1e-9 * hours * 3600.0 / (0.01 * 0.01));
            (hours, 100.0 * (0.1 + mr * 0.5))
        })
        .collect()
}

/// Solves `csv` and returns the result's `fit` sheet as rows.
fn fit_rows(csv: &str, label: &str) -> Vec<Vec<Data>> {
    let dir = scratch();
    std::fs::write(dir.path().join("lab.csv"), csv).expect("written");
    let out = run_in(dir.path(), &["solve", "lab.csv"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    keep_outputs(dir.path(), label);
    let fit = sheet(&dir.path().join("lab.result.xlsx"), "fit");
    let rows: Vec<Vec<Data>> = fit.rows().map(|r| r.to_vec()).collect();
    for r in &rows {
        for c in r {
            if let Data::Float(v) = c {
                assert!(v.is_finite(), "{r:?}");
            }
            assert!(!text(c).contains("NaN"), "{r:?}");
        }
    }
    rows
}

fn messages(rows: &[Vec<Data>]) -> Vec<String> {
    rows.iter()
        .filter(|r| r.first().map(text).as_deref() == Some("message"))
        .map(|r| text(&r[1]))
        .collect()
}

#[test]
fn a_fit_sheet_estimates_d_from_the_measured_points() {
    // The input's D is 3 times too small; the estimate must come back to 1e-9 (the engine at
    // the default mesh is within 1e-3 in moisture ratio of the series, so 1 %).
    let rows = fit_rows(
        &lab_csv(3.3e-10, &series_points(), "[fit]\nparameters,d_ref\n"),
        "workbook_fit_estimate",
    );
    let header: Vec<String> = rows[0].iter().take(5).map(text).collect();
    assert_eq!(
        header,
        ["parameter", "estimate", "low_95", "high_95", "unit"]
    );
    assert_eq!(text(&rows[1][0]), "d_ref_m2_s");
    let (d, lo, hi) = (num(&rows[1][1]), num(&rows[1][2]), num(&rows[1][3]));
    assert!((d - 1e-9).abs() <= 0.01e-9, "{d:e}");
    assert!(lo < d && d < hi, "{lo:e} {d:e} {hi:e}");
    assert!(rows[2].iter().all(|c| text(c).is_empty()), "an empty row");
    let m = messages(&rows);
    assert_eq!(m.len(), 1, "{m:?}");
    assert!(m[0].contains("converged"), "{m:?}");
    let corr = rows
        .iter()
        .position(|r| r.first().map(text).as_deref() == Some("correlation"))
        .expect("correlation matrix");
    assert_eq!(text(&rows[corr][1]), "d_ref_m2_s");
    assert!((num(&rows[corr + 1][1]) - 1.0).abs() < 1e-12);
    // The fitted model beside the input's, and its goodness.
    let table = rows
        .iter()
        .position(|r| r.first().map(text).as_deref() == Some("hours"))
        .expect("comparison table");
    assert_eq!(text(&rows[table][4]), "fitted_moisture_pct");
    let fitted_rmse = rows
        .iter()
        .find(|r| r.len() > 7 && text(&r[6]) == "fitted_rmse_pct")
        .map(|r| num(&r[7]))
        .expect("fitted rmse");
    assert!(fitted_rmse < 0.05, "{fitted_rmse}");
}

#[test]
fn fits_that_cannot_work_say_so_on_the_sheet() {
    let points = series_points();
    let flat: Vec<(f64, f64)> = points.iter().map(|&(h, _)| (h, 40.0)).collect();
    let cases: [(&[Point], &str, &str); 3] = [
        (&points[..1], "parameters,d_ref", "only 1 measured point"),
        (&flat, "parameters,d_ref", "the same at every point"),
        (
            &points,
            "parameters,\"d_ref, activation_energy, hm\"",
            "activation_energy has no influence",
        ),
    ];
    for (i, (pts, fit, says)) in cases.into_iter().enumerate() {
        // The air is at the material's reference temperature (25 °C by default) for the third.
        let csv =
            lab_csv(1e-9, pts, &format!("[fit]\n{fit}\n")).replace("held,30,10", "held,25,10");
        let rows = fit_rows(&csv, &format!("workbook_fit_cannot_{i}"));
        let m = messages(&rows);
        assert!(m.iter().any(|m| m.contains(says)), "{m:?}");
        if i == 2 {
            assert!(
                m.iter()
                    .any(|m| m.contains("no schedule step gives hm_m_s")),
                "{m:?}"
            );
            // d_ref is still estimated; the others have empty estimates.
            assert_eq!(text(&rows[1][0]), "d_ref_m2_s");
            assert!((num(&rows[1][1]) - 1e-9).abs() < 0.01e-9);
            assert!(text(&rows[2][1]).is_empty() && text(&rows[3][1]).is_empty());
        } else {
            assert!(text(&rows[1][1]).is_empty(), "{:?}", rows[1]);
            // No drying-model rows fitted to one point or a flat series: a note says why.
            let note = rows
                .iter()
                .find(|r| r.len() > 1 && text(&r[0]) == "note")
                .map(|r| text(&r[1]))
                .unwrap_or_default();
            assert!(note.starts_with("no drying models"), "{note:?}");
            assert!(
                !rows
                    .iter()
                    .any(|r| r.first().map(text).as_deref() == Some("lewis"))
            );
        }
    }
}

#[test]
fn an_unknown_parameter_is_an_input_problem_at_its_cell() {
    let csv = lab_csv(
        1e-9,
        &series_points(),
        "[fit]\nparameters,\"d_ref, diffusivity\"\n",
    );
    let dir = scratch();
    std::fs::write(dir.path().join("lab.csv"), csv).expect("written");
    let out = run_in(dir.path(), &["solve", "lab.csv"]);
    assert_eq!(out.status.code(), Some(1), "{}", output_text(&out));
    let text = output_text(&out);
    assert!(
        text.contains("fit!B") && text.contains("unknown parameter \"diffusivity\""),
        "{text}"
    );
}

#[test]
fn measured_points_after_the_runs_end_are_told() {
    // The series points run to 80 h; the run stops at 50 h, so 15 points (52 to 80 h) are after it.
    let csv = lab_csv(1e-9, &series_points(), "").replace("end_hours,80", "end_hours,50");
    let dir = scratch();
    std::fs::write(dir.path().join("lab.csv"), csv).expect("written");
    let out = run_in(dir.path(), &["solve", "lab.csv"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    let summary = sheet(&dir.path().join("lab.result.xlsx"), "summary");
    let warned = summary.rows().any(|r| {
        text(&r[0]) == "warning" && text(&r[1]).starts_with("measured: 15 point(s) lie after")
    });
    assert!(warned, "{:?}", summary.rows().collect::<Vec<_>>());
}
