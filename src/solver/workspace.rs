//! Buffers the solver writes into, sized once from the mesh so that the inner loop never
//! allocates.

use super::flux::{FaceGuess, FaceLaws, NewtonMemory};
use super::tridiag::Factors;

/// What a linear problem's factored matrix depends on: (stage coefficient c dt, temperature,
/// face laws).
pub type FactorKey = (f64, f64, FaceLaws);

/// Scratch arrays for face fluxes and the tridiagonal system.
#[derive(Debug, Clone)]
pub struct Workspace {
    /// Face fluxes, n + 1.
    pub flux: Vec<f64>,
    /// d flux / d (left cell), n + 1.
    pub d_left: Vec<f64>,
    /// d flux / d (right cell), n + 1.
    pub d_right: Vec<f64>,
    /// Sub-diagonal, n.
    pub lower: Vec<f64>,
    /// Diagonal, n.
    pub diag: Vec<f64>,
    /// Super-diagonal, n.
    pub upper: Vec<f64>,
    /// Right-hand side, then solution, n.
    pub rhs: Vec<f64>,
    /// The factored matrix of the last Newton update.
    pub factors: Factors,
    /// What the factors were built for, when they may be reused: a linear problem's matrix
    /// depends only on the stage coefficient, the temperature and the face laws.
    pub factored_for: Option<FactorKey>,
    /// What the face derivatives (`d_left`, `d_right`, `face_far`) of a linear problem were
    /// evaluated for (temperature, face laws): they do not depend on the state or the step, so
    /// a new step size only needs a new elimination.
    pub derivatives_for: Option<(f64, FaceLaws)>,
    /// The last Newton update, n (kept for backtracking).
    pub delta: Vec<f64>,
    /// Net water inflow of each cell at the last evaluation, n.
    pub inflow: Vec<f64>,
    /// Whether `d_left` and `d_right` hold derivatives that may be reused.
    pub jacobian_valid: bool,
    /// What the Newton iteration measured in the last stage solve.
    pub memory: NewtonMemory,
    /// Linear solves done (counted here because the Newton loop owns them).
    pub linear_solves: u64,
    /// Evaluations of the face derivatives.
    pub jacobian_evaluations: u64,
    /// The warm start of each exposed face (A, B): its last solutions.
    pub face_guess: [FaceGuess; 2],
    /// d flux / d (second cell in) at faces A and B (their second-order gradient).
    pub face_far: [f64; 2],
}

impl Workspace {
    /// Buffers for `n` cells.
    pub fn new(n: usize) -> Workspace {
        Workspace {
            flux: vec![0.0; n + 1],
            d_left: vec![0.0; n + 1],
            d_right: vec![0.0; n + 1],
            lower: vec![0.0; n],
            diag: vec![0.0; n],
            upper: vec![0.0; n],
            rhs: vec![0.0; n],
            factors: Factors::new(n),
            factored_for: None,
            derivatives_for: None,
            delta: vec![0.0; n],
            inflow: vec![0.0; n],
            jacobian_valid: false,
            memory: NewtonMemory::default(),
            linear_solves: 0,
            jacobian_evaluations: 0,
            face_guess: [FaceGuess::default(); 2],
            face_far: [0.0; 2],
        }
    }
}
