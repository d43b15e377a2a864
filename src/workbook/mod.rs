//! Workbooks in and out: files become raw cells that remember where they came from, and raw
//! cells become a checked [`Case`](crate::case::Case).
//!
//! Reading happens in two layers, so that every message can name a sheet and cell:
//! [`read`] turns the bytes of an `.xlsx`, `.xlsm`, `.xls`, `.ods` or sectioned `.csv` file into
//! a [`raw::RawBook`] (cells with their positions, nothing interpreted), and [`parse`] checks
//! those cells against the case workbook format into a `Case`, converting units at this edge
//! only and collecting every problem with the cell it came from.

pub mod parse;
pub mod raw;
pub mod read;
pub mod schema;
pub mod template;
pub mod write;
pub mod write_variants;
