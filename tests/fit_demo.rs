//! The lab demo (inbox-demo/apple-lab.xlsx): the committed file is what
//! `dampfront::workbook::template::lab()` builds, it solves without warnings, and its fit gives
//! back the D and surface coefficient its invented points were made with (Crank's series for
//! a sheet with surface evaporation, J. Crank, The Mathematics of Diffusion, 2nd ed., 1975,
//! §4.3.2, plus 0.5 % fixed-seed noise).

mod support;

use calamine::{Data, Reader, open_workbook_auto};
use dampfront::workbook::template::{LAB_TRUE_BETA, LAB_TRUE_D, lab, to_xlsx};
use support::result::{num, text};
use support::{keep_outputs, output_text, run_in, scratch};

#[test]
fn the_lab_demo_is_current_and_its_fit_finds_the_values_it_was_made_with() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let demo = root.join("inbox-demo").join("apple-lab.xlsx");
    let fresh = to_xlsx(&lab()).expect("builds");
    if std::env::var_os("DAMPFRONT_REGENERATE_DEMO").is_some() {
        std::fs::write(&demo, &fresh).expect("written");
    }
    let committed = std::fs::read(&demo).expect("committed demo");
    assert!(
        committed == fresh,
        "inbox-demo/apple-lab.xlsx differs from template::lab(); regenerate it with \
         DAMPFRONT_REGENERATE_DEMO=1 cargo test --release --test fit_demo"
    );
    let dir = scratch();
    std::fs::write(dir.path().join("apple-lab.xlsx"), &committed).expect("copied");
    let out = run_in(dir.path(), &["solve", "apple-lab.xlsx"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    keep_outputs(dir.path(), "fit_demo");
    let mut wb = open_workbook_auto(dir.path().join("apple-lab.result.xlsx")).expect("opens");
    let summary = wb.worksheet_range("summary").expect("summary");
    let warnings: Vec<String> = summary
        .rows()
        .filter(|r| r[0] == Data::String("warning".into()))
        .map(|r| r[1].to_string())
        .collect();
    assert!(warnings.is_empty(), "{warnings:?}");
    let fit = wb.worksheet_range("fit").expect("fit");
    let rows: Vec<Vec<Data>> = fit.rows().map(|r| r.to_vec()).collect();
    let row = |name: &str| {
        rows.iter()
            .find(|r| r.first().map(text).as_deref() == Some(name))
            .unwrap_or_else(|| panic!("{name} row"))
    };
    for (name, truth) in [
        ("d_ref_m2_s", LAB_TRUE_D),
        ("surface_coef_m_s", LAB_TRUE_BETA),
    ] {
        let r = row(name);
        let (got, lo, hi) = (num(&r[1]), num(&r[2]), num(&r[3]));
        println!("{name}: {got:e} ({lo:e} .. {hi:e}), made with {truth:e}");
        assert!((got - truth).abs() <= 0.05 * truth, "{name} {got:e}");
        assert!(lo < truth && truth < hi, "{name} {lo:e}..{hi:e}");
    }
    let messages: Vec<String> = rows
        .iter()
        .filter(|r| r.first().map(text).as_deref() == Some("message"))
        .map(|r| text(&r[1]))
        .collect();
    println!("{messages:#?}");
    for key in ["estimation_iterations", "engine_runs"] {
        println!("{key}: {}", num(&row(key)[1]));
    }
}
