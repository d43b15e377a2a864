//! The problem as data: geometry, layers, materials and an air schedule, in SI units.
//!
//! Nothing here knows about files or workbooks. Every quantity is stored in SI units and
//! every moisture as a dry-basis fraction (kg water per kg dry solid); the workbook layer converts
//! at the edge. [`Case::validate`] returns every problem it finds as values, each with a
//! [`Place`] that the workbook layer turns into a sheet and cell.

mod measured;
mod plausible;
mod validate;

pub use measured::Measured;

pub use plausible::{DRY_PCT, HOT_C, LOW_RH, THIN_M};

pub use validate::{Place, Problem, ranges};

use crate::physics::{Diffusivity, Isotherm};

/// The body's shape; the geometry index m of the diffusion equation is 0, 1 or 2.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Geometry {
    /// A flat board or sheet (m = 0).
    Slab,
    /// A long cylinder (m = 1), face A is the outer surface.
    Cylinder,
    /// A sphere (m = 2), face A is the outer surface.
    Sphere,
}

impl Geometry {
    /// The exponent m in (1/r^m) d/dr (r^m D dX/dr).
    pub fn index(self) -> u32 {
        match self {
            Geometry::Slab => 0,
            Geometry::Cylinder => 1,
            Geometry::Sphere => 2,
        }
    }
}

/// Which faces exchange moisture with the air.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Exposed {
    /// Face A only (the outer surface of a cylinder or sphere).
    A,
    /// Face B only (slabs).
    B,
    /// Both faces (slabs).
    Both,
    /// No face: the body is sealed.
    None,
}

impl Exposed {
    /// Whether face A exchanges with the air.
    pub fn a(self) -> bool {
        matches!(self, Exposed::A | Exposed::Both)
    }
    /// Whether face B exchanges with the air.
    pub fn b(self) -> bool {
        matches!(self, Exposed::B | Exposed::Both)
    }
}

/// Which fields are solved for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Coupling {
    /// Isothermal: the product is at the air temperature.
    Moisture,
    /// Product temperature solved together with moisture.
    HeatAndMoisture,
}

/// Basis of the moisture percentages a user reads and writes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MoistureBasis {
    /// kg water per kg dry solid.
    Dry,
    /// kg water per kg moist product.
    Wet,
}

impl MoistureBasis {
    /// Converts a percentage on this basis to a dry-basis fraction; `None` where impossible
    /// (wet basis at or above 100 %).
    pub fn to_dry_fraction(self, pct: f64) -> Option<f64> {
        match self {
            MoistureBasis::Dry => Some(pct / 100.0),
            MoistureBasis::Wet => {
                let w = pct / 100.0;
                (w < 1.0).then(|| w / (1.0 - w))
            }
        }
    }

    /// Converts a dry-basis fraction to a percentage on this basis.
    pub fn from_dry_fraction(self, x: f64) -> f64 {
        match self {
            MoistureBasis::Dry => 100.0 * x,
            MoistureBasis::Wet => 100.0 * x / (1.0 + x),
        }
    }

    /// d(percentage on this basis)/dX at dry fraction `x`, for converting rates.
    pub fn slope_from_dry(self, x: f64) -> f64 {
        match self {
            MoistureBasis::Dry => 100.0,
            MoistureBasis::Wet => 100.0 / ((1.0 + x) * (1.0 + x)),
        }
    }
}

/// A material's properties.
#[derive(Debug, Clone, PartialEq)]
pub struct Material {
    /// Unique name.
    pub name: String,
    /// Mass of dry solid per m3 of product (kg/m3).
    pub dry_density: f64,
    /// Effective moisture diffusivity D(X, T).
    pub diffusivity: Diffusivity,
    /// Sorption isotherm (equilibrium moisture against water activity).
    pub isotherm: Isotherm,
    /// Thermal conductivity of the moist product (W/(m K)), coupled runs.
    pub conductivity: Option<f64>,
    /// Specific heat of the dry solid (J/(kg K)), coupled runs.
    pub specific_heat: Option<f64>,
}

