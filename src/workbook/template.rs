//! Example case workbooks for `dampfront new`: invented demonstration scenarios, each
//! ready to run, with notes in column C of the `case` sheet and on the table headers.
//!
//! The numbers here are demonstration data, chosen to be plausible for the product, not
//! measured properties: replace them with your own material data.

use rust_xlsxwriter::{DocProperties, ExcelDateTime, Format, Note, Workbook, XlsxError};

#[path = "template_lab.rs"]
mod lab;
pub use lab::{LAB_TRUE_BETA, LAB_TRUE_D, lab};

/// A kind of example.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// A 50 mm hardwood board under a moisture-stepped kiln schedule.
    Wood,
    /// Apple slices in a tray dryer with a given air velocity.
    Food,
    /// A clay tile under a ramped schedule, with a parameter study (`variants`).
    Clay,
    /// The smallest runnable case: one layer, constant D, fixed surface (has a series check).
    Blank,
    /// A lab apple slice on a balance: measured points and a `fit` sheet estimating D and the
    /// surface coefficient.
    Lab,
}

impl Kind {
    /// Every kind, in the order the command line lists them.
    pub const ALL: [Kind; 5] = [Kind::Wood, Kind::Food, Kind::Clay, Kind::Blank, Kind::Lab];

    /// The name used on the command line and for template files.
    pub fn name(self) -> &'static str {
        match self {
            Kind::Wood => "wood",
            Kind::Food => "food",
            Kind::Clay => "clay",
            Kind::Blank => "blank",
            Kind::Lab => "lab",
        }
    }

    /// Parses a command-line name.
    pub fn from_name(name: &str) -> Option<Kind> {
        Kind::ALL
            .into_iter()
            .find(|k| k.name().eq_ignore_ascii_case(name.trim()))
    }
}

/// A cell of a template sheet.
#[derive(Debug, Clone, PartialEq)]
pub enum Cell {
    /// Nothing.
    Empty,
    /// A number cell.
    Number(f64),
    /// A text cell.
    Text(String),
}

impl From<f64> for Cell {
    fn from(v: f64) -> Cell {
        Cell::Number(v)
    }
}

impl From<&str> for Cell {
    fn from(v: &str) -> Cell {
        if v.is_empty() {
            Cell::Empty
        } else {
            Cell::Text(v.to_string())
        }
    }
}

/// One sheet of a template: rows of cells and notes on header cells.
#[derive(Debug, Clone, PartialEq)]
pub struct Sheet {
    /// Sheet name.
    pub name: String,
    /// Rows from the first.
    pub rows: Vec<Vec<Cell>>,
    /// Column explanations for table sheets (header name, meaning).
    pub column_notes: Vec<(String, String)>,
}

fn key_sheet(rows: &[(&str, Cell, &str)]) -> Sheet {
    // A key sheet has no header row: the format reads column A as keys from the first row.
    let mut out = Vec::new();
    for (k, v, note) in rows {
        out.push(vec![Cell::from(*k), v.clone(), Cell::from(*note)]);
    }
    Sheet {
        name: String::from("case"),
        rows: out,
        column_notes: Vec::new(),
    }
}

fn table(name: &str, headers: &[&str], rows: Vec<Vec<Cell>>) -> Sheet {
    let mut all = vec![headers.iter().map(|h| Cell::from(*h)).collect::<Vec<_>>()];
    all.extend(rows);
    Sheet {
        name: name.to_string(),
        rows: all,
        column_notes: headers
            .iter()
            .filter_map(|h| column_meaning(h).map(|m| (h.to_string(), m.to_string())))
            .collect(),
    }
}

/// A header's note: the schema's, written once for parser, templates and docs.
fn column_meaning(header: &str) -> Option<&'static str> {
    if header.contains('.') {
        return Some(
            "the input this column replaces in each variant: SHEET.COLUMN[ROW] (ROW counts data \
             rows from 1, * is every row) or case.KEY; an empty cell keeps the base value",
        );
    }
    super::schema::note(header)
}

fn n(v: f64) -> Cell {
    Cell::Number(v)
}

fn t(v: &str) -> Cell {
    Cell::from(v)
}

