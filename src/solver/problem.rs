//! The discrete problem: a mesh, per-cell properties and a schedule whose surface conditions can
//! be evaluated at any time. Built once from a [`Case`] and then only borrowed.

use crate::case::{Case, Exchange, Step, ValidCase};
use crate::physics::{self, Diffusivity, Isotherm};

use super::mesh::{Mesh, Refine};

/// Properties of one material as the solver needs them.
#[derive(Debug, Clone, Copy)]
pub struct MaterialProps {
    /// Dry density, kg/m3.
    pub density: f64,
    /// Diffusivity law.
    pub diffusivity: Diffusivity,
    /// Sorption isotherm.
    pub isotherm: Isotherm,
}

/// Air state at one moment.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Air {
    /// Dry-bulb temperature, degrees C.
    pub dry_bulb_c: f64,
    /// Relative humidity, fraction, where known.
    pub rh: Option<f64>,
}

/// One schedule step, resolved for the solver.
#[derive(Debug, Clone)]
pub struct StepPlan {
    /// Label.
    pub label: String,
    /// Duration, s.
    pub duration: Option<f64>,
    /// Mean-moisture trigger, dry fraction.
    pub until_moisture: Option<f64>,
    /// Air at the start of the step (the previous step's air for a ramp).
    pub from: Air,
    /// Air at the end of the step.
    pub to: Air,
    /// Surface exchange law.
    pub exchange: Exchange,
    /// Given equilibrium moisture, dry fraction.
    pub equilibrium_moisture: Option<f64>,
    /// Whether air changes linearly over the step.
    pub ramp: bool,
    /// Heat transfer coefficient as given, W/(m2 K).
    pub heat_coef: Option<f64>,
}

impl StepPlan {
    /// The air at `elapsed` seconds into the step.
    pub fn air_at(&self, elapsed: f64) -> Air {
        match (self.ramp, self.duration) {
            (true, Some(d)) if d > 0.0 => {
                let f = (elapsed / d).clamp(0.0, 1.0);
                let lerp = |a: f64, b: f64| a + f * (b - a);
                Air {
                    dry_bulb_c: lerp(self.from.dry_bulb_c, self.to.dry_bulb_c),
                    rh: match (self.from.rh, self.to.rh) {
                        (Some(a), Some(b)) => Some(lerp(a, b)),
                        (_, b) => b,
                    },
                }
            }
            _ => self.to,
        }
    }
}

/// What one exposed face sees at one moment.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FaceLaw {
    /// No exchange.
    Sealed,
    /// Surface moisture fixed (dry fraction).
    Fixed(f64),
    /// flux = k (X_s - x_eq), with k = beta rho_s (kg/(m2 s)).
    Linear {
        /// beta times dry density.
        k: f64,
        /// Equilibrium moisture, dry fraction.
        x_eq: f64,
    },
    /// flux = hm (aw(X_s) c_sat - rho_v_air).
    AirSide {
        /// Mass transfer coefficient, m/s.
        hm: f64,
        /// Saturated vapour density at the surface temperature, kg/m3.
        c_sat: f64,
        /// Vapour density of the air, kg/m3.
        rho_v_air: f64,
        /// Surface temperature for the isotherm, degrees C.
        t_c: f64,
    },
}

impl FaceLaw {
    /// Whether the law evaluates the isotherm (so its cell value must stay in its domain).
    pub fn uses_isotherm(&self) -> bool {
        matches!(self, FaceLaw::AirSide { .. })
    }
}

/// An exposed face's fixed geometry.
#[derive(Debug, Clone, Copy)]
pub struct FaceSite {
    /// Cell next to the face.
    pub cell: usize,
    /// Distance from that cell's centre to the face, m.
    pub half_width: f64,
    /// Material of that cell.
    pub material: usize,
    /// Face area (normalised).
    pub area: f64,
    /// The moisture gradient at the face, second-order (see [`SurfaceGradient`]).
    pub gradient: SurfaceGradient,
}

/// The moisture gradient at an exposed face from the two cells beside it.
///
/// The one-sided difference over the half cell, (X_cell − X_s) / half, is only first-order
/// accurate at the face, and that error in the outflow is most of the error in the mean
/// moisture. The derivative at the face of the parabola through the surface value and the two
/// nearest cell centres (distances h1 < h2) is second-order:
///
///   dX/ds = (X* − X_s) / reach,  X* = w1 X_cell + w2 X_inner,
///   w1 = h2² / (h2² − h1²),  w2 = −h1² / (h2² − h1²),  reach = h1 h2 / (h1 + h2),
///
/// so every face law keeps its half-cell form with the extrapolated value X* in place of the
/// cell's and `reach` in place of the half width (uniform cells: X* = (9 X_1 − X_2) / 8 at 3/8
/// of a cell from the face). Measured against Crank's series over whole runs, this cuts the
/// error in mean moisture ratio of a 40-cell slab 4-9 times (fixed surface, Biot 2) and of a
/// sphere 1.5 times. A face whose layer has one cell keeps the half cell (w1 = 1, w2 = 0).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SurfaceGradient {
    /// The next cell inward (the face's own cell when there is none of the same material).
    pub inner: usize,
    /// Weights of the face's cell and of `inner` in X*.
    pub weights: [f64; 2],
    /// Distance over which X* − X_s is taken, m.
    pub reach: f64,
}

