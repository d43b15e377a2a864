//! Builds case workbooks for the reader tests, as xlsx (rust_xlsxwriter, deterministic) and as
//! the sectioned CSV form, from one description of sheets and cells.
#![allow(dead_code, clippy::unwrap_used)]

use rust_xlsxwriter::{DocProperties, ExcelDateTime, Formula, Workbook};
use sha2::{Digest, Sha256};

/// One cell of a test workbook.
#[derive(Debug, Clone)]
pub enum C {
    /// Empty.
    E,
    /// A number cell.
    N(f64),
    /// A text cell.
    T(&'static str),
    /// A logical cell.
    B(bool),
    /// A formula with a cached result (`""` writes no result).
    F(&'static str, &'static str),
}

/// A sheet: name and rows of cells from A1.
pub type Sheet = (&'static str, Vec<Vec<C>>);

/// Shorthand for a row of text cells; `""` is an empty cell.
pub fn texts(cells: &[&'static str]) -> Vec<C> {
    cells
        .iter()
        .map(|s| if s.is_empty() { C::E } else { C::T(s) })
        .collect()
}

/// The sheets as xlsx bytes with a fixed creation time, so the same sheets give the same bytes.
pub fn xlsx(sheets: &[Sheet]) -> Vec<u8> {
    let mut wb = Workbook::new();
    let when = ExcelDateTime::from_ymd(2024, 1, 1)
        .unwrap()
        .and_hms(0, 0, 0)
        .unwrap();
    wb.set_properties(&DocProperties::new().set_creation_datetime(&when));
    for (name, rows) in sheets {
        let ws = wb.add_worksheet();
        ws.set_name(*name).unwrap();
        // A formula written without a result keeps an empty cached value, not the writer's 0.
        ws.set_formula_result_default("");
        for (r, row) in rows.iter().enumerate() {
            for (c, cell) in row.iter().enumerate() {
                let (r, c) = (r as u32, c as u16);
                match cell {
                    C::E => {}
                    C::N(x) => {
                        ws.write_number(r, c, *x).unwrap();
                    }
                    C::T(s) => {
                        ws.write_string(r, c, *s).unwrap();
                    }
                    C::B(b) => {
                        ws.write_boolean(r, c, *b).unwrap();
                    }
                    C::F(f, result) => {
                        let mut formula = Formula::new(*f);
                        if !result.is_empty() {
                            formula = formula.set_result(*result);
                        }
                        ws.write_formula(r, c, formula).unwrap();
                    }
                }
            }
        }
    }
    wb.save_to_buffer().unwrap()
}

fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) || s.trim() != s {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// The sheets in the sectioned CSV form: `[name]`, then the rows. Numbers are written as
/// numeric text, formulas as their cached result.
pub fn csv(sheets: &[Sheet]) -> String {
    let mut out = String::new();
    for (name, rows) in sheets {
        out.push_str(&format!("[{name}]\n"));
        for row in rows {
            let fields: Vec<String> = row
                .iter()
                .map(|cell| match cell {
                    C::E => String::new(),
                    C::N(x) => format!("{x}"),
                    C::T(s) => csv_field(s),
                    C::B(b) => String::from(if *b { "TRUE" } else { "FALSE" }),
                    C::F(_, result) => csv_field(result),
                })
                .collect();
            out.push_str(&fields.join(","));
            out.push('\n');
        }
    }
    out
}

/// CRC-32 (IEEE 802.3, reflected polynomial 0xEDB88320), as the zip format uses it.
fn crc32(data: &[u8]) -> u32 {
    let mut crc = 0xFFFF_FFFFu32;
    for &b in data {
        crc ^= u32::from(b);
        for _ in 0..8 {
            crc = if crc & 1 != 0 {
                (crc >> 1) ^ 0xEDB8_8320
            } else {
                crc >> 1
            };
        }
    }
    !crc
}

/// A valid zip archive (stored, no compression) holding `files`, laid out as PKWARE's
/// APPNOTE.TXT (sections 4.3.7, 4.3.12, 4.3.16) describes: local headers, central
/// directory, end record. Fixed time stamps keep it deterministic.
pub fn stored_zip(files: &[(&str, &[u8])]) -> Vec<u8> {
    let mut out = Vec::new();
    let mut central = Vec::new();
    for (name, data) in files {
        let offset = out.len() as u32;
        let crc = crc32(data);
        let size = data.len() as u32;
        let le16 = |v: &mut Vec<u8>, x: u16| v.extend_from_slice(&x.to_le_bytes());
        let le32 = |v: &mut Vec<u8>, x: u32| v.extend_from_slice(&x.to_le_bytes());
        le32(&mut out, 0x0403_4b50);
        for x in [20u16, 0, 0, 0, 0x21] {
            le16(&mut out, x);
        }
        for x in [crc, size, size] {
            le32(&mut out, x);
        }
        le16(&mut out, name.len() as u16);
        le16(&mut out, 0);
        out.extend_from_slice(name.as_bytes());
        out.extend_from_slice(data);

        le32(&mut central, 0x0201_4b50);
        for x in [20u16, 20, 0, 0, 0, 0x21] {
            le16(&mut central, x);
        }
        for x in [crc, size, size] {
            le32(&mut central, x);
        }
        for x in [name.len() as u16, 0, 0, 0, 0] {
            le16(&mut central, x);
        }
        le32(&mut central, 0);
        le32(&mut central, offset);
        central.extend_from_slice(name.as_bytes());
    }
    let cd_offset = out.len() as u32;
    let cd_size = central.len() as u32;
    out.extend_from_slice(&central);
    out.extend_from_slice(&0x0605_4b50u32.to_le_bytes());
    for x in [0u16, 0, files.len() as u16, files.len() as u16] {
        out.extend_from_slice(&x.to_le_bytes());
    }
    out.extend_from_slice(&cd_size.to_le_bytes());
    out.extend_from_slice(&cd_offset.to_le_bytes());
    out.extend_from_slice(&0u16.to_le_bytes());
    out
}

fn xml_escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// The sheets as a minimal OpenDocument spreadsheet (mimetype, manifest, content.xml as
/// ODF 1.2 part 1, section 9.1 describes tables). Formulas keep their cached result, or none.
pub fn ods(sheets: &[Sheet]) -> Vec<u8> {
    let mut content = String::from(
        "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\
         <office:document-content \
         xmlns:office=\"urn:oasis:names:tc:opendocument:xmlns:office:1.0\" \
         xmlns:table=\"urn:oasis:names:tc:opendocument:xmlns:table:1.0\" \
         xmlns:text=\"urn:oasis:names:tc:opendocument:xmlns:text:1.0\" \
         office:version=\"1.2\"><office:body><office:spreadsheet>",
    );
    for (name, rows) in sheets {
        content.push_str(&format!(
            "<table:table table:name=\"{}\">",
            xml_escape(name)
        ));
        for row in rows {
            content.push_str("<table:table-row>");
            for cell in row {
                let text = |s: &str| {
                    format!(
                        "<table:table-cell office:value-type=\"string\"><text:p>{}</text:p>\
                         </table:table-cell>",
                        xml_escape(s)
                    )
                };
                content.push_str(&match cell {
                    C::E => String::from("<table:table-cell/>"),
                    C::N(x) => format!(
                        "<table:table-cell office:value-type=\"float\" office:value=\"{x}\">\
                         <text:p>{x}</text:p></table:table-cell>"
                    ),
                    C::T(s) => text(s),
                    C::B(b) => format!(
                        "<table:table-cell office:value-type=\"boolean\" \
                         office:boolean-value=\"{b}\"><text:p>{b}</text:p></table:table-cell>"
                    ),
                    C::F(f, "") => {
                        format!("<table:table-cell table:formula=\"of:{}\"/>", xml_escape(f))
                    }
                    C::F(f, r) => format!(
                        "<table:table-cell table:formula=\"of:{}\" office:value-type=\"float\" \
                         office:value=\"{r}\"><text:p>{r}</text:p></table:table-cell>",
                        xml_escape(f)
                    ),
                });
            }
            content.push_str("</table:table-row>");
        }
        content.push_str("</table:table>");
    }
    content.push_str("</office:spreadsheet></office:body></office:document-content>");
    let manifest = "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\
        <manifest:manifest xmlns:manifest=\"urn:oasis:names:tc:opendocument:xmlns:manifest:1.0\" \
        manifest:version=\"1.2\">\
        <manifest:file-entry manifest:full-path=\"/\" \
        manifest:media-type=\"application/vnd.oasis.opendocument.spreadsheet\"/>\
        <manifest:file-entry manifest:full-path=\"content.xml\" manifest:media-type=\"text/xml\"/>\
        </manifest:manifest>";
    stored_zip(&[
        (
            "mimetype",
            b"application/vnd.oasis.opendocument.spreadsheet",
        ),
        ("META-INF/manifest.xml", manifest.as_bytes()),
        ("content.xml", content.as_bytes()),
    ])
}

/// SHA-256 of `bytes`.
pub fn sha256(bytes: &[u8]) -> Vec<u8> {
    Sha256::digest(bytes).to_vec()
}

/// An invented kiln charge: a slab dried from face A (face B is the mid-plane), a 2 mm veneer
/// skin (GAB) over 23 mm of spruce (wood isotherm), three steps with RH and wet bulb, a ramp
/// and a moisture trigger.
pub fn full_case() -> Vec<Sheet> {
    use C::*;
    vec![
        (
            "case",
            vec![
                vec![T("title"), T("Kiln charge 7")],
                vec![T("geometry"), T("slab")],
                vec![
                    T("exposed"),
                    T("a"),
                    T("half board, face B is the mid-plane"),
                ],
                vec![T("coupling"), T("moisture")],
                vec![T("moisture_basis"), T("dry")],
                vec![T("cells_per_layer"), N(20.0)],
                vec![T("end_hours"), N(200.0)],
                vec![T("target_moisture_pct"), N(12.0)],
                vec![T("output_every_min"), N(30.0)],
                vec![T("profile_hours"), T("0, 6, 24, 78")],
                vec![T("flow_length_mm"), N(1200.0)],
                vec![T("tolerance"), N(0.0005)],
            ],
        ),
        (
            "layers",
            vec![
                texts(&[
                    "name",
                    "material",
                    "thickness_mm",
                    "initial_moisture_pct",
                    "initial_temp_c",
                ]),
                vec![T("skin"), T("veneer"), N(2.0), N(35.0), N(18.0)],
                vec![T("core"), T("spruce"), N(23.0), N(60.0)],
            ],
        ),
        (
            "materials",
            vec![
                texts(&[
                    "material",
                    "dry_density_kg_m3",
                    "d_ref_m2_s",
                    "d_ref_temp_c",
                    "d_ref_moisture_pct",
                    "activation_energy_kj_mol",
                    "moisture_coef",
                    "isotherm",
                    "iso_a",
                    "iso_b",
                    "iso_c",
                ]),
                vec![
                    T("veneer"),
                    N(520.0),
                    N(2.5e-10),
                    N(40.0),
                    N(10.0),
                    N(30.0),
                    N(2.0),
                    T("gab"),
                    N(0.06),
                    N(10.0),
                    N(0.8),
                ],
                vec![
                    T("spruce"),
                    N(430.0),
                    N(1.0e-10),
                    N(50.0),
                    N(15.0),
                    N(35.0),
                    N(3.5),
                    T("wood"),
                ],
            ],
        ),
        (
            "schedule",
            vec![
                texts(&[
                    "step",
                    "hours",
                    "until_moisture_pct",
                    "dry_bulb_c",
                    "rh_pct",
                    "wet_bulb_c",
                    "equilibrium_moisture_pct",
                    "surface_moisture_pct",
                    "surface_coef_m_s",
                    "hm_m_s",
                    "h_w_m2k",
                    "air_velocity_m_s",
                    "ramp",
                ]),
                vec![
                    T("warm-up"),
                    N(6.0),
                    E,
                    N(40.0),
                    N(85.0),
                    E,
                    E,
                    E,
                    E,
                    E,
                    E,
                    N(2.5),
                    T("no"),
                ],
                vec![
                    T("drying"),
                    N(72.0),
                    N(20.0),
                    N(60.0),
                    E,
                    N(50.0),
                    E,
                    E,
                    E,
                    N(0.002),
                    N(15.0),
                    E,
                    T("Yes"),
                ],
                vec![T("conditioning"), E, E, N(55.0), N(60.0), E, E, E, N(1e-7)],
            ],
        ),
    ]
}

/// A small valid case where nearly everything is left to its default.
pub fn minimal_case() -> Vec<Sheet> {
    use C::*;
    vec![
        ("case", vec![]),
        (
            "materials",
            vec![
                texts(&["material", "dry_density_kg_m3", "d_ref_m2_s"]),
                vec![T("board"), N(500.0), N(1e-9)],
            ],
        ),
        (
            "layers",
            vec![
                texts(&["material", "thickness_mm", "initial_moisture_pct"]),
                vec![T("board"), N(10.0), N(40.0)],
            ],
        ),
        (
            "schedule",
            vec![
                texts(&["dry_bulb_c", "surface_moisture_pct"]),
                vec![N(30.0), N(8.0)],
            ],
        ),
    ]
}

/// Replaces the cell at (`row`, `col`) of sheet `name`, growing the row as needed.
pub fn set(sheets: &mut [Sheet], name: &str, row: usize, col: usize, cell: C) {
    let (_, rows) = sheets.iter_mut().find(|(n, _)| *n == name).unwrap();
    while rows.len() <= row {
        rows.push(Vec::new());
    }
    let r = &mut rows[row];
    while r.len() <= col {
        r.push(C::E);
    }
    r[col] = cell;
}
