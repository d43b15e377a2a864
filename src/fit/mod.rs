//! Fits to measured drying curves: the usual thin-layer drying models and Crank's slope method.
//! Works on plain numbers (times and moisture ratios); the workbook layer feeds it. Parameter
//! estimation on the full engine builds on the same statistics.

mod thin_layer;

pub use thin_layer::{DryingModel, Goodness, ModelFit, fit_drying_models, goodness, slope_method};