impl SurfaceGradient {
    /// The gradient from cells at distances `h1` (the face's) and `h2` (`inner`) from the face.
    pub fn new(inner: usize, h1: f64, h2: f64) -> SurfaceGradient {
        if !(h2 > h1 && h1 > 0.0) {
            return SurfaceGradient::half_cell(inner, h1);
        }
        let span = h2 * h2 - h1 * h1;
        SurfaceGradient {
            inner,
            weights: [h2 * h2 / span, -h1 * h1 / span],
            reach: h1 * h2 / (h1 + h2),
        }
    }

    /// The first-order half-cell difference (one cell of the face's material).
    pub fn half_cell(cell: usize, half: f64) -> SurfaceGradient {
        SurfaceGradient {
            inner: cell,
            weights: [1.0, 0.0],
            reach: half,
        }
    }

    /// X* and its derivatives by the face's cell and by `inner`.
    ///
    /// With `limited`, the extrapolation is held to half the cell value either way, so a steep
    /// front next to the face cannot give a negative or absurd X* (where the limit holds, X*
    /// follows the cell alone). Laws that evaluate the isotherm need that; fixed and
    /// content-based laws take any X* and stay linear without it.
    #[inline]
    pub fn extrapolate(&self, x: &[f64], cell: usize, limited: bool) -> (f64, f64, f64) {
        let (xc, xi) = (x[cell], x[self.inner]);
        let [w1, w2] = self.weights;
        let correction = w2 * (xi - xc);
        if !limited || correction.abs() <= 0.5 * xc.abs() {
            (xc + correction, w1, w2)
        } else {
            // X* = xc (1 + s), s = ±1/2 towards the correction.
            let s = 0.5f64.copysign(correction) * xc.signum();
            (xc * (1.0 + s), 1.0 + s, 0.0)
        }
    }
}

/// An interior face.
#[derive(Debug, Clone, Copy)]
pub enum InnerFace {
    /// Both sides of one material: flux = rho D(mean X) (X_l - X_r) / distance.
    Same {
        /// Material index.
        material: usize,
        /// Centre-to-centre distance, m.
        distance: f64,
    },
    /// A boundary between materials: water activity continuous, flux continuous.
    Interface {
        /// Material on the A side.
        left: usize,
        /// Material on the B side.
        right: usize,
        /// Left centre to face, m.
        left_half: f64,
        /// Face to right centre, m.
        right_half: f64,
    },
}

/// Consecutive interior faces inside one material: faces `faces` (face k lies between cells k-1
/// and k), with each face's dry density over its centre-to-centre distance, so that the flux
/// across face k is `conductance[k - faces.start] D(mean X) (X_k-1 - X_k)`.
#[derive(Debug, Clone)]
pub struct FaceRun {
    /// The material on both sides.
    pub material: usize,
    /// The faces.
    pub faces: std::ops::Range<usize>,
    /// Dry density over centre-to-centre distance, kg/m4, per face of the run.
    pub conductance: Vec<f64>,
}

/// The runs of [`FaceRun`] in `inner` (index k-1 for face k), and the faces between materials.
fn face_runs(inner: &[InnerFace], materials: &[MaterialProps]) -> (Vec<FaceRun>, Vec<usize>) {
    let mut runs: Vec<FaceRun> = Vec::new();
    let mut interfaces = Vec::new();
    for (i, face) in inner.iter().enumerate() {
        let k = i + 1;
        match *face {
            InnerFace::Same { material, distance } => {
                let conductance = materials[material].density / distance;
                match runs.last_mut() {
                    Some(run) if run.material == material && run.faces.end == k => {
                        run.faces.end = k + 1;
                        run.conductance.push(conductance);
                    }
                    _ => runs.push(FaceRun {
                        material,
                        faces: k..k + 1,
                        conductance: vec![conductance],
                    }),
                }
            }
            InnerFace::Interface { .. } => interfaces.push(k),
        }
    }
    (runs, interfaces)
}

/// Thermal data of a coupled (heat and moisture) run.
#[derive(Debug, Clone)]
pub struct Thermal {
    /// Thermal conductivity of each material, W/(m K).
    pub conductivity: Vec<f64>,
    /// Specific heat of each material's dry solid, J/(kg K).
    pub specific_heat: Vec<f64>,
    /// Initial temperature of each cell, degrees C.
    pub initial: Vec<f64>,
    /// Typical temperature swing of the run, K, for absolute tolerances.
    pub temperature_scale: f64,
}

