//! Reading valid case workbooks: values converted to SI, defaults, warnings, CSV against
//! xlsx, wet basis, formulas, and where problems found by the case checks are reported.
#![allow(clippy::unwrap_used)]

mod read_support;

use dampfront::case::{
    Case, Coupling, DEFAULT_TOLERANCE, Exchange, Exposed, Geometry, Humidity, Layer, Material,
    MoistureBasis, Step,
};
use dampfront::physics::{Diffusivity, Isotherm};
use dampfront::workbook::parse::{InputProblem, InputValue, Parsed, parse};
use dampfront::workbook::raw::RawBook;
use dampfront::workbook::read::{read_bytes, read_file};
use read_support::{C, Sheet, csv, full_case, minimal_case, ods, set, texts, xlsx};

fn book(sheets: &[Sheet]) -> RawBook {
    read_bytes(&xlsx(sheets), "xlsx").unwrap()
}

fn ok(sheets: &[Sheet]) -> Parsed {
    match parse(&book(sheets), "stem") {
        Ok(p) => p,
        Err(problems) => panic!("unexpected problems: {problems:#?}"),
    }
}

fn problems(sheets: &[Sheet]) -> Vec<InputProblem> {
    match parse(&book(sheets), "stem") {
        Ok(p) => panic!("expected problems, got a case: {:#?}", p.case),
        Err(problems) => problems,
    }
}

/// The problem at `sheet!cell`, if any.
fn at<'a>(problems: &'a [InputProblem], sheet: &str, cell: &str) -> &'a InputProblem {
    problems
        .iter()
        .find(|p| p.sheet == sheet && p.cell == cell)
        .unwrap_or_else(|| panic!("no problem at {sheet}!{cell} in {problems:#?}"))
}

/// The full case as the reader must build it. Every conversion is a unit definition:
/// 1 mm = 0.001 m, 1 h = 3600 s, 1 min = 60 s, 1 kJ = 1000 J, and a dry-basis moisture
/// percentage divided by 100 is kg water per kg dry solid.
fn expected_full_case() -> Case {
    Case {
        title: "Kiln charge 7".into(),
        geometry: Geometry::Slab,
        exposed: Exposed::A,
        coupling: Coupling::Moisture,
        basis: MoistureBasis::Dry,
        cells_per_layer: 20,
        end_time: 720_000.0,
        target_moisture: Some(0.12),
        output_every: Some(1800.0),
        profile_times: Some(vec![0.0, 21_600.0, 86_400.0, 280_800.0]),
        flow_length: 1.2,
        tolerance: 0.0005,
        layers: vec![
            Layer {
                name: "skin".into(),
                material: 0,
                thickness: 0.002,
                initial_moisture: 0.35,
                initial_temp_c: 18.0,
            },
            Layer {
                name: "core".into(),
                material: 1,
                thickness: 0.023,
                initial_moisture: 0.6,
                initial_temp_c: 20.0,
            },
        ],
        materials: vec![
            Material {
                name: "veneer".into(),
                dry_density: 520.0,
                diffusivity: Diffusivity {
                    d_ref: 2.5e-10,
                    t_ref_c: 40.0,
                    x_ref: 0.1,
                    activation_energy_j_mol: 30_000.0,
                    moisture_coef: 2.0,
                },
                isotherm: Isotherm::Gab {
                    xm: 0.06,
                    c: 10.0,
                    k: 0.8,
                },
                conductivity: None,
                specific_heat: None,
            },
            Material {
                name: "spruce".into(),
                dry_density: 430.0,
                diffusivity: Diffusivity {
                    d_ref: 1.0e-10,
                    t_ref_c: 50.0,
                    x_ref: 0.15,
                    activation_energy_j_mol: 35_000.0,
                    moisture_coef: 3.5,
                },
                isotherm: Isotherm::Wood,
                conductivity: None,
                specific_heat: None,
            },
        ],
        schedule: vec![
            Step {
                label: "warm-up".into(),
                duration: Some(21_600.0),
                until_moisture: None,
                dry_bulb_c: 40.0,
                humidity: Humidity::Relative(0.85),
                equilibrium_moisture: None,
                exchange: Exchange::AirVelocity(2.5),
                heat_coef: None,
                ramp: false,
            },
            Step {
                label: "drying".into(),
                duration: Some(259_200.0),
                until_moisture: Some(0.2),
                dry_bulb_c: 60.0,
                humidity: Humidity::WetBulb(50.0),
                equilibrium_moisture: None,
                exchange: Exchange::AirSide(0.002),
                heat_coef: Some(15.0),
                ramp: true,
            },
            Step {
                label: "conditioning".into(),
                duration: None,
                until_moisture: None,
                dry_bulb_c: 55.0,
                humidity: Humidity::Relative(0.6),
                equilibrium_moisture: None,
                exchange: Exchange::SurfaceCoefficient(1e-7),
                heat_coef: None,
                ramp: false,
            },
        ],
    }
}

