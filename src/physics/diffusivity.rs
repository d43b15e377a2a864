//! Effective moisture diffusivity D(X, T) in the one general form of the `materials` sheet:
//!
//! D(X, T) = d_ref · exp(b (X − X_ref)) · exp(−Ea/R (1/T − 1/T_ref)), T in kelvin,
//!
//! which covers constant, Arrhenius and moisture-dependent diffusivities with one row.

use super::{GAS_CONSTANT, ZERO_CELSIUS_K};

/// Parameters of the diffusivity law; see the module overview.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Diffusivity {
    /// D at the reference state, m2/s.
    pub d_ref: f64,
    /// Reference temperature T_ref, degrees C.
    pub t_ref_c: f64,
    /// Reference moisture X_ref, dry-basis fraction.
    pub x_ref: f64,
    /// Activation energy Ea, J/mol.
    pub activation_energy_j_mol: f64,
    /// Moisture coefficient b, per unit dry-basis fraction.
    pub moisture_coef: f64,
}

impl Diffusivity {
    /// A constant diffusivity `d` (m2/s): T_ref 25 C, X_ref, Ea and b all 0.
    pub fn constant(d: f64) -> Self {
        Diffusivity {
            d_ref: d,
            t_ref_c: 25.0,
            x_ref: 0.0,
            activation_energy_j_mol: 0.0,
            moisture_coef: 0.0,
        }
    }

    /// D(X, T) in m2/s at moisture `x` (dry fraction) and temperature `t_c`.
    ///
    /// D = d_ref · exp(b (X − X_ref) − Ea/R (1/T − 1/T_ref)), R = 8.314 J/(mol K). With Ea = 0
    /// the temperature term is skipped, so any temperature is accepted.
    #[inline]
    pub fn at(&self, x: f64, t_c: f64) -> f64 {
        // The common constant case skips the exponential (it is most of a face's cost).
        if self.moisture_coef == 0.0 && self.activation_energy_j_mol == 0.0 {
            return self.d_ref;
        }
        let mut exponent = self.moisture_coef * (x - self.x_ref);
        if self.activation_energy_j_mol != 0.0 {
            let inv_t = 1.0 / (t_c + ZERO_CELSIUS_K);
            let inv_t_ref = 1.0 / (self.t_ref_c + ZERO_CELSIUS_K);
            exponent -= self.activation_energy_j_mol / GAS_CONSTANT * (inv_t - inv_t_ref);
        }
        self.d_ref * exponent.exp()
    }

    /// ∂D/∂X = b D, m2/s per unit dry fraction.
    #[inline]
    pub fn slope_x(&self, x: f64, t_c: f64) -> f64 {
        if self.moisture_coef == 0.0 {
            0.0
        } else {
            self.moisture_coef * self.at(x, t_c)
        }
    }

    /// D and ∂D/∂X together, from one exponential: (D, b D).
    #[inline]
    pub fn at_with_slope_x(&self, x: f64, t_c: f64) -> (f64, f64) {
        let d = self.at(x, t_c);
        (d, self.moisture_coef * d)
    }

    /// ∂D/∂T = D Ea / (R T²), m2/s per K.
    #[inline]
    pub fn slope_t(&self, x: f64, t_c: f64) -> f64 {
        if self.activation_energy_j_mol == 0.0 {
            return 0.0;
        }
        let t_k = t_c + ZERO_CELSIUS_K;
        self.at(x, t_c) * self.activation_energy_j_mol / (GAS_CONSTANT * t_k * t_k)
    }

    /// True when D does not depend on moisture (b == 0). Whether Ea matters depends on whether
    /// the temperature varies, which is the caller's business.
    #[inline]
    pub fn is_constant(&self) -> bool {
        self.moisture_coef == 0.0
    }

    /// Problems with the parameters, one sentence each; empty when they are usable.
    pub fn validate(&self) -> Vec<String> {
        let mut problems = Vec::new();
        if !(self.d_ref.is_finite() && self.d_ref > 0.0) {
            problems.push(format!(
                "Reference diffusivity must be a finite number greater than 0 m2/s, but is {}.",
                self.d_ref
            ));
        }
        if !(self.t_ref_c.is_finite() && self.t_ref_c > -ZERO_CELSIUS_K) {
            problems.push(format!(
                "Reference temperature must be above absolute zero (-273.15 C), but is {}.",
                self.t_ref_c
            ));
        }
        if !self.x_ref.is_finite() {
            problems.push(format!(
                "Reference moisture must be a finite number, but is {}.",
                self.x_ref
            ));
        }
        if !self.activation_energy_j_mol.is_finite() {
            problems.push(format!(
                "Activation energy must be a finite number, but is {}.",
                self.activation_energy_j_mol
            ));
        }
        if !self.moisture_coef.is_finite() {
            problems.push(format!(
                "Moisture coefficient must be a finite number, but is {}.",
                self.moisture_coef
            ));
        }
        problems
    }
}