/// Specific heat of liquid water held in the product, J/(kg K) (common practice: the value near
/// 20-60 C, within 1 % over 0-100 C).
pub const WATER_SPECIFIC_HEAT: f64 = 4186.0;

/// The discrete problem.
#[derive(Debug, Clone)]
pub struct Problem {
    /// The mesh.
    pub mesh: Mesh,
    /// Materials.
    pub materials: Vec<MaterialProps>,
    /// Material of each cell.
    pub cell_material: Vec<usize>,
    /// Dry mass of each cell per unit outer area, kg/m2.
    pub dry_mass: Vec<f64>,
    /// Their sum (every mean moisture divides by it).
    total_dry_mass: f64,
    /// Their reciprocals (a cell's water becomes its moisture; no division per cell and use).
    inverse_dry_mass: Vec<f64>,
    /// Interior faces 1..n-1 (index k-1 for face k).
    pub inner: Vec<InnerFace>,
    /// The interior faces inside one material grouped in runs of consecutive faces of one
    /// material, which the moisture flux evaluates in one loop each (see [`FaceRun`]).
    pub runs: Vec<FaceRun>,
    /// The interior faces between materials (face k, between cells k-1 and k).
    pub interfaces: Vec<usize>,
    /// Face A when exposed.
    pub face_a: Option<FaceSite>,
    /// Face B when exposed.
    pub face_b: Option<FaceSite>,
    /// Initial moisture of each cell, dry fraction.
    pub initial: Vec<f64>,
    /// The schedule.
    pub steps: Vec<StepPlan>,
    /// Simulated time limit, s.
    pub end_time: f64,
    /// Target mean moisture, dry fraction.
    pub target: Option<f64>,
    /// Output row spacing, s.
    pub output_every: f64,
    /// Profile times, s.
    pub profile_times: Vec<f64>,
    /// Whether the profile times were given (otherwise a final profile is added).
    pub profile_times_given: bool,
    /// Relative local error tolerance.
    pub tolerance: f64,
    /// Typical moisture swing of the run, dry fraction, for absolute tolerances.
    pub moisture_scale: f64,
    /// Total exposed area (normalised), for per-m2 figures.
    pub exposed_area: f64,
    /// Length along the flow for correlations, m.
    pub flow_length: f64,
    /// Where "centre" is: the cells to interpolate and their weights.
    pub centre: [(usize, f64); 2],
    /// Heat data for coupled runs; `None` when isothermal.
    pub thermal: Option<Thermal>,
}

impl Problem {
    /// Builds the discrete problem from a validated case.
    pub fn new(case: &ValidCase) -> Problem {
        Problem::with_measured_times(case, &[])
    }