/// One layer of the body, listed from face A.
#[derive(Debug, Clone, PartialEq)]
pub struct Layer {
    /// Label.
    pub name: String,
    /// Index into [`Case::materials`].
    pub material: usize,
    /// Thickness (radial for cylinders and spheres), m.
    pub thickness: f64,
    /// Uniform initial moisture, dry fraction.
    pub initial_moisture: f64,
    /// Uniform initial temperature, degrees C.
    pub initial_temp_c: f64,
}

/// How the air's humidity is given for a step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Humidity {
    /// Not given (allowed where the surface is fixed or an equilibrium moisture is given).
    Unspecified,
    /// Relative humidity as a fraction 0..1.
    Relative(f64),
    /// Wet-bulb temperature, degrees C.
    WetBulb(f64),
}

/// How the exposed surfaces exchange moisture during a step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Exchange {
    /// No exchange column given (only valid for a sealed body).
    Unspecified,
    /// Surface held at this moisture (dry fraction).
    FixedSurface(f64),
    /// Content-based coefficient beta (m/s): flux = beta rho_s (X_s - X_eq).
    SurfaceCoefficient(f64),
    /// Air-side mass transfer coefficient hm (m/s): flux = hm (rho_v,s - rho_v,air).
    AirSide(f64),
    /// Air velocity (m/s): hm from a flat-plate correlation.
    AirVelocity(f64),
}

/// One step of the air schedule.
#[derive(Debug, Clone, PartialEq)]
pub struct Step {
    /// Label.
    pub label: String,
    /// Duration, s.
    pub duration: Option<f64>,
    /// Ends when the mean moisture reaches this dry fraction.
    pub until_moisture: Option<f64>,
    /// Air temperature, degrees C.
    pub dry_bulb_c: f64,
    /// Air humidity.
    pub humidity: Humidity,
    /// Moisture the surface tends to instead of the isotherm's, dry fraction.
    pub equilibrium_moisture: Option<f64>,
    /// Surface exchange.
    pub exchange: Exchange,
    /// Heat transfer coefficient, W/(m2 K), coupled runs.
    pub heat_coef: Option<f64>,
    /// Temperature and humidity move linearly from the previous step's over this step.
    pub ramp: bool,
}

/// A complete, unit-checked problem.
#[derive(Debug, Clone, PartialEq)]
pub struct Case {
    /// Shown on every result sheet.
    pub title: String,
    /// Shape of the body.
    pub geometry: Geometry,
    /// Faces that exchange with the air.
    pub exposed: Exposed,
    /// Fields solved for.
    pub coupling: Coupling,
    /// Basis of every moisture percentage shown to users.
    pub basis: MoistureBasis,
    /// Finite-volume cells in each layer.
    pub cells_per_layer: usize,
    /// Simulated time limit, s.
    pub end_time: f64,
    /// Stop when the mean moisture reaches this dry fraction.
    pub target_moisture: Option<f64>,
    /// Spacing of output rows, s (`None`: end time / 400).
    pub output_every: Option<f64>,
    /// Times of whole profiles, s (`None`: six evenly spaced times).
    pub profile_times: Option<Vec<f64>>,
    /// Length of the surface along the air flow, m.
    pub flow_length: f64,
    /// Relative local error tolerance of the time stepper.
    pub tolerance: f64,
    /// Layers from face A.
    pub layers: Vec<Layer>,
    /// Materials referenced by layers.
    pub materials: Vec<Material>,
    /// Air schedule, in order.
    pub schedule: Vec<Step>,
}

/// Default relative tolerance of the time stepper's local error control.
pub const DEFAULT_TOLERANCE: f64 = 1e-4;

/// Default number of cells per layer.
pub const DEFAULT_CELLS_PER_LAYER: usize = 40;