#[test]
fn full_case_is_read_in_si_units() {
    let p = ok(&full_case());
    assert_eq!(*p.case, expected_full_case());
    assert!(p.warnings.is_empty(), "{:?}", p.warnings);
    assert!(p.measured.is_empty());
    assert!(p.case.validate().is_empty());
}

#[test]
fn input_records_give_si_values_and_their_cells() {
    let p = ok(&full_case());
    let find = |q: &str| {
        p.inputs
            .iter()
            .find(|r| r.quantity == q)
            .unwrap_or_else(|| panic!("no record {q} in {:#?}", p.inputs))
    };
    let r = find("layers[1].thickness");
    assert_eq!(r.value, InputValue::Number(0.002));
    assert_eq!(r.unit, "m");
    assert_eq!(r.source, "layers!C2");
    let r = find("materials[1].diffusivity.activation_energy");
    assert_eq!(r.value, InputValue::Number(30_000.0));
    assert_eq!(r.unit, "J/mol");
    assert_eq!(r.source, "materials!F2");
    let r = find("schedule[2].duration");
    assert_eq!(r.value, InputValue::Number(259_200.0));
    assert_eq!((r.unit.as_str(), r.source.as_str()), ("s", "schedule!B3"));
    let r = find("schedule[1].humidity.relative");
    assert_eq!(r.value, InputValue::Number(0.85));
    assert_eq!(r.source, "schedule!E2");
    // A value left empty is recorded with its default.
    let r = find("layers[2].initial_temp_c");
    assert_eq!(r.value, InputValue::Number(20.0));
    assert_eq!(r.source, "default");
    let r = find("case.title");
    assert_eq!(r.value, InputValue::Text("Kiln charge 7".into()));
    assert_eq!(r.source, "case!B1");
}

#[test]
fn defaults_follow_the_format_page() {
    let p = ok(&minimal_case());
    let c = &p.case;
    assert_eq!(c.title, "stem");
    assert_eq!(c.geometry, Geometry::Slab);
    assert_eq!(c.exposed, Exposed::A);
    assert_eq!(c.coupling, Coupling::Moisture);
    assert_eq!(c.basis, MoistureBasis::Dry);
    assert_eq!(c.cells_per_layer, 40);
    assert_eq!(c.end_time, 1000.0 * 3600.0);
    assert_eq!(c.target_moisture, None);
    assert_eq!(c.output_every, None);
    assert_eq!(c.output_interval(), 1000.0 * 3600.0 / 400.0);
    assert_eq!(c.profile_times, None);
    assert_eq!(c.flow_length, 0.1);
    assert_eq!(c.tolerance, DEFAULT_TOLERANCE);
    let m = &c.materials[0];
    assert_eq!(m.diffusivity.t_ref_c, 25.0);
    assert_eq!(m.diffusivity.x_ref, 0.0);
    assert_eq!(m.diffusivity.activation_energy_j_mol, 0.0);
    assert_eq!(m.diffusivity.moisture_coef, 0.0);
    assert_eq!(m.isotherm, Isotherm::None);
    assert_eq!(c.layers[0].name, "layer 1");
    assert_eq!(c.layers[0].initial_temp_c, 20.0);
    assert_eq!(c.schedule[0].label, "step 1");
    assert!(!c.schedule[0].ramp);
    assert_eq!(c.schedule[0].exchange, Exchange::FixedSurface(0.08));
    let output = p
        .inputs
        .iter()
        .find(|r| r.quantity == "case.output_every")
        .unwrap();
    assert_eq!(output.value, InputValue::Number(9000.0));
    assert_eq!(output.source, "default");
}