    /// As [`Problem::new`] for a case whose run is also compared with points measured at
    /// `measured_times` (s): the grading towards a fixed surface follows the earliest time the
    /// run reports, and a measured point may come before every output row and profile.
    pub fn with_measured_times(case: &ValidCase, measured_times: &[f64]) -> Problem {
        let case: &Case = case;
        let n_layers = case.layers.len();
        // A single layer exposed on both faces is two one-face halves back to back: each half
        // gets the cells and grading a one-face layer would, so both faces are resolved alike.
        let mirrored = n_layers == 1 && case.exposed == crate::case::Exposed::Both;
        let (profile_times, profile_times_given) = match &case.profile_times {
            Some(t) => {
                let mut t = t.clone();
                t.sort_by(f64::total_cmp);
                t.dedup();
                (t, true)
            }
            None => (
                (0..6).map(|i| case.end_time * i as f64 / 5.0).collect(),
                false,
            ),
        };
        let t_first = first_reported_time(case.output_interval(), &profile_times, measured_times);
        // Exposed faces are graded by their Biot number and the boundary layer at the first
        // reported time, material boundaries by the fixed ratio.
        let face_ratio = |layer: usize| {
            let length = case.layers[layer].thickness * if mirrored { 0.5 } else { 1.0 };
            super::mesh::grading_for_face(
                surface_biot(case, layer, length),
                case.geometry.index(),
                boundary_layer_cells(case, layer, length, t_first),
                case.cells_per_layer,
            )
        };
        let refine: Vec<Refine> = (0..n_layers)
            .map(|i| {
                let start = if i == 0 { case.exposed.a() } else { true };
                let end = if i + 1 == n_layers {
                    case.exposed.b()
                } else {
                    true
                };
                let start_ratio = if i == 0 && start {
                    face_ratio(i)
                } else {
                    super::mesh::GRADING_RATIO
                };
                let end_ratio = if i + 1 == n_layers && end {
                    face_ratio(i)
                } else {
                    super::mesh::GRADING_RATIO
                };
                Refine {
                    start,
                    end,
                    full_halves: mirrored,
                    start_ratio,
                    end_ratio,
                }
            })
            .collect();
        let cells = vec![case.cells_per_layer * if mirrored { 2 } else { 1 }; n_layers];
        let thicknesses: Vec<f64> = case.layers.iter().map(|l| l.thickness).collect();
        let mesh = Mesh::new(case.geometry.index(), &thicknesses, &cells, &refine);
        let materials: Vec<MaterialProps> = case
            .materials
            .iter()
            .map(|m| MaterialProps {
                density: m.dry_density,
                diffusivity: m.diffusivity,
                isotherm: m.isotherm,
            })
            .collect();
        let cell_material: Vec<usize> = mesh
            .layer_of
            .iter()
            .map(|&l| case.layers[l].material)
            .collect();
        let dry_mass: Vec<f64> = mesh
            .volumes
            .iter()
            .zip(&cell_material)
            .map(|(v, &m)| v * materials[m].density)
            .collect();
        let initial: Vec<f64> = mesh
            .layer_of
            .iter()
            .map(|&l| case.layers[l].initial_moisture)
            .collect();
        let n = mesh.len();
        let inner = (1..n)
            .map(|k| {
                let (l, r) = (cell_material[k - 1], cell_material[k]);
                if l == r {
                    InnerFace::Same {
                        material: l,
                        distance: mesh.centres[k] - mesh.centres[k - 1],
                    }
                } else {
                    InnerFace::Interface {
                        left: l,
                        right: r,
                        left_half: mesh.faces[k] - mesh.centres[k - 1],
                        right_half: mesh.centres[k] - mesh.faces[k],
                    }
                }
            })
            .collect::<Vec<_>>();
        let (runs, interfaces) = face_runs(&inner, &materials);
        // The second cell in from a face, when it is of the face's material.
        let gradient = |cell: usize, inner: Option<usize>, face: f64| {
            let h1 = (mesh.centres[cell] - face).abs();
            match inner {
                Some(i) if cell_material[i] == cell_material[cell] => {
                    SurfaceGradient::new(i, h1, (mesh.centres[i] - face).abs())
                }
                _ => SurfaceGradient::half_cell(cell, h1),
            }
        };
        let face_a = case.exposed.a().then(|| FaceSite {
            cell: 0,
            half_width: mesh.centres[0] - mesh.faces[0],
            material: cell_material[0],
            area: mesh.areas[0],
            gradient: gradient(0, (n > 1).then_some(1), mesh.faces[0]),
        });
        let face_b = case.exposed.b().then(|| FaceSite {
            cell: n - 1,
            half_width: mesh.faces[n] - mesh.centres[n - 1],
            material: cell_material[n - 1],
            area: mesh.areas[n],
            gradient: gradient(n - 1, (n > 1).then_some(n - 2), mesh.faces[n]),
        });
        let exposed_area = face_a.map_or(0.0, |f| f.area) + face_b.map_or(0.0, |f| f.area);
        let steps = plan_steps(&case.schedule);
        let output_every = case.output_interval();
        let centre = centre_weights(&mesh, case);
        let moisture_scale = moisture_scale(case, &steps, &materials);
        let thermal = (case.coupling == crate::case::Coupling::HeatAndMoisture).then(|| {
            let initial: Vec<f64> = mesh
                .layer_of
                .iter()
                .map(|&l| case.layers[l].initial_temp_c)
                .collect();
            let mut lo = f64::INFINITY;
            let mut hi = f64::NEG_INFINITY;
            for t in initial.iter().copied().chain(
                steps
                    .iter()
                    .flat_map(|s| [s.from.dry_bulb_c, s.to.dry_bulb_c]),
            ) {
                lo = lo.min(t);
                hi = hi.max(t);
            }
            Thermal {
                conductivity: case
                    .materials
                    .iter()
                    .map(|m| m.conductivity.unwrap_or(f64::NAN))
                    .collect(),
                specific_heat: case
                    .materials
                    .iter()
                    .map(|m| m.specific_heat.unwrap_or(f64::NAN))
                    .collect(),
                initial,
                temperature_scale: (hi - lo).max(1.0),
            }
        });
        Problem {
            mesh,
            materials,
            cell_material,
            total_dry_mass: super::sums::sum(&dry_mass),
            inverse_dry_mass: dry_mass.iter().map(|m| 1.0 / m).collect(),
            dry_mass,
            inner,
            runs,
            interfaces,
            face_a,
            face_b,
            initial,
            steps,
            end_time: case.end_time,
            target: case.target_moisture,
            output_every,
            profile_times,
            profile_times_given,
            tolerance: case.tolerance,
            moisture_scale,
            exposed_area,
            flow_length: case.flow_length,
            centre,
            thermal,
        }
    }

    /// Number of cells.
    pub fn len(&self) -> usize {
        self.mesh.len()
    }

