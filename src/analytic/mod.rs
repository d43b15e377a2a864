//! Series solutions of the diffusion equation for a plane sheet, a long cylinder and a sphere,
//! from J. Crank, *The Mathematics of Diffusion*, 2nd ed., Clarendon Press, Oxford, 1975.
//!
//! The body starts at a uniform concentration `C0` and is exposed at every face to a medium at
//! `C_inf`, either with a fixed surface concentration (`C = C_inf` at the surface) or with surface
//! evaporation (`-D dC/dn = alpha (C_s - C_inf)`, Crank's "surface evaporation" condition, whose
//! Biot number is `L = l alpha / D`; `l` is the half-thickness of a sheet or the radius of a
//! cylinder or sphere). Time is dimensionless, `T = D t / l^2`.
//!
//! * [`eigenvalues`]: the roots `beta_n` of the eigenvalue equations (Crank's Table 4.1 and the
//!   cylinder and sphere analogues).
//! * [`Series`]: the fraction exchanged `Mt/Minf` (uptake, or for drying `1 -` the moisture
//!   ratio), its half-time, with the long-time series and the short-time forms joined where each
//!   is accurate. Sheet: Crank p. 48 (fixed surface) and p. 60 (evaporation); sphere: p. 91 and
//!   p. 96; cylinder: ch. 5.
//! * [`slab_profile`]: the concentration profile across a sheet (Crank p. 47, and ch. 4 for
//!   evaporation).
//! * [`one_term_coefficient`]: the first root and coefficient of the one-term approximation
//!   tabulated by Incropera & DeWitt (*Fundamentals of Heat and Mass Transfer*, Table 5.1).
//!
//! This module depends on nothing else in the crate, so tests and `dampfront verify` can use it
//! as an independent oracle for the numerical solver. Nothing here panics: invalid input (NaN,
//! negative time, negative Biot number) gives NaN, as documented on each function.

mod one_term;
mod profile;
mod roots;
mod series;
mod special;

pub use one_term::{conduction_centre_ratio, one_term_coefficient};
pub use profile::slab_profile;
/// Brent's bracketed root finder, also used by the solver to place a trigger inside a step.
pub(crate) use roots::brent;
pub use roots::{bessel_j0_zero, bessel_j1_zero, eigenvalues, weight};
pub use series::Series;
pub use special::{erfcx, ierfc, uptake_f, uptake_g};

/// Shape of the body: its faces are all exposed to the same medium.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Shape {
    /// Plane sheet of thickness `2l`, exposed on both faces (`l` is the half-thickness).
    Slab,
    /// Infinitely long cylinder of radius `l`.
    Cylinder,
    /// Sphere of radius `l`.
    Sphere,
}

/// Surface condition: fixed surface concentration, or surface evaporation with Biot number
/// `L = l * alpha / D` (slab: `l` = half-thickness; cylinder and sphere: `l` = radius).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Surface {
    /// The surface takes the concentration of the medium at once (Crank's "constant surface
    /// concentration"); the limit `L -> inf` of evaporation.
    Fixed,
    /// Flux out proportional to the departure of the surface from equilibrium.
    Evaporation {
        /// `L = l alpha / D` (Incropera's Bi with the half-thickness or radius); `>= 0`.
        /// `f64::INFINITY` means a fixed surface.
        biot: f64,
    },
}
