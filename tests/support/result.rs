//! Reading result workbooks back (calamine) and the format page's lists, version 1.1, written
//! out here rather than taken from the program.

use std::path::Path;

use calamine::{Data, Reader, open_workbook_auto};

/// One sheet of a workbook.
pub fn sheet(path: &Path, name: &str) -> calamine::Range<Data> {
    let mut wb = open_workbook_auto(path).expect("result opens");
    wb.worksheet_range(name).expect("sheet exists")
}

/// A cell as text (empty for an empty cell).
pub fn text(d: &Data) -> String {
    match d {
        Data::String(s) => s.clone(),
        Data::Empty => String::new(),
        other => other.to_string(),
    }
}

/// A number cell's value; panics on anything else.
pub fn num(d: &Data) -> f64 {
    match d {
        Data::Float(f) => *f,
        Data::Int(i) => *i as f64,
        other => panic!("expected a number cell, found {other:?}"),
    }
}

/// Format page 1.1, sheet `summary`: the keys in order.
pub const SUMMARY_KEYS: [&str; 23] = [
    "title",
    "status",
    "drying_time_h",
    "final_hours",
    "final_mean_moisture_pct",
    "final_surface_moisture_pct",
    "final_centre_moisture_pct",
    "max_surface_centre_difference_pct",
    "final_surface_temp_c",
    "final_centre_temp_c",
    "water_removed_kg_m2",
    "mass_balance_error",
    "cells",
    "time_steps",
    "solve_seconds",
    "program_version",
    "input_sha256",
    "target_moisture_pct",
    "drying_time_days",
    "time_of_max_difference_h",
    "final_surface_water_activity",
    "final_centre_water_activity",
    "evaporation_energy_kj_m2",
];

/// Format page 1.1, sheet `curves`: the columns before the layer columns ...
pub const CURVE_COLUMNS: [&str; 12] = [
    "hours",
    "mean_moisture_pct",
    "surface_moisture_pct",
    "centre_moisture_pct",
    "moisture_ratio",
    "mean_temp_c",
    "surface_temp_c",
    "centre_temp_c",
    "drying_rate_pct_h",
    "air_temp_c",
    "air_rh_pct",
    "step",
];

/// ... and after them.
pub const CURVE_ADDITIONS: [&str; 4] = [
    "equilibrium_moisture_pct",
    "surface_water_activity",
    "centre_water_activity",
    "surface_centre_difference_pct",
];

/// Format page 1.1, sheet `steps`.
pub const STEPS_COLUMNS: [&str; 9] = [
    "step",
    "start_h",
    "end_h",
    "hours",
    "ended_by",
    "mean_moisture_at_end_pct",
    "max_surface_centre_difference_pct",
    "dry_bulb_c",
    "rh_pct",
];
