//! Measured points of a drying curve, in SI units: what a lab logs from a sample on a balance.

/// One measured point: the sample's mean moisture at a time, and optionally its temperatures.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Measured {
    /// Time since the start of the run, s.
    pub time: f64,
    /// Mean moisture, dry-basis fraction (kg water per kg dry solid).
    pub moisture: f64,
    /// Surface temperature, degrees C.
    pub surface_temp_c: Option<f64>,
    /// Centre temperature, degrees C.
    pub centre_temp_c: Option<f64>,
}

impl Measured {
    /// A point with a time (s) and a mean moisture (dry fraction) only.
    pub fn new(time: f64, moisture: f64) -> Measured {
        Measured {
            time,
            moisture,
            surface_temp_c: None,
            centre_temp_c: None,
        }
    }
}