#[test]
fn names_headers_and_keys_match_without_case_or_spaces() {
    let mut s = minimal_case();
    s[0].0 = " CASE ";
    s[2].0 = "Layers";
    s[2].1[0] = texts(&[" Material", "THICKNESS_mm ", "initial_moisture_PCT"]);
    s[0].1 = vec![vec![C::T(" Geometry "), C::T(" Cylinder ")]];
    let p = ok(&s);
    assert_eq!(p.case.geometry, Geometry::Cylinder);
    assert_eq!(p.case.layers[0].thickness, 0.01);
    assert!(p.warnings.is_empty(), "{:?}", p.warnings);
}

#[test]
fn unknown_sheets_keys_and_columns_are_warnings() {
    let mut s = minimal_case();
    s.push(("notes", vec![vec![C::T("anything")]]));
    s.push(("fit", vec![vec![C::T("parameters"), C::T("d_ref")]]));
    s.push(("variants", vec![texts(&["variant", "case.end_hours"])]));
    set(&mut s, "case", 0, 0, C::T("colour"));
    set(&mut s, "case", 0, 1, C::T("green"));
    set(&mut s, "layers", 0, 3, C::T("comment"));
    set(&mut s, "layers", 1, 3, C::T("outer board"));
    let p = ok(&s);
    let w = &p.warnings;
    // The variants sheet is a study (crate::study), not an unknown sheet: no warning.
    assert_eq!(w.len(), 4, "{w:#?}");
    assert!(
        w.iter()
            .any(|w| w.starts_with("case!A1: unknown key \"colour\"")),
        "{w:#?}"
    );
    assert!(
        w.iter()
            .any(|w| w.starts_with("layers!D1: unknown column \"comment\"")),
        "{w:#?}"
    );
    assert!(w.iter().any(|w| w.starts_with("notes: ")), "{w:#?}");
    assert!(
        w.iter()
            .any(|w| w.starts_with("fit: ") && w.contains("no measured sheet")),
        "{w:#?}"
    );
    assert!(!w.iter().any(|w| w.starts_with("variants")), "{w:#?}");
}

#[test]
fn csv_and_xlsx_give_the_same_case() {
    let sheets = full_case();
    let dir = tempfile::tempdir().unwrap();
    let xlsx_path = dir.path().join("charge.xlsx");
    let csv_path = dir.path().join("charge.csv");
    std::fs::write(&xlsx_path, xlsx(&sheets)).unwrap();
    // A byte order mark and CRLF line ends, as spreadsheet programs write them.
    let text = format!("\u{feff}{}", csv(&sheets).replace('\n', "\r\n"));
    std::fs::write(&csv_path, text).unwrap();
    let (from_xlsx, _) = read_file(&xlsx_path).unwrap();
    let (from_csv, bytes) = read_file(&csv_path).unwrap();
    assert_eq!(bytes, std::fs::read(&csv_path).unwrap());
    let a = parse(&from_xlsx, "charge").unwrap();
    let b = parse(&from_csv, "charge").unwrap();
    assert_eq!(a.case, b.case);
    assert_eq!(*b.case, expected_full_case());
    assert_eq!(a.warnings, b.warnings);
}

#[test]
fn ods_gives_the_same_case() {
    let raw = read_bytes(&ods(&full_case()), "ods").unwrap();
    let p = parse(&raw, "stem").unwrap();
    assert_eq!(*p.case, expected_full_case());
    assert!(p.warnings.is_empty(), "{:?}", p.warnings);
}

#[test]
fn ods_formulas_count_by_cached_value_and_a_missing_one_is_a_problem() {
    let mut s = minimal_case();
    set(&mut s, "layers", 1, 1, C::F("=10+2.5", "12.5"));
    let raw = read_bytes(&ods(&s), "ods").unwrap();
    assert_eq!(
        parse(&raw, "stem").unwrap().case.layers[0].thickness,
        0.0125
    );
    set(&mut s, "layers", 1, 2, C::F("=[.B9]*2", ""));
    let raw = read_bytes(&ods(&s), "ods").unwrap();
    let problems = parse(&raw, "stem").unwrap_err();
    assert!(
        at(&problems, "layers", "C2")
            .problem
            .contains("formula with no cached value")
    );
    assert_eq!(problems.len(), 1, "{problems:#?}");
}