/// The `materials` columns of an isothermal case: the format's list up to `iso_c`, leaving out
/// the coupled-run columns (conductivity, specific heat).
fn material_headers() -> Vec<&'static str> {
    let mut columns = super::schema::MATERIALS.names();
    let end = columns
        .iter()
        .position(|c| *c == "iso_c")
        .map_or(columns.len(), |i| i + 1);
    columns.truncate(end);
    columns
}
/// The sheets of an example workbook.
pub fn sheets(kind: Kind) -> Vec<Sheet> {
    match kind {
        Kind::Wood => wood(),
        Kind::Food => food(),
        Kind::Clay => clay(),
        Kind::Blank => blank(),
        Kind::Lab => lab(),
    }
}

fn wood() -> Vec<Sheet> {
    vec![
        key_sheet(&[
            (
                "title",
                t("Demo: 50 mm hardwood board, kiln schedule by dry and wet bulb"),
                "shown on every result sheet",
            ),
            ("geometry", t("slab"), "slab, cylinder or sphere"),
            (
                "exposed",
                t("both"),
                "faces exchanging with the air: a, b, both or none",
            ),
            (
                "coupling",
                t("heat_and_moisture"),
                "the board's own temperature is solved (evaporative cooling, heating up)",
            ),
            (
                "moisture_basis",
                t("dry"),
                "dry: kg water per kg dry wood x 100",
            ),
            ("cells_per_layer", n(40.0), "finite-volume cells per layer"),
            ("end_hours", n(1500.0), "simulated time limit, h"),
            (
                "target_moisture_pct",
                n(8.0),
                "stop when the mean moisture reaches this",
            ),
            (
                "output_every_min",
                n(120.0),
                "spacing of rows on sheet curves, min",
            ),
            (
                "profile_hours",
                t("0, 24, 72, 168, 336"),
                "times of whole profiles, h",
            ),
        ]),
        table(
            "layers",
            &[
                "name",
                "material",
                "thickness_mm",
                "initial_moisture_pct",
                "initial_temp_c",
            ],
            vec![vec![
                t("board"),
                t("demo hardwood"),
                n(50.0),
                n(60.0),
                n(15.0),
            ]],
        ),
        table(
            "materials",
            &super::schema::MATERIALS.names(),
            vec![vec![
                t("demo hardwood"),
                n(600.0),
                n(1.5e-10),
                n(25.0),
                n(20.0),
                n(35.0),
                n(2.0),
                t("wood"),
                Cell::Empty,
                Cell::Empty,
                Cell::Empty,
                n(0.2),
                n(1300.0),
            ]],
        ),
        table(
            "schedule",
            &[
                "step",
                "hours",
                "until_moisture_pct",
                "dry_bulb_c",
                "wet_bulb_c",
                "air_velocity_m_s",
            ],
            vec![
                vec![t("warm-up"), n(12.0), Cell::Empty, n(45.0), n(43.0), n(2.5)],
                vec![t("green"), Cell::Empty, n(40.0), n(50.0), n(46.0), n(2.5)],
                vec![
                    t("fibre saturation"),
                    Cell::Empty,
                    n(28.0),
                    n(55.0),
                    n(48.0),
                    n(2.5),
                ],
                vec![
                    t("below 28 %"),
                    Cell::Empty,
                    n(18.0),
                    n(60.0),
                    n(49.0),
                    n(2.5),
                ],
                vec![
                    t("final drying"),
                    Cell::Empty,
                    Cell::Empty,
                    n(70.0),
                    n(50.0),
                    n(2.5),
                ],
            ],
        ),
    ]
}

