//! Fits to measured drying curves: parameter estimation on the full engine, the usual
//! thin-layer drying models and Crank's slope method, and the comparison of model and
//! measurement. Works below the workbook layer, on a [`Case`](crate::case::Case), its run and
//! [`Measured`](crate::case::Measured) points in SI units; the writer only lays out the
//! [`FitReport`].

mod estimate;
mod report;
mod thin_layer;

pub use estimate::{
    Budget, EstimatedParameter, Estimation, FIT_TOLERANCE, FitRequest, Parameter, estimate,
    t_quantile_975,
};
pub use report::{Agreement, ComparedPoint, FitReport, report, run_mean_at};
pub use thin_layer::{DryingModel, Goodness, ModelFit, fit_drying_models, goodness, slope_method};
