//! Tridiagonal linear solve (Thomas algorithm): O(n), the factors kept for reuse, no allocation.

/// The elimination (Thomas algorithm) of a tridiagonal matrix
/// `lower[i] x[i-1] + diag[i] x[i] + upper[i] x[i+1]` (`lower[0]` and `upper[n-1]` ignored),
/// kept so that several right-hand sides (a Newton update, the error estimate, the stages and
/// later steps of a linear problem) share it. The matrices assembled by the solver are
/// diagonally dominant M-matrices (diffusion plus a positive accumulation term), for which the
/// algorithm is stable without pivoting.
#[derive(Debug, Clone)]
pub struct Factors {
    /// The upper diagonal after elimination, `upper[i-1] / pivot[i-1]` at i (0 at 0).
    eliminated: Vec<f64>,
    /// The reciprocal pivots.
    inverse: Vec<f64>,
    /// `lower[i] / pivot[i]`: the forward sweep's multiplier, so that its dependency chain is one
    /// multiply and one subtract per row (the sweep is latency-bound).
    scaled_lower: Vec<f64>,
}

impl Factors {
    /// Room for `n` rows.
    pub fn new(n: usize) -> Factors {
        Factors {
            eliminated: vec![0.0; n],
            inverse: vec![0.0; n],
            scaled_lower: vec![0.0; n],
        }
    }

    /// Eliminates the matrix. One division per row.
    /// Returns `false` when a pivot vanishes or is not finite.
    pub fn factor(&mut self, lower: &[f64], diag: &[f64], upper: &[f64]) -> bool {
        let n = self.inverse.len();
        if n == 0 {
            return true;
        }
        let mut inverse = 1.0 / diag[0];
        if !inverse.is_finite() {
            return false;
        }
        self.inverse[0] = inverse;
        self.scaled_lower[0] = 0.0;
        for i in 1..n {
            let e = upper[i - 1] * inverse;
            self.eliminated[i] = e;
            inverse = 1.0 / (diag[i] - lower[i] * e);
            if !inverse.is_finite() {
                return false;
            }
            self.inverse[i] = inverse;
            self.scaled_lower[i] = lower[i] * inverse;
        }
        true
    }

    /// Solves in place with the factored matrix. Returns `false` when the result is not finite.
    pub fn solve(&self, rhs: &mut [f64]) -> bool {
        let n = rhs.len();
        if n == 0 {
            return true;
        }
        // Slices of the same length, so that the loops run without bounds checks.
        let (inverse, scaled_lower, eliminated) = (
            &self.inverse[..n],
            &self.scaled_lower[..n],
            &self.eliminated[..n],
        );
        let mut previous = rhs[0] * inverse[0];
        rhs[0] = previous;
        for ((r, &inv), &sl) in rhs.iter_mut().zip(inverse).zip(scaled_lower).skip(1) {
            previous = *r * inv - sl * previous;
            *r = previous;
        }
        let mut next = previous;
        // Row i takes eliminated[i + 1] times row i + 1.
        for (r, &e) in rhs[..n - 1]
            .iter_mut()
            .rev()
            .zip(eliminated[1..].iter().rev())
        {
            next = *r - e * next;
            *r = next;
        }
        // Every value feeds the next in the forward sweep and the one before in the backward
        // sweep (a NaN or infinity stays non-finite through any product or difference, even with
        // a zero factor), so the first value is finite only when all are.
        rhs[0].is_finite()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn solves_a_known_system() {
        // A = tridiag(-1, 4, -1), x = (1, 2, 3, 4) gives b = A x.
        let lower = [0.0, -1.0, -1.0, -1.0];
        let diag = [4.0; 4];
        let upper = [-1.0, -1.0, -1.0, 0.0];
        let x = [1.0, 2.0, 3.0, 4.0];
        let mut b = [
            4.0 * x[0] - x[1],
            -x[0] + 4.0 * x[1] - x[2],
            -x[1] + 4.0 * x[2] - x[3],
            -x[2] + 4.0 * x[3],
        ];
        let mut factors = Factors::new(4);
        assert!(factors.factor(&lower, &diag, &upper));
        assert!(factors.solve(&mut b));
        for (a, e) in b.iter().zip(x) {
            assert!((a - e).abs() < 1e-14);
        }
    }

    #[test]
    fn reports_a_non_finite_value_anywhere_in_the_right_hand_side() {
        let lower = [0.0, -1.0, 0.0, -1.0];
        let diag = [4.0; 4];
        let upper = [-1.0, 0.0, -1.0, 0.0];
        let mut factors = Factors::new(4);
        assert!(factors.factor(&lower, &diag, &upper));
        for bad in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
            for at in 0..4 {
                let mut b = [1.0; 4];
                b[at] = bad;
                assert!(!factors.solve(&mut b), "{bad} at {at} not reported");
            }
        }
    }

    #[test]
    fn reports_a_zero_pivot() {
        assert!(!Factors::new(2).factor(&[0.0, 1.0], &[0.0, 1.0], &[1.0, 0.0]));
    }
}