fn food() -> Vec<Sheet> {
    vec![
        key_sheet(&[
            (
                "title",
                t("Demo: 6 mm apple slices in a tray dryer"),
                "shown on every result sheet",
            ),
            ("geometry", t("slab"), "slab, cylinder or sphere"),
            (
                "exposed",
                t("both"),
                "slices on a mesh tray dry from both faces",
            ),
            (
                "coupling",
                t("heat_and_moisture"),
                "the slices' own temperature is solved (wet-bulb cooling, then heating up)",
            ),
            (
                "moisture_basis",
                t("wet"),
                "wet: kg water per kg product x 100",
            ),
            ("cells_per_layer", n(40.0), "finite-volume cells per layer"),
            ("end_hours", n(24.0), "simulated time limit, h"),
            (
                "target_moisture_pct",
                n(20.0),
                "stop when the mean moisture reaches this (wet basis)",
            ),
            (
                "output_every_min",
                n(5.0),
                "spacing of rows on sheet curves, min",
            ),
            (
                "profile_hours",
                t("0, 0.5, 1, 2, 3, 4"),
                "times of whole profiles, h",
            ),
            (
                "flow_length_mm",
                n(400.0),
                "tray length along the air flow, mm",
            ),
        ]),
        table(
            "layers",
            &[
                "name",
                "material",
                "thickness_mm",
                "initial_moisture_pct",
                "initial_temp_c",
            ],
            vec![vec![t("slice"), t("demo apple"), n(6.0), n(85.0), n(10.0)]],
        ),
        table(
            "materials",
            &super::schema::MATERIALS.names(),
            vec![vec![
                t("demo apple"),
                n(130.0),
                n(6e-10),
                n(60.0),
                n(0.0),
                n(30.0),
                n(0.0),
                t("gab"),
                n(0.12),
                n(5.0),
                n(0.9),
                n(0.4),
                n(1500.0),
            ]],
        ),
        table(
            "schedule",
            &["step", "hours", "dry_bulb_c", "rh_pct", "air_velocity_m_s"],
            vec![vec![t("drying"), Cell::Empty, n(60.0), n(15.0), n(1.5)]],
        ),
    ]
}

fn clay() -> Vec<Sheet> {
    vec![
        key_sheet(&[
            (
                "title",
                t("Demo: 12 mm clay tile, ramped schedule"),
                "shown on every result sheet",
            ),
            ("geometry", t("slab"), "slab, cylinder or sphere"),
            (
                "exposed",
                t("both"),
                "the tile stands on edge and dries from both faces",
            ),
            (
                "coupling",
                t("moisture"),
                "moisture: isothermal at the air temperature",
            ),
            (
                "moisture_basis",
                t("dry"),
                "dry: kg water per kg dry clay x 100",
            ),
            ("cells_per_layer", n(40.0), "finite-volume cells per layer"),
            ("end_hours", n(96.0), "simulated time limit, h"),
            (
                "target_moisture_pct",
                n(2.0),
                "stop when the mean moisture reaches this",
            ),
            (
                "output_every_min",
                n(15.0),
                "spacing of rows on sheet curves, min",
            ),
            (
                "profile_hours",
                t("0, 3, 6, 12, 18, 24"),
                "times of whole profiles, h",
            ),
        ]),
        table(
            "layers",
            &["name", "material", "thickness_mm", "initial_moisture_pct"],
            vec![vec![t("tile"), t("demo clay body"), n(12.0), n(20.0)]],
        ),
        table(
            "materials",
            &material_headers(),
            vec![vec![
                t("demo clay body"),
                n(1800.0),
                n(3e-9),
                n(25.0),
                n(20.0),
                n(25.0),
                n(10.0),
                t("oswin"),
                n(0.02),
                n(0.45),
                Cell::Empty,
            ]],
        ),
        table(
            "schedule",
            &["step", "hours", "dry_bulb_c", "rh_pct", "hm_m_s", "ramp"],
            vec![
                vec![t("hold humid"), n(6.0), n(25.0), n(85.0), n(0.005), t("no")],
                vec![t("ramp up"), n(24.0), n(60.0), n(30.0), n(0.005), t("yes")],
                vec![t("dry"), Cell::Empty, n(60.0), n(30.0), n(0.005), t("no")],
            ],
        ),
        // A parameter study: each row runs as a case of its own beside the base case above.
        table(
            "variants",
            &[
                "variant",
                "layers.thickness_mm[1]",
                "schedule.dry_bulb_c[2]",
                "schedule.dry_bulb_c[3]",
                "schedule.hm_m_s[*]",
            ],
            vec![
                vec![
                    t("thinner tile"),
                    n(8.0),
                    Cell::Empty,
                    Cell::Empty,
                    Cell::Empty,
                ],
                vec![
                    t("thicker tile"),
                    n(16.0),
                    Cell::Empty,
                    Cell::Empty,
                    Cell::Empty,
                ],
                vec![t("hotter air"), Cell::Empty, n(70.0), n(70.0), Cell::Empty],
                vec![
                    t("faster air"),
                    Cell::Empty,
                    Cell::Empty,
                    Cell::Empty,
                    n(0.01),
                ],
            ],
        ),
    ]
}