#[test]
fn csv_problems_name_the_section_and_the_file_row() {
    let mut s = minimal_case();
    set(&mut s, "layers", 1, 1, C::T("12,5"));
    let text = csv(&s);
    let raw = read_bytes(text.as_bytes(), "csv").unwrap();
    let problems = parse(&raw, "stem").unwrap_err();
    // [case] is line 1, [materials] 2-4, [layers] 5, its header 6, the data row 7.
    let p = at(&problems, "layers", "B7");
    assert_eq!(
        p.to_string(),
        "layers!B7: expected a number of mm, found \"12,5\"; use a . as the decimal point"
    );
}

#[test]
fn wet_basis_moistures_become_dry_fractions() {
    let mut s = full_case();
    set(&mut s, "case", 4, 1, C::T("wet"));
    let p = ok(&s);
    // Wet basis w (kg water per kg moist product) is X = w / (1 - w) on dry basis: definition
    // of the two bases, common practice.
    let dry = |pct: f64| (pct / 100.0) / (1.0 - pct / 100.0);
    let c = &p.case;
    assert_eq!(c.basis, MoistureBasis::Wet);
    assert_eq!(c.layers[0].initial_moisture, dry(35.0));
    assert_eq!(c.layers[1].initial_moisture, dry(60.0));
    assert!((c.layers[1].initial_moisture - 1.5).abs() < 1e-15);
    assert_eq!(c.target_moisture, Some(dry(12.0)));
    assert_eq!(c.schedule[1].until_moisture, Some(dry(20.0)));
    assert!((c.schedule[1].until_moisture.unwrap() - 0.25).abs() < 1e-15);
    assert_eq!(c.materials[0].diffusivity.x_ref, dry(10.0));
    // RH is never a moisture: it stays a plain fraction.
    assert_eq!(c.schedule[0].humidity, Humidity::Relative(0.85));
}

#[test]
fn wet_basis_at_or_above_100_percent_is_a_problem() {
    let mut s = full_case();
    set(&mut s, "case", 4, 1, C::T("wet"));
    set(&mut s, "layers", 2, 3, C::N(100.0));
    let problems = problems(&s);
    let p = at(&problems, "layers", "D3");
    assert!(p.problem.contains("below 100 %"), "{p}");
    assert_eq!(problems.len(), 1, "{problems:#?}");
}

#[test]
fn formula_cells_count_by_their_cached_value() {
    let mut s = minimal_case();
    set(&mut s, "layers", 1, 1, C::F("=10+2.5", "12.5"));
    let p = ok(&s);
    assert_eq!(p.case.layers[0].thickness, 0.0125);
}

#[test]
fn formula_without_cached_value_is_a_problem_at_its_cell() {
    let mut s = minimal_case();
    set(&mut s, "layers", 1, 1, C::F("=B9*2", ""));
    let problems = problems(&s);
    let p = at(&problems, "layers", "B2");
    assert!(p.problem.contains("formula with no cached value"), "{p}");
    assert_eq!(problems.len(), 1, "{problems:#?}");
}

#[test]
fn spreadsheet_error_values_are_problems_at_their_cell() {
    let mut s = minimal_case();
    set(&mut s, "layers", 1, 2, C::F("=1/0", "#DIV/0!"));
    let problems = problems(&s);
    assert_eq!(
        at(&problems, "layers", "C2").problem,
        "expected a number of %, found #DIV/0!"
    );
}

#[test]
fn profile_hours_accept_commas_semicolons_or_one_number() {
    let mut s = minimal_case();
    set(&mut s, "case", 0, 0, C::T("profile_hours"));
    set(&mut s, "case", 0, 1, C::T("0; 0.5, 2 ,8;"));
    let p = ok(&s);
    assert_eq!(
        p.case.profile_times,
        Some(vec![0.0, 1800.0, 7200.0, 28_800.0])
    );
    set(&mut s, "case", 0, 1, C::N(5.0));
    assert_eq!(ok(&s).case.profile_times, Some(vec![18_000.0]));
    set(&mut s, "case", 0, 1, C::T("0, two"));
    let problems = problems(&s);
    assert!(at(&problems, "case", "B1").problem.contains("\"two\""));
}

