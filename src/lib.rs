//! dampfront: moisture (and later heat) transport in drying bodies, with spreadsheet workbooks
//! in and out.
//!
//! Dependencies point one way:
//! `physics` (pure property functions) ← `case` (the problem as checked data) ← `solver`
//! (finite volumes and time stepping). `analytic` stands alone; tests and `verify` compare the
//! solver with it. `workbook` (files ↔ case and results) and `watch` (folders) sit at the edges.
#![deny(missing_docs)]
#![warn(clippy::unwrap_used)]

pub mod analytic;
pub mod case;
pub mod check;
pub mod cli;
pub mod fit;
pub mod limits;
pub mod physics;
pub mod pipeline;
pub mod solver;
pub mod study;
pub mod text;
pub mod watch;
pub mod workbook;