    /// Whether there are no cells.
    pub fn is_empty(&self) -> bool {
        self.mesh.is_empty()
    }

    /// Total dry mass per unit outer area, kg/m2.
    pub fn total_dry_mass(&self) -> f64 {
        self.total_dry_mass
    }

    /// 1 / dry mass of each cell.
    pub fn inverse_dry_mass(&self) -> &[f64] {
        &self.inverse_dry_mass
    }

    /// Dry-mass weighted mean moisture of `x`.
    pub fn mean(&self, x: &[f64]) -> f64 {
        self.water(x) / self.total_dry_mass()
    }

    /// Water held per unit outer area, kg/m2.
    pub fn water(&self, x: &[f64]) -> f64 {
        super::sums::dot(&self.dry_mass, x)
    }

    /// Moisture at "the" surface: face A, or face B when only B is exposed.
    pub fn surface_value(&self, surfaces: &super::flux::Surfaces) -> f64 {
        if self.face_a.is_some() || self.face_b.is_none() {
            surfaces.x_a
        } else {
            surfaces.x_b
        }
    }

    /// Temperature at "the" surface (as [`Problem::surface_value`]).
    pub fn surface_temperature(&self, surfaces: &super::flux::Surfaces) -> f64 {
        if self.face_a.is_some() || self.face_b.is_none() {
            surfaces.t_a
        } else {
            surfaces.t_b
        }
    }

    /// Moisture at the centre (the point farthest from every exposed face).
    pub fn centre_value(&self, x: &[f64]) -> f64 {
        let [(i, wi), (j, wj)] = self.centre;
        wi * x[i] + wj * x[j]
    }

    /// The face law a face of `material` sees under `air` during `step`.
    pub fn face_law(&self, step: &StepPlan, air: Air, material: usize) -> FaceLaw {
        let props = &self.materials[material];
        let equilibrium = || {
            step.equilibrium_moisture.or_else(|| {
                air.rh
                    .and_then(|rh| props.isotherm.equilibrium_moisture(rh, air.dry_bulb_c))
            })
        };
        let air_side = |hm: f64| {
            let c_sat = saturated_vapour_density(air.dry_bulb_c);
            FaceLaw::AirSide {
                hm,
                c_sat,
                rho_v_air: air.rh.unwrap_or(0.0) * c_sat,
                t_c: air.dry_bulb_c,
            }
        };
        match step.exchange {
            Exchange::Unspecified => FaceLaw::Sealed,
            Exchange::FixedSurface(x) => FaceLaw::Fixed(x),
            Exchange::SurfaceCoefficient(beta) => match equilibrium() {
                Some(x_eq) => FaceLaw::Linear {
                    k: beta * props.density,
                    x_eq,
                },
                None => FaceLaw::Sealed,
            },
            Exchange::AirSide(hm) => air_side(hm),
            Exchange::AirVelocity(v) => {
                let props = physics::transfer::air_properties(
                    air.dry_bulb_c,
                    physics::STANDARD_PRESSURE_PA,
                );
                air_side(physics::transfer::flat_plate_mass_coef(
                    v,
                    self.flow_length,
                    &props,
                ))
            }
        }
    }

    /// Heat transfer coefficient at an exposed face during `step` under `air`, W/(m2 K): as given
    /// (`h_w_m2k`), else from the flat-plate correlation for an air velocity, else from hm by the
    /// Chilton-Colburn analogy; `None` where none applies (validation refuses such coupled runs).
    pub fn heat_coef(&self, step: &StepPlan, air: Air) -> Option<f64> {
        if step.heat_coef.is_some() {
            return step.heat_coef;
        }
        let props =
            physics::transfer::air_properties(air.dry_bulb_c, physics::STANDARD_PRESSURE_PA);
        match step.exchange {
            Exchange::AirVelocity(v) => Some(physics::transfer::flat_plate_heat_coef(
                v,
                self.flow_length,
                &props,
            )),
            Exchange::AirSide(hm) => Some(physics::transfer::heat_coef_from_mass(hm, &props)),
            _ => None,
        }
    }

    /// Mean equilibrium moisture of the whole body under `air` in `step` (each layer at the
    /// surface's water activity), where it can be known.
    pub fn equilibrium_mean(&self, step: &StepPlan, air: Air) -> Option<f64> {
        let surface_material = self.face_a.or(self.face_b)?.material;
        // No boundary between materials: every cell is of the surface's material.
        let single = self.interfaces.is_empty();
        let given = match step.exchange {
            Exchange::FixedSurface(x) => Some(x),
            _ => step.equilibrium_moisture,
        };
        if single {
            return given.or_else(|| {
                let iso = self.materials[surface_material].isotherm;
                air.rh
                    .and_then(|rh| iso.equilibrium_moisture(rh, air.dry_bulb_c))
            });
        }
        let aw = match given {
            Some(x) => self.materials[surface_material]
                .isotherm
                .water_activity(x, air.dry_bulb_c)?,
            None => air.rh?,
        };
        let mut held = 0.0;
        for (&m, &mass) in self.cell_material.iter().zip(&self.dry_mass) {
            let x = self.materials[m]
                .isotherm
                .equilibrium_moisture(aw, air.dry_bulb_c)?;
            held += mass * x;
        }
        Some(held / self.total_dry_mass())
    }
}