#[test]
fn measured_sheet_is_read() {
    let mut s = minimal_case();
    s.push((
        "measured",
        vec![
            texts(&["hours", "moisture_pct", "surface_temp_c"]),
            vec![C::N(0.0), C::N(40.0)],
            vec![C::N(24.0), C::T("31.5"), C::N(28.0)],
        ],
    ));
    let p = ok(&s);
    assert_eq!(p.measured.len(), 2);
    assert_eq!(p.measured[1].hours, 24.0);
    assert_eq!(p.measured[1].moisture_pct, 31.5);
    assert_eq!(p.measured[1].moisture, 0.315);
    assert_eq!(p.measured[1].surface_temp_c, Some(28.0));
    assert_eq!(p.measured[0].centre_temp_c, None);
}

#[test]
fn every_problem_is_collected_with_its_cell() {
    let mut s = full_case();
    set(&mut s, "case", 1, 1, C::T("cube"));
    set(&mut s, "layers", 1, 2, C::N(-5.0));
    set(&mut s, "materials", 2, 1, C::T("dense"));
    set(&mut s, "schedule", 1, 4, C::N(140.0));
    let problems = problems(&s);
    let lines: Vec<String> = problems.iter().map(|p| p.to_string()).collect();
    assert_eq!(
        lines,
        vec![
            "case!B2: geometry must be one of slab, cylinder, sphere; found \"cube\"",
            "layers!C2: thickness_mm must be a number > 0, found -5",
            "materials!B3: expected a number of kg/m3, found \"dense\"",
            "schedule!E2: rh_pct must be between 0 and 100, found 140",
        ]
    );
}

#[test]
fn case_check_problems_point_at_the_cells_they_came_from() {
    let mut s = full_case();
    // A cylinder has one surface: exposed b is refused by the case checks.
    set(&mut s, "case", 1, 1, C::T("cylinder"));
    set(&mut s, "case", 2, 1, C::T("b"));
    // GAB K must be below 1.
    set(&mut s, "materials", 1, 10, C::N(1.2));
    // The first step cannot ramp; a step before the last needs an end.
    set(&mut s, "schedule", 1, 12, C::T("yes"));
    set(&mut s, "schedule", 2, 1, C::E);
    set(&mut s, "schedule", 2, 2, C::E);
    let problems = problems(&s);
    assert!(at(&problems, "case", "B3").problem.contains("one surface"));
    assert!(at(&problems, "materials", "K2").problem.contains("(iso_c)"));
    assert!(
        at(&problems, "schedule", "M2")
            .problem
            .contains("first step")
    );
    assert!(
        at(&problems, "schedule", "B3")
            .problem
            .contains("before the last")
    );
    // The ramped step 2 lost its hours as well.
    assert!(
        at(&problems, "schedule", "M3")
            .problem
            .contains("needs hours")
    );
    assert_eq!(problems.len(), 5, "{problems:#?}");
}

#[test]
fn a_check_on_a_column_not_in_the_header_names_the_row() {
    let mut s = minimal_case();
    set(&mut s, "schedule", 2, 0, C::N(35.0));
    set(&mut s, "schedule", 2, 1, C::N(5.0));
    let problems = problems(&s);
    assert_eq!(problems.len(), 1, "{problems:#?}");
    assert_eq!(problems[0].sheet, "schedule");
    assert_eq!(problems[0].cell, "");
    assert!(
        problems[0]
            .problem
            .starts_with("row 2, column hours (not in the header): a step before the last"),
        "{}",
        problems[0]
    );
}

#[test]
fn exchange_and_humidity_are_given_once_per_step() {
    let mut s = full_case();
    set(&mut s, "schedule", 1, 9, C::N(0.001));
    set(&mut s, "schedule", 2, 4, C::N(70.0));
    let problems = problems(&s);
    let p = at(&problems, "schedule", "J2");
    assert!(
        p.problem.contains("hm_m_s (J2) and air_velocity_m_s (L2)"),
        "{p}"
    );
    let p = at(&problems, "schedule", "E3");
    assert!(
        p.problem.contains("rh_pct in E3 and wet_bulb_c in F3"),
        "{p}"
    );
    assert_eq!(problems.len(), 2, "{problems:#?}");
}

#[test]
fn a_sealed_body_ignores_exchange_columns_with_a_warning() {
    let mut s = minimal_case();
    set(&mut s, "case", 0, 0, C::T("exposed"));
    set(&mut s, "case", 0, 1, C::T("none"));
    let p = ok(&s);
    assert_eq!(p.case.schedule[0].exchange, Exchange::Unspecified);
    assert_eq!(p.warnings.len(), 1);
    assert!(
        p.warnings[0].starts_with("schedule!B2: exposed is none"),
        "{:?}",
        p.warnings
    );
}

