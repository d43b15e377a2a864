//! Plausibility warnings on the summary: values that run but look like a slipped unit, and a
//! target beyond the equilibrium the schedule's air can reach. Read through `solve --json`.

mod support;

use support::{keep_outputs, output_text, run_in, scratch};

fn warnings_of(csv: &str) -> (String, Vec<String>) {
    let dir = scratch();
    std::fs::write(dir.path().join("c.csv"), csv).expect("written");
    let out = run_in(dir.path(), &["solve", "--json", "c.csv"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    keep_outputs(dir.path(), "warnings");
    let v: serde_json::Value =
        serde_json::from_str(String::from_utf8_lossy(&out.stdout).trim()).expect("JSON");
    let warnings = v["warnings"]
        .as_array()
        .expect("warnings")
        .iter()
        .map(|w| w.as_str().expect("text").to_string())
        .collect();
    (v["status"].as_str().expect("status").to_string(), warnings)
}

fn has(warnings: &[String], start: &str, words: &str) -> bool {
    warnings
        .iter()
        .any(|w| w.starts_with(start) && w.contains(words))
}

/// A GAB material (Xm 0.08, C 8, K 0.85) in a slab exposed on face A.
fn case(layer: &str, schedule: &str, target: &str) -> String {
    format!(
        "[case]\nend_hours,20\n{target}\
         [layers]\nmaterial,thickness_mm,initial_moisture_pct\n{layer}\n\
         [materials]\nmaterial,dry_density_kg_m3,d_ref_m2_s,isotherm,iso_a,iso_b,iso_c\n\
         m,500,1e-10,gab,0.08,8,0.85\n\
         [schedule]\nstep,hours,dry_bulb_c,rh_pct,surface_coef_m_s\n{schedule}"
    )
}

#[test]
fn likely_unit_slips_are_warned_at_their_cells() {
    // Rows: [case] 1-3, [layers] 4-6, [materials] 7-9, [schedule] 10-13 (CSV lines).
    let csv = case(
        "m,0.05,0.6",
        "kelvin,10,333.15,40,1e-7\npercent cell,,50,0.85,1e-7\n",
        "target_moisture_pct,8\n",
    );
    let (_, w) = warnings_of(&csv);
    assert!(
        has(&w, "schedule!C12: dry_bulb_c is 333.15", "kelvin"),
        "{w:?}"
    );
    assert!(has(&w, "schedule!D13: rh_pct is 0.85 %", "85"), "{w:?}");
    assert!(
        has(&w, "layers!B6: thickness_mm is 0.05 mm", "metres"),
        "{w:?}"
    );
    assert!(
        has(&w, "layers!C6: initial_moisture_pct is 0.6 %", "fraction"),
        "{w:?}"
    );
}

#[test]
fn moistures_all_typed_as_fractions_are_warned() {
    // Initial 0.6 and until 0.3 (meant: 60 % and 30 %): the level asks to dry, but the air
    // (50 C, 40 % RH; GAB equilibrium about 9.8 %) would wet a product at 0.6 %.
    let csv = case("m,5,0.6", "first,,50,40,1e-7\n", "");
    let csv = csv.replace(
        "step,hours,dry_bulb_c,rh_pct,surface_coef_m_s\nfirst,,",
        "step,until_moisture_pct,dry_bulb_c,rh_pct,surface_coef_m_s\nfirst,0.3,",
    );
    let (_, w) = warnings_of(&csv);
    assert!(
        has(&w, "layers!C5: initial_moisture_pct is 0.6 %", "fractions"),
        "{w:?}"
    );
}

#[test]
fn plausible_values_give_no_such_warning() {
    // The same case with the units right: 60 C, 85 %, 5 mm, 60 %; and a genuinely dry
    // product dried further (1.5 % to 1 %) in air dry enough to do it (1.5 % RH: the GAB
    // equilibrium is about 0.76 %) is no slip either.
    let usual = "warm,10,60,40,1e-7\nhumid,,50,0.85e2,1e-7\n";
    for (layer, schedule, target) in [
        ("m,5,60", usual, "target_moisture_pct,8\n"),
        (
            "m,5,1.5",
            "desiccant,,60,1.5,1e-7\n",
            "target_moisture_pct,1\n",
        ),
    ] {
        let csv = case(layer, schedule, target);
        let (_, w) = warnings_of(&csv);
        assert!(
            !w.iter()
                .any(|x| x.contains("typed") || x.contains("formatted")),
            "{layer}: {w:?}"
        );
    }
}

#[test]
fn a_target_below_the_reachable_equilibrium_is_warned_with_that_equilibrium() {
    // At aw 0.4 the format page's GAB form gives X = Xm C K aw / ((1 - K aw)(1 - K aw + C K aw))
    // = 0.08 * 8 * 0.85 * 0.4 / (0.66 * 3.38) = 0.09754, i.e. 9.75 % (the lowest of the two
    // steps; the first is at 60 % RH).
    let (xm, c, k, aw) = (0.08, 8.0, 0.85, 0.4);
    let eq = 100.0 * xm * c * k * aw / ((1.0 - k * aw) * (1.0 - k * aw + c * k * aw));
    let csv = case(
        "m,2,60",
        "first,5,50,60,1e-6\nsecond,,50,40,1e-6\n",
        "target_moisture_pct,5\n",
    );
    let (status, w) = warnings_of(&csv);
    assert_eq!(status, "target_not_reached");
    let expected = format!("{eq:.2} % (step second)");
    assert!(
        w.iter()
            .any(|x| x.starts_with("target_moisture_pct 5.00 %") && x.contains(&expected)),
        "{expected}: {w:?}"
    );
    // A target above that equilibrium draws no such warning.
    let csv = case(
        "m,2,60",
        "first,5,50,60,1e-6\nsecond,,50,40,1e-6\n",
        "target_moisture_pct,12\n",
    );
    let (status, w) = warnings_of(&csv);
    assert_eq!(status, "ok");
    assert!(!w.iter().any(|x| x.contains("equilibrium")), "{w:?}");
}

#[test]
fn a_profile_list_split_by_csv_commas_is_warned() {
    // `profile_hours,0,1,2` in a CSV: only 0 reaches column B; 1 and 2 land in the notes.
    let csv = case("m,5,60", "warm,,60,40,1e-7\n", "profile_hours,0,1,2\n");
    let (_, w) = warnings_of(&csv);
    assert!(has(&w, "case!C3: profile_hours goes on", "quoted"), "{w:?}");
    // Quoted, the list is one cell and nothing is said.
    let csv = case(
        "m,5,60",
        "warm,,60,40,1e-7\n",
        "profile_hours,\"0, 1, 2\"\n",
    );
    let (_, w) = warnings_of(&csv);
    assert!(!w.iter().any(|x| x.contains("profile_hours")), "{w:?}");
}