/// The largest surface Biot number an exposed face of `layer` meets over the schedule: external
/// over internal conductance, k_ext length / (rho_s D), with D the smallest over the layer's
/// initial and equilibrium moistures and k_ext the content-based coefficient beta rho_s, or for
/// an air-side law its linearisation hm c_sat daw/dX (the steepest over the drying range);
/// infinite for a fixed surface. Coupled runs also count the heat Biot number h length / k.
fn surface_biot(case: &Case, layer: usize, length: f64) -> f64 {
    let l = &case.layers[layer];
    let Some(m) = case.materials.get(l.material) else {
        return f64::INFINITY;
    };
    let coupled = case.coupling == crate::case::Coupling::HeatAndMoisture;
    let mut biot: f64 = 0.0;
    for step in &case.schedule {
        let t = step.dry_bulb_c;
        let rh = step.relative_humidity();
        let x0 = l.initial_moisture;
        let x_eq = step
            .equilibrium_moisture
            .or_else(|| rh.and_then(|rh| m.isotherm.equilibrium_moisture(rh, t)))
            .filter(|x| x.is_finite());
        let d = [Some(x0), x_eq]
            .into_iter()
            .flatten()
            .map(|x| m.diffusivity.at(x, t))
            .fold(f64::INFINITY, f64::min);
        let rho = m.dry_density;
        let props = physics::transfer::air_properties(t, physics::STANDARD_PRESSURE_PA);
        let air_side = |hm: f64| {
            let sat = m.isotherm.saturation_moisture(t).unwrap_or(f64::INFINITY);
            let lo = x_eq.unwrap_or(0.0).max(0.0);
            let hi = x0.min(sat).max(lo);
            let slope = [lo, 0.5 * (lo + hi), hi]
                .into_iter()
                .filter_map(|x| m.isotherm.water_activity_slope(x, t))
                .fold(0.0, f64::max);
            hm * saturated_vapour_density(t) * slope
        };
        let (k_ext, hm) = match step.exchange {
            Exchange::Unspecified => (0.0, None),
            Exchange::FixedSurface(_) => (f64::INFINITY, None),
            Exchange::SurfaceCoefficient(beta) => (beta * rho, None),
            Exchange::AirSide(hm) => (air_side(hm), Some(hm)),
            Exchange::AirVelocity(v) => {
                let hm = physics::transfer::flat_plate_mass_coef(v, case.flow_length, &props);
                (air_side(hm), Some(hm))
            }
        };
        if d > 0.0 && d.is_finite() {
            biot = biot.max(k_ext * length / (rho * d));
        }
        if coupled && let Some(k) = m.conductivity {
            let h = step.heat_coef.or(match step.exchange {
                Exchange::AirVelocity(v) => Some(physics::transfer::flat_plate_heat_coef(
                    v,
                    case.flow_length,
                    &props,
                )),
                _ => hm.map(|hm| physics::transfer::heat_coef_from_mass(hm, &props)),
            });
            if let Some(h) = h.filter(|h| h.is_finite()) {
                biot = biot.max(h * length / k);
            }
        }
    }
    if biot.is_nan() { f64::INFINITY } else { biot }
}

/// The earliest time a run reports, s: the smallest of the output row spacing, the first
/// positive profile time and the first positive measured time (infinite when none is positive).
fn first_reported_time(output_every: f64, profile_times: &[f64], measured_times: &[f64]) -> f64 {
    std::iter::once(output_every)
        .chain(profile_times.iter().copied())
        .chain(measured_times.iter().copied())
        .filter(|&t| t > 0.0 && t.is_finite())
        .fold(f64::INFINITY, f64::min)
}

/// z = cells sqrt(D t / length²): the depth sqrt(D t) the surface has dried into by time `t`,
/// counted in the layer's cells as if they were uniform (the layer's `cells_per_layer` cells over
/// `length`, the half thickness of a layer exposed on both faces). D is the layer's diffusivity
/// at its initial moisture and at the temperature the run starts the layer at (its initial
/// temperature in a coupled run, the first step's air in an isothermal one, which holds the
/// product at the air's temperature). NaN when D is unknown.
fn boundary_layer_cells(case: &Case, layer: usize, length: f64, t: f64) -> f64 {
    let l = &case.layers[layer];
    let Some(m) = case.materials.get(l.material) else {
        return f64::NAN;
    };
    let t_c = if case.coupling == crate::case::Coupling::HeatAndMoisture {
        l.initial_temp_c
    } else {
        case.schedule
            .first()
            .map_or(l.initial_temp_c, |s| s.dry_bulb_c)
    };
    let d = m.diffusivity.at(l.initial_moisture, t_c);
    case.cells_per_layer as f64 * (d * t).sqrt() / length
}

