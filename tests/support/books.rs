//! Case workbooks written by the tests themselves, from the format page alone: the same sheets
//! as .xlsx (rust_xlsxwriter), .ods (a minimal OpenDocument zip) and sectioned .csv.
#![allow(dead_code)]

use std::io::Write;
use std::path::Path;

/// A cell value.
#[derive(Debug, Clone, PartialEq)]
pub enum V {
    /// Empty.
    E,
    /// Number.
    N(f64),
    /// Text.
    T(&'static str),
}

/// A sheet: name and rows.
pub type Sheet = (&'static str, Vec<Vec<V>>);

pub fn write_xlsx(path: &Path, sheets: &[Sheet]) {
    let mut wb = rust_xlsxwriter::Workbook::new();
    for (name, rows) in sheets {
        let ws = wb.add_worksheet();
        ws.set_name(*name).expect("sheet name");
        for (r, row) in rows.iter().enumerate() {
            for (c, v) in row.iter().enumerate() {
                let (r, c) = (r as u32, c as u16);
                match v {
                    V::E => {}
                    V::N(x) => {
                        ws.write_number(r, c, *x).expect("number");
                    }
                    V::T(s) => {
                        ws.write_string(r, c, *s).expect("text");
                    }
                }
            }
        }
    }
    wb.save(path).expect("saved");
}

fn xml_escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

pub fn write_ods(path: &Path, sheets: &[Sheet]) {
    let mut content = String::from(
        r#"<?xml version="1.0" encoding="UTF-8"?>
<office:document-content xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0" xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0" xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0" office:version="1.2"><office:body><office:spreadsheet>"#,
    );
    for (name, rows) in sheets {
        content.push_str(&format!(
            r#"<table:table table:name="{}">"#,
            xml_escape(name)
        ));
        for row in rows {
            content.push_str("<table:table-row>");
            for v in row {
                match v {
                    V::E => content.push_str("<table:table-cell/>"),
                    V::N(x) => content.push_str(&format!(
                        r#"<table:table-cell office:value-type="float" office:value="{x:e}"><text:p>{x}</text:p></table:table-cell>"#
                    )),
                    V::T(s) => content.push_str(&format!(
                        r#"<table:table-cell office:value-type="string"><text:p>{}</text:p></table:table-cell>"#,
                        xml_escape(s)
                    )),
                }
            }
            content.push_str("</table:table-row>");
        }
        content.push_str("</table:table>");
    }
    content.push_str("</office:spreadsheet></office:body></office:document-content>");
    let manifest = r#"<?xml version="1.0" encoding="UTF-8"?>
<manifest:manifest xmlns:manifest="urn:oasis:names:tc:opendocument:xmlns:manifest:1.0" manifest:version="1.2"><manifest:file-entry manifest:full-path="/" manifest:media-type="application/vnd.oasis.opendocument.spreadsheet"/><manifest:file-entry manifest:full-path="content.xml" manifest:media-type="text/xml"/></manifest:manifest>"#;
    let file = std::fs::File::create(path).expect("create");
    let mut zip = zip::ZipWriter::new(file);
    let stored =
        zip::write::SimpleFileOptions::default().compression_method(zip::CompressionMethod::Stored);
    zip.start_file("mimetype", stored).expect("zip");
    zip.write_all(b"application/vnd.oasis.opendocument.spreadsheet")
        .expect("zip");
    let deflated = zip::write::SimpleFileOptions::default()
        .compression_method(zip::CompressionMethod::Deflated);
    zip.start_file("META-INF/manifest.xml", deflated)
        .expect("zip");
    zip.write_all(manifest.as_bytes()).expect("zip");
    zip.start_file("content.xml", deflated).expect("zip");
    zip.write_all(content.as_bytes()).expect("zip");
    zip.finish().expect("zip");
}

pub fn write_csv(path: &Path, sheets: &[Sheet]) {
    let mut out = String::new();
    for (name, rows) in sheets {
        out.push_str(&format!("[{name}]\n"));
        for row in rows {
            let fields: Vec<String> = row
                .iter()
                .map(|v| match v {
                    V::E => String::new(),
                    V::N(x) => format!("{x:e}"),
                    V::T(s) if s.contains([',', '"']) => format!("\"{}\"", s.replace('"', "\"\"")),
                    V::T(s) => s.to_string(),
                })
                .collect();
            out.push_str(&fields.join(","));
            out.push('\n');
        }
    }
    std::fs::write(path, out).expect("csv");
}

/// A slab dried from both faces with the surface held at 10 %: it has a series solution.
pub fn series_case(title: &'static str) -> Vec<Sheet> {
    use V::*;
    vec![
        (
            "case",
            vec![
                vec![T("title"), T(title)],
                vec![T("geometry"), T("slab")],
                vec![T("exposed"), T("both")],
                vec![T("end_hours"), N(10.0)],
                vec![T("output_every_min"), N(6.0)],
                vec![T("profile_hours"), T("0, 1, 2.5")],
            ],
        ),
        (
            "layers",
            vec![
                vec![
                    T("name"),
                    T("material"),
                    T("thickness_mm"),
                    T("initial_moisture_pct"),
                ],
                vec![T("slab"), T("demo"), N(12.0), N(60.0)],
            ],
        ),
        (
            "materials",
            vec![
                vec![T("material"), T("dry_density_kg_m3"), T("d_ref_m2_s")],
                vec![T("demo"), N(450.0), N(5e-10)],
            ],
        ),
        (
            "schedule",
            vec![
                vec![T("step"), T("dry_bulb_c"), T("surface_moisture_pct")],
                vec![T("hold"), N(50.0), N(10.0)],
            ],
        ),
    ]
}

/// A two-layer slab with isotherms, air-side exchange, a wet-bulb step, a ramp and a moisture trigger.
pub fn rich_case() -> Vec<Sheet> {
    use V::*;
    vec![
        (
            "case",
            vec![
                vec![T("title"), T("rich case")],
                vec![T("geometry"), T("slab")],
                vec![T("exposed"), T("a")],
                vec![T("end_hours"), N(48.0)],
                vec![T("target_moisture_pct"), N(15.0)],
                vec![T("output_every_min"), N(30.0)],
            ],
        ),
        (
            "layers",
            vec![
                vec![
                    T("name"),
                    T("material"),
                    T("thickness_mm"),
                    T("initial_moisture_pct"),
                ],
                vec![T("skin"), T("skin"), N(1.0), N(40.0)],
                vec![T("core"), T("core"), N(9.0), N(60.0)],
            ],
        ),
        (
            "materials",
            vec![
                vec![
                    T("material"),
                    T("dry_density_kg_m3"),
                    T("d_ref_m2_s"),
                    T("activation_energy_kj_mol"),
                    T("moisture_coef"),
                    T("isotherm"),
                    T("iso_a"),
                    T("iso_b"),
                    T("iso_c"),
                ],
                vec![
                    T("skin"),
                    N(700.0),
                    N(2e-10),
                    N(20.0),
                    N(1.0),
                    T("gab"),
                    N(0.08),
                    N(8.0),
                    N(0.85),
                ],
                vec![
                    T("core"),
                    N(500.0),
                    N(8e-10),
                    N(30.0),
                    N(2.0),
                    T("wood"),
                    E,
                    E,
                    E,
                ],
            ],
        ),
        (
            "schedule",
            vec![
                vec![
                    T("step"),
                    T("hours"),
                    T("until_moisture_pct"),
                    T("dry_bulb_c"),
                    T("rh_pct"),
                    T("wet_bulb_c"),
                    T("hm_m_s"),
                    T("ramp"),
                ],
                vec![T("start"), N(6.0), N(50.0), N(45.0), N(80.0), E, N(0.01), E],
                vec![
                    T("warm"),
                    N(12.0),
                    E,
                    N(60.0),
                    E,
                    N(50.0),
                    N(0.01),
                    T("yes"),
                ],
                vec![T("dry"), E, E, N(60.0), N(40.0), E, N(0.01), T("no")],
            ],
        ),
    ]
}

/// [`series_case`] on a fine mesh with a tight step tolerance, so that one run takes seconds
/// (about 2.6 s for 20,000 cells at 1e-10 on one idle core of the development machine in
/// December 2026; see [`very_slow_case`] for one that outlasts any test's wait).
pub fn slow_case(title: &'static str, cells: f64, tolerance: f64) -> Vec<Sheet> {
    let mut sheets = series_case(title);
    sheets[0].1.push(vec![V::T("cells_per_layer"), V::N(cells)]);
    sheets[0].1.push(vec![V::T("tolerance"), V::N(tolerance)]);
    sheets
}

/// The slowest case the input limits allow of [`series_case`]: 100,000 cells (50,000 per half),
/// tolerance 1e-10, and a diffusivity that rises with moisture (moisture_coef 3), so every stage
/// takes several Newton iterations (about half a minute on one idle core in December 2026).
pub fn very_slow_case(title: &'static str) -> Vec<Sheet> {
    let mut sheets = slow_case(title, 50000.0, 1e-10);
    let materials = &mut sheets[2].1;
    materials[0].push(V::T("moisture_coef"));
    materials[1].push(V::N(3.0));
    sheets
}