impl Case {
    /// A single-layer case with default settings, a convenient start for tests and examples.
    pub fn single_layer(
        geometry: Geometry,
        exposed: Exposed,
        material: Material,
        thickness: f64,
        initial_moisture: f64,
        schedule: Vec<Step>,
        end_time: f64,
    ) -> Case {
        Case {
            title: String::from("case"),
            geometry,
            exposed,
            coupling: Coupling::Moisture,
            basis: MoistureBasis::Dry,
            cells_per_layer: DEFAULT_CELLS_PER_LAYER,
            end_time,
            target_moisture: None,
            output_every: None,
            profile_times: None,
            flow_length: 0.1,
            tolerance: DEFAULT_TOLERANCE,
            layers: vec![Layer {
                name: String::from("layer 1"),
                material: 0,
                thickness,
                initial_moisture,
                initial_temp_c: 20.0,
            }],
            materials: vec![material],
            schedule,
        }
    }

    /// Total thickness (radius for cylinders and spheres), m.
    pub fn total_thickness(&self) -> f64 {
        self.layers.iter().map(|l| l.thickness).sum()
    }

    /// Material of the layer touching face A.
    pub fn material_at_a(&self) -> Option<&Material> {
        self.layers
            .first()
            .and_then(|l| self.materials.get(l.material))
    }

    /// Material of the layer touching face B.
    pub fn material_at_b(&self) -> Option<&Material> {
        self.layers
            .last()
            .and_then(|l| self.materials.get(l.material))
    }

    /// The materials on the exposed faces.
    pub fn exposed_materials(&self) -> Vec<&Material> {
        let mut out = Vec::new();
        if self.exposed.a() {
            out.extend(self.material_at_a());
        }
        if self.exposed.b() {
            out.extend(self.material_at_b());
        }
        out
    }

    /// Output row spacing in seconds.
    pub fn output_interval(&self) -> f64 {
        self.output_every.unwrap_or(self.end_time / 400.0)
    }

    /// Checks the case and returns every problem found (empty when it can run).
    pub fn validate(&self) -> Vec<Problem> {
        validate::validate(self)
    }

    /// The case as a [`ValidCase`] when validation finds nothing wrong, else every problem.
    pub fn validated(self) -> Result<ValidCase, Vec<Problem>> {
        let problems = self.validate();
        if problems.is_empty() {
            Ok(ValidCase(self))
        } else {
            Err(problems)
        }
    }
}

/// A case that passed [`Case::validate`]: the only kind the solver accepts, so that no
/// unchecked value (no cells, a zero thickness, a missing property) reaches the numerics.
/// Reads like a [`Case`] (it dereferences to one); to change it, take the case out with
/// [`ValidCase::into_case`] and validate again.
#[derive(Debug, Clone, PartialEq)]
pub struct ValidCase(Case);

impl ValidCase {
    /// The checked case.
    pub fn case(&self) -> &Case {
        &self.0
    }

    /// Gives the case back, for changes that must be validated again.
    pub fn into_case(self) -> Case {
        self.0
    }
}

impl std::ops::Deref for ValidCase {
    type Target = Case;

    fn deref(&self) -> &Case {
        &self.0
    }
}

impl Material {
    /// A material with a constant diffusivity and no isotherm.
    pub fn constant(name: &str, dry_density: f64, d: f64) -> Material {
        Material {
            name: name.to_string(),
            dry_density,
            diffusivity: Diffusivity::constant(d),
            isotherm: Isotherm::None,
            conductivity: None,
            specific_heat: None,
        }
    }
}

impl Step {
    /// The air's relative humidity (fraction), from `rh_pct` or from the wet bulb at standard
    /// pressure; `None` where no humidity is given.
    pub fn relative_humidity(&self) -> Option<f64> {
        match self.humidity {
            Humidity::Unspecified => None,
            Humidity::Relative(rh) => Some(rh),
            Humidity::WetBulb(tw) => Some(crate::physics::psychro::rh_from_wet_bulb(
                self.dry_bulb_c,
                tw,
                crate::physics::STANDARD_PRESSURE_PA,
            )),
        }
    }

    /// A step with the given exchange at constant air, running to the end.
    pub fn constant(dry_bulb_c: f64, humidity: Humidity, exchange: Exchange) -> Step {
        Step {
            label: String::from("step 1"),
            duration: None,
            until_moisture: None,
            dry_bulb_c,
            humidity,
            equilibrium_moisture: None,
            exchange,
            heat_coef: None,
            ramp: false,
        }
    }
}