#[test]
fn ramp_words_and_logical_cells() {
    let mut s = full_case();
    for (cell, want) in [
        (C::T("TRUE"), true),
        (C::B(true), true),
        (C::N(1.0), true),
        (C::T("0"), false),
        (C::T("no"), false),
    ] {
        set(&mut s, "schedule", 2, 12, cell);
        set(&mut s, "schedule", 2, 1, C::N(10.0));
        assert_eq!(ok(&s).case.schedule[1].ramp, want);
    }
    set(&mut s, "schedule", 2, 12, C::T("maybe"));
    let problems = problems(&s);
    assert!(
        at(&problems, "schedule", "M3")
            .problem
            .contains("yes, no, true, false, 1, 0")
    );
}

#[test]
fn cells_per_layer_must_be_an_integer_of_at_least_4() {
    for (value, ok_value) in [
        (C::N(3.0), None),
        (C::T("12.5"), None),
        (C::N(8.0), Some(8)),
    ] {
        let mut s = minimal_case();
        set(&mut s, "case", 0, 0, C::T("cells_per_layer"));
        set(&mut s, "case", 0, 1, value);
        match ok_value {
            Some(n) => assert_eq!(ok(&s).case.cells_per_layer, n),
            None => {
                let problems = problems(&s);
                assert!(at(&problems, "case", "B1").problem.contains("integer >= 4"));
            }
        }
    }
}

#[test]
fn isotherm_parameters_are_required_per_isotherm() {
    let mut s = full_case();
    set(&mut s, "materials", 1, 10, C::E);
    // Wood takes no parameters; one given is ignored with a warning.
    let problems = problems(&s);
    assert!(
        at(&problems, "materials", "K2")
            .problem
            .contains("needs iso_c")
    );
    assert_eq!(problems.len(), 1, "{problems:#?}");
    let mut s = full_case();
    set(&mut s, "materials", 2, 8, C::N(1.0));
    let p = ok(&s);
    assert!(p.warnings[0].starts_with("materials!I3: iso_a is not used by isotherm wood"));
}

#[test]
fn range_problems_quote_the_value_and_range_in_the_users_unit() {
    let mut s = minimal_case();
    // 20000 mm is 20 m: beyond the plausible 10 m (1e-6 to 10 m, the case's guard), shown in
    // mm as typed (1 m = 1000 mm, SI definition).
    set(&mut s, "layers", 1, 1, C::N(20000.0));
    // 2e6 h: beyond the plausible 3.6e9 s = 1e6 h (1 h = 3600 s, SI definition).
    set(&mut s, "case", 0, 0, C::T("end_hours"));
    set(&mut s, "case", 0, 1, C::N(2e6));
    let problems = problems(&s);
    assert_eq!(
        at(&problems, "layers", "B2").problem,
        "thickness_mm 20000 is outside the plausible range 0.001 to 10000 mm"
    );
    assert_eq!(
        at(&problems, "case", "B1").problem,
        "end_hours 2000000 is outside the plausible range 0.001 to 1000000 h"
    );
    // Not said again in SI by the case checks.
    assert_eq!(problems.len(), 2, "{problems:#?}");
}

#[test]
fn an_empty_table_is_reported_where_its_first_row_goes_and_nothing_follows_from_it() {
    // Header only: the first layer would go in A2. An air-side schedule cannot be judged
    // without a surface material, so it adds nothing to "no layer is defined".
    let mut s = minimal_case();
    s[2].1.truncate(1);
    s[3].1 = vec![
        texts(&["dry_bulb_c", "rh_pct", "hm_m_s"]),
        vec![C::N(30.0), C::N(40.0), C::N(0.01)],
    ];
    let found = problems(&s);
    assert_eq!(at(&found, "layers", "A2").problem, "no layer is defined");
    assert_eq!(found.len(), 1, "{found:#?}");
    // No header either: A1, where the header goes.
    s[2].1.clear();
    let found = problems(&s);
    assert_eq!(at(&found, "layers", "A1").problem, "no layer is defined");
    // An empty schedule the same way.
    let mut s = minimal_case();
    s[3].1.truncate(1);
    let found = problems(&s);
    assert_eq!(
        at(&found, "schedule", "A2").problem,
        "the schedule has no step"
    );
}