fn blank() -> Vec<Sheet> {
    vec![
        key_sheet(&[
            ("title", t("New case"), "shown on every result sheet"),
            ("geometry", t("slab"), "slab, cylinder or sphere"),
            (
                "exposed",
                t("a"),
                "a, b, both or none (cylinder/sphere: a or none)",
            ),
            (
                "coupling",
                t("moisture"),
                "moisture: isothermal at the air temperature",
            ),
            ("moisture_basis", t("dry"), "dry or wet"),
            (
                "cells_per_layer",
                n(40.0),
                "finite-volume cells per layer (>= 4)",
            ),
            ("end_hours", n(48.0), "simulated time limit, h"),
            (
                "target_moisture_pct",
                Cell::Empty,
                "optional: stop when the mean moisture reaches this",
            ),
            (
                "output_every_min",
                Cell::Empty,
                "optional: spacing of rows on sheet curves (default end/400)",
            ),
            (
                "profile_hours",
                Cell::Empty,
                "optional: times of whole profiles, like 0, 2, 8, 24",
            ),
            (
                "flow_length_mm",
                Cell::Empty,
                "optional: surface length along the air flow (default 100)",
            ),
        ]),
        table(
            "layers",
            &["name", "material", "thickness_mm", "initial_moisture_pct"],
            vec![vec![t("layer 1"), t("my material"), n(10.0), n(50.0)]],
        ),
        table(
            "materials",
            &["material", "dry_density_kg_m3", "d_ref_m2_s", "isotherm"],
            vec![vec![t("my material"), n(500.0), n(1e-9), t("none")]],
        ),
        table(
            "schedule",
            &["step", "hours", "dry_bulb_c", "surface_moisture_pct"],
            vec![vec![t("step 1"), Cell::Empty, n(40.0), n(10.0)]],
        ),
    ]
}

/// Writes sheets as an .xlsx workbook, deterministically (fixed document time).
pub fn to_xlsx(sheets: &[Sheet]) -> Result<Vec<u8>, XlsxError> {
    let mut wb = Workbook::new();
    let created = ExcelDateTime::from_ymd(2026, 1, 1)?.and_hms(0, 0, 0)?;
    wb.set_properties(
        &DocProperties::new()
            .set_author("dampfront")
            .set_creation_datetime(&created),
    );
    let bold = Format::new().set_bold();
    for sheet in sheets {
        let ws = wb.add_worksheet();
        ws.set_name(&sheet.name)?;
        for (r, row) in sheet.rows.iter().enumerate() {
            for (c, cell) in row.iter().enumerate() {
                let (r, c) = (r as u32, c as u16);
                match cell {
                    Cell::Empty => {}
                    Cell::Number(v) => {
                        ws.write_number(r, c, *v)?;
                    }
                    Cell::Text(s) if r == 0 && sheet.name != "case" => {
                        ws.write_string_with_format(r, c, s, &bold)?;
                    }
                    Cell::Text(s) => {
                        ws.write_string(r, c, s)?;
                    }
                }
            }
        }
        let width = sheet.rows.first().map_or(0, Vec::len);
        for c in 0..width {
            ws.set_column_width(
                c as u16,
                if sheet.name == "case" && c == 2 {
                    60
                } else {
                    22
                },
            )?;
        }
        for (header, meaning) in &sheet.column_notes {
            let col = sheet.rows[0]
                .iter()
                .position(|c| matches!(c, Cell::Text(s) if s == header));
            if let Some(col) = col {
                ws.insert_note(0, col as u16, &Note::new(meaning).set_author("dampfront"))?;
            }
        }
        if sheet.name != "case" {
            ws.set_freeze_panes(1, 0)?;
        }
    }
    wb.save_to_buffer()
}

/// Writes sheets in the sectioned CSV form (`[case]`, `[layers]`, ...).
pub fn to_csv(sheets: &[Sheet]) -> String {
    let mut out = String::new();
    for sheet in sheets {
        out.push_str(&format!("[{}]\n", sheet.name));
        for row in &sheet.rows {
            let fields: Vec<String> = row
                .iter()
                .map(|c| match c {
                    Cell::Empty => String::new(),
                    Cell::Number(v) => v.to_string(),
                    Cell::Text(s) if s.contains([',', '"', '\n']) => {
                        format!("\"{}\"", s.replace('"', "\"\""))
                    }
                    Cell::Text(s) => s.clone(),
                })
                .collect();
            out.push_str(&fields.join(","));
            out.push('\n');
        }
    }
    out
}