/// Saturated water-vapour density at `t_c`, kg/m3 (ideal gas).
pub fn saturated_vapour_density(t_c: f64) -> f64 {
    physics::psychro::vapour_density_kg_m3(physics::psychro::saturation_pressure_pa(t_c), t_c)
}

fn air_of(step: &Step) -> Air {
    Air {
        dry_bulb_c: step.dry_bulb_c,
        rh: step.relative_humidity(),
    }
}

fn plan_steps(schedule: &[Step]) -> Vec<StepPlan> {
    let mut plans: Vec<StepPlan> = Vec::with_capacity(schedule.len());
    for s in schedule {
        let to = air_of(s);
        let from = match plans.last() {
            Some(prev) if s.ramp => prev.to,
            _ => to,
        };
        plans.push(StepPlan {
            label: s.label.clone(),
            duration: s.duration,
            until_moisture: s.until_moisture,
            from,
            to,
            exchange: s.exchange,
            equilibrium_moisture: s.equilibrium_moisture,
            ramp: s.ramp,
            heat_coef: s.heat_coef,
        });
    }
    plans
}

/// The cells and weights that give the moisture at the centre.
fn centre_weights(mesh: &Mesh, case: &Case) -> [(usize, f64); 2] {
    let n = mesh.len();
    let last = n - 1;
    let at_a = case.exposed.a();
    let at_b = case.exposed.b();
    if mesh.m > 0 {
        return [(last, 1.0), (last, 0.0)];
    }
    match (at_a, at_b) {
        (true, false) => [(last, 1.0), (last, 0.0)],
        (false, true) => [(0, 1.0), (0, 0.0)],
        _ => {
            // Mid-plane: interpolate linearly between the two cell centres around it.
            let mid = 0.5 * mesh.length;
            let j = mesh
                .centres
                .partition_point(|&c| c < mid)
                .clamp(1, last.max(1));
            if n == 1 {
                return [(0, 1.0), (0, 0.0)];
            }
            let (c0, c1) = (mesh.centres[j - 1], mesh.centres[j]);
            let w = ((mid - c0) / (c1 - c0)).clamp(0.0, 1.0);
            [(j - 1, 1.0 - w), (j, w)]
        }
    }
}

/// The run's moisture swing: the spread of initial, fixed and equilibrium moistures.
fn moisture_scale(case: &Case, steps: &[StepPlan], materials: &[MaterialProps]) -> f64 {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    let mut take = |x: f64| {
        if x.is_finite() {
            lo = lo.min(x);
            hi = hi.max(x);
        }
    };
    for l in &case.layers {
        take(l.initial_moisture);
    }
    for s in steps {
        if let Exchange::FixedSurface(x) = s.exchange {
            take(x);
        }
        if let Some(x) = s.equilibrium_moisture {
            take(x);
        }
        for air in [s.from, s.to] {
            if let Some(rh) = air.rh {
                for m in materials {
                    if let Some(x) = m.isotherm.equilibrium_moisture(rh, air.dry_bulb_c) {
                        take(x);
                    }
                }
            }
        }
    }
    let swing = hi - lo;
    if swing.is_finite() && swing > 0.0 {
        swing.max(1e-3 * hi.abs())
    } else {
        hi.abs().max(1e-3)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A 10 mm slab (D 1e-9 m2/s, so L^2 / D = 1e5 s) with a fixed surface, 40 cells, rows every
    /// `every` s and no profiles.
    fn fixed_slab(every: f64) -> Case {
        use crate::case::{Exposed, Geometry, Humidity, Material, Step};
        let step = Step::constant(40.0, Humidity::Unspecified, Exchange::FixedSurface(0.1));
        let mut case = Case::single_layer(
            Geometry::Slab,
            Exposed::A,
            Material::constant("m", 500.0, 1e-9),
            0.01,
            0.5,
            vec![step],
            2e4,
        );
        case.output_every = Some(every);
        case.profile_times = Some(Vec::new());
        case
    }

    /// Largest over smallest cell of a one-layer problem.
    fn grading(p: &Problem) -> f64 {
        let w: Vec<f64> = p.mesh.faces.windows(2).map(|w| w[1] - w[0]).collect();
        w.iter().fold(0.0, |a: f64, &b| a.max(b)) / w.iter().fold(f64::INFINITY, |a, &b| a.min(b))
    }

    #[test]
    fn the_grading_towards_a_fixed_surface_follows_the_earliest_reported_time() {
        let valid = |case: Case| case.validated().expect("valid");
        // Rows every 1e-2 L^2 / D: the boundary layer is z = 40 sqrt(1e-2) = 4 cells deep at
        // the first row, so the cells are uniform.
        let coarse = Problem::new(&valid(fixed_slab(1000.0)));
        assert!(
            (grading(&coarse) - 1.0).abs() < 1e-9,
            "{}",
            grading(&coarse)
        );
        // Rows every 1e-5 L^2 / D: z = 0.13, the full ratio.
        let full = super::super::mesh::FaceGrading::of(0).full;
        let fine = Problem::new(&valid(fixed_slab(1.0)));
        assert!((grading(&fine) - full).abs() < 1e-9, "{}", grading(&fine));
        // An early profile, or an early measured point, counts as much as an early row.
        let mut profiled = fixed_slab(1000.0);
        profiled.profile_times = Some(vec![5000.0, 1.0]);
        assert!((grading(&Problem::new(&valid(profiled))) - full).abs() < 1e-9);
        let measured = Problem::with_measured_times(&valid(fixed_slab(1000.0)), &[0.0, 1.0]);
        assert!((grading(&measured) - full).abs() < 1e-9);
        // In between, a ratio between the two.
        let mid = grading(&Problem::new(&valid(fixed_slab(50.0))));
        assert!(mid > 1.5 && mid < full - 0.5, "{mid}");
        // Faster diffusion at the run's temperature deepens the boundary layer: with an
        // activation energy, air at 80 C instead of the 25 C reference gives a smaller ratio.
        let mut warm = fixed_slab(50.0);
        warm.materials[0].diffusivity.activation_energy_j_mol = 30_000.0;
        warm.schedule[0].dry_bulb_c = 80.0;
        let warm = grading(&Problem::new(&valid(warm)));
        assert!(warm < mid, "{warm} vs {mid}");
    }

    #[test]
    fn the_earliest_reported_time_skips_zero_and_missing_times() {
        assert_eq!(first_reported_time(60.0, &[0.0, 120.0], &[]), 60.0);
        assert_eq!(first_reported_time(60.0, &[0.0, 30.0], &[]), 30.0);
        assert_eq!(first_reported_time(60.0, &[], &[0.0, 10.0, 5.0]), 5.0);
        assert_eq!(first_reported_time(f64::NAN, &[], &[]), f64::INFINITY);
    }

    #[test]
    fn surface_gradient_on_uniform_cells_is_the_textbook_one_sided_formula() {
        // Cells of width h: centres at h/2 and 3h/2, so X'(0) = (9 X_1 - X_2 - 8 X_s) / (3 h)
        // (the second-order one-sided difference; from memory, and checked here by the
        // parabola test below).
        let h = 0.2;
        let g = SurfaceGradient::new(1, 0.5 * h, 1.5 * h);
        assert!((g.weights[0] - 9.0 / 8.0).abs() < 1e-15);
        assert!((g.weights[1] + 1.0 / 8.0).abs() < 1e-15);
        assert!((g.reach - 3.0 * h / 8.0).abs() < 1e-15);
    }

    #[test]
    fn surface_gradient_is_exact_for_a_parabola_on_graded_cells() {
        // X(s) = 0.3 + 0.5 s - 2 s^2 sampled at two unequal distances: the slope at s = 0 is 0.5.
        let p = |s: f64| 0.3 + 0.5 * s - 2.0 * s * s;
        let (h1, h2) = (0.013, 0.041);
        let g = SurfaceGradient::new(1, h1, h2);
        let (xv, w1, w2) = g.extrapolate(&[p(h1), p(h2)], 0, true);
        assert_eq!((w1, w2), (g.weights[0], g.weights[1]));
        let slope = (xv - p(0.0)) / g.reach;
        assert!((slope - 0.5).abs() < 1e-12, "slope {slope}");
    }

    #[test]
    fn surface_gradient_limits_a_steep_extrapolation() {
        // A very dry face cell beside a wet one would extrapolate below zero; X* stops at half
        // the cell value and then follows the cell alone.
        let g = SurfaceGradient::new(1, 0.5, 1.5);
        let (xv, w1, w2) = g.extrapolate(&[0.05, 0.8], 0, true);
        assert!((xv - 0.025).abs() < 1e-15);
        assert_eq!((w1, w2), (0.5, 0.0));
        // Unlimited (fixed and content-based laws), the parabola's value stands.
        let (xv, _, _) = g.extrapolate(&[0.05, 0.8], 0, false);
        assert!((xv - (0.05 - 0.75 / 8.0)).abs() < 1e-15);
        // One cell of the face's material: the half cell.
        let h = SurfaceGradient::half_cell(0, 0.1);
        assert_eq!(h.extrapolate(&[0.4], 0, true), (0.4, 1.0, 0.0));
    }
}
