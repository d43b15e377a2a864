//! Tridiagonal linear solve: O(n), the factors kept for reuse, no allocation.

/// The two-ended ("twisted") elimination of a tridiagonal matrix
/// `lower[i] x[i-1] + diag[i] x[i] + upper[i] x[i+1]` (`lower[0]` and `upper[n-1]` ignored),
/// kept so that several right-hand sides (a Newton update, the error estimate, the stages and
/// later steps of a linear problem) share it. The matrices assembled by the solver are
/// diagonally dominant M-matrices (diffusion plus a positive accumulation term), for which
/// elimination is stable without pivoting, from either end.
///
/// The Thomas algorithm eliminates from the first row down and substitutes back up: two chains
/// of dependent operations, n long, and on the solver's 10-300 cells their latency is the cost.
/// Here rows above the middle row m are eliminated downwards and rows below it upwards, both
/// chains in the same loop, meeting at m, which is solved first and substituted outwards: the
/// same operations as Thomas's, in chains half as long that the processor runs side by side.
#[derive(Debug, Clone)]
pub struct Factors {
    /// The middle row, n / 2.
    middle: usize,
    /// Towards the middle, each row's coupling to its neighbour there after elimination:
    /// `upper[i] / pivot[i]` above the middle, `lower[i] / pivot[i]` below it.
    eliminated: Vec<f64>,
    /// The reciprocal pivots.
    inverse: Vec<f64>,
    /// Each row's coupling to its eliminated neighbour, over its pivot (`lower[i] / pivot[i]`
    /// above and at the middle, `upper[i] / pivot[i]` below it): the forward sweep's
    /// multiplier, so that its dependency chain is one multiply and one subtract per row.
    scaled: Vec<f64>,
    /// The middle row's `upper / pivot`.
    middle_upper: f64,
}

impl Factors {
    /// Room for `n` rows.
    pub fn new(n: usize) -> Factors {
        Factors {
            middle: n / 2,
            eliminated: vec![0.0; n],
            inverse: vec![0.0; n],
            scaled: vec![0.0; n],
            middle_upper: 0.0,
        }
    }

    /// Eliminates the matrix. One division per row.
    /// Returns `false` when a pivot vanishes or is not finite.
    pub fn factor(&mut self, lower: &[f64], diag: &[f64], upper: &[f64]) -> bool {
        let n = self.inverse.len();
        if n == 0 {
            return true;
        }
        let m = self.middle;
        let (above, below) = (m, n - m - 1);
        // Every slice cut to n rows, so that the compiler sees each index in range and the loop
        // runs without bounds checks.
        let (lower, diag, upper) = (&lower[..n], &diag[..n], &upper[..n]);
        let inverse = &mut self.inverse[..n];
        let scaled = &mut self.scaled[..n];
        let eliminated = &mut self.eliminated[..n];
        // Pivots of the outermost rows, then both chains inwards, side by side. Each chain
        // carries only the last reciprocal pivot, in a register: the product of the two
        // couplings it multiplies is formed off the chain, so a row costs the chain one
        // multiply, one subtract and the division.
        let (mut inv_top, mut inv_bottom) = (0.0, 0.0);
        if above > 0 {
            inv_top = 1.0 / diag[0];
            inverse[0] = inv_top;
            scaled[0] = 0.0;
            eliminated[0] = upper[0] * inv_top;
        }
        if below > 0 {
            let b = n - 1;
            inv_bottom = 1.0 / diag[b];
            inverse[b] = inv_bottom;
            scaled[b] = 0.0;
            eliminated[b] = lower[b] * inv_bottom;
        }
        for k in 1..above {
            let i = k;
            inv_top = 1.0 / (diag[i] - (lower[i] * upper[i - 1]) * inv_top);
            inverse[i] = inv_top;
            scaled[i] = lower[i] * inv_top;
            eliminated[i] = upper[i] * inv_top;
            if k < below {
                let j = n - 1 - k;
                inv_bottom = 1.0 / (diag[j] - (upper[j] * lower[j + 1]) * inv_bottom);
                inverse[j] = inv_bottom;
                scaled[j] = upper[j] * inv_bottom;
                eliminated[j] = lower[j] * inv_bottom;
            }
        }
        // The middle row meets both eliminated neighbours.
        let mut pivot = diag[m];
        if above > 0 {
            pivot -= lower[m] * self.eliminated[m - 1];
        }
        if below > 0 {
            pivot -= upper[m] * self.eliminated[m + 1];
        }
        let inverse = 1.0 / pivot;
        self.inverse[m] = inverse;
        self.scaled[m] = if above > 0 { lower[m] * inverse } else { 0.0 };
        self.middle_upper = if below > 0 { upper[m] * inverse } else { 0.0 };
        self.eliminated[m] = 0.0;
        // A vanished pivot gives an infinite reciprocal, whose successors can come out finite
        // again (1 / -inf is -0), so every reciprocal is checked: their sum is finite only when
        // each of them is (one pass after the chains instead of a test in them).
        super::sums::sum(&self.inverse).is_finite()
    }

    /// Solves in place with the factored matrix. Returns `false` when the result is not finite.
    pub fn solve(&self, rhs: &mut [f64]) -> bool {
        let n = rhs.len();
        if n == 0 {
            return true;
        }
        let m = self.middle;
        let (top, rest) = rhs.split_at_mut(m);
        let (mid, bottom) = rest.split_first_mut().expect("the middle row is a row");
        let (above, below) = (top.len(), bottom.len());
        // Slices of the same lengths as the parts, so that the loops run without bounds checks.
        let (inv_t, sc_t, el_t) = (&self.inverse[..m], &self.scaled[..m], &self.eliminated[..m]);
        let (inv_b, sc_b, el_b) = (
            &self.inverse[m + 1..n],
            &self.scaled[m + 1..n],
            &self.eliminated[m + 1..n],
        );
        // Forward: the rows above downwards and the rows below upwards, side by side (the part
        // above has as many rows as the part below or one more).
        let (mut y, mut z) = (0.0, 0.0);
        for k in 0..below {
            y = top[k] * inv_t[k] - sc_t[k] * y;
            top[k] = y;
            let j = below - 1 - k;
            z = bottom[j] * inv_b[j] - sc_b[j] * z;
            bottom[j] = z;
        }
        for k in below..above {
            y = top[k] * inv_t[k] - sc_t[k] * y;
            top[k] = y;
        }
        // The middle row, then outwards.
        let x = *mid * self.inverse[m] - self.scaled[m] * y - self.middle_upper * z;
        *mid = x;
        let (mut up, mut down) = (x, x);
        for k in 0..below {
            let i = above - 1 - k;
            up = top[i] - el_t[i] * up;
            top[i] = up;
            down = bottom[k] - el_b[k] * down;
            bottom[k] = down;
        }
        for i in (0..above - below).rev() {
            up = top[i] - el_t[i] * up;
            top[i] = up;
        }
        // Every value feeds the middle one, which feeds every other (a NaN or infinity stays
        // non-finite through any product or difference, even with a zero factor), so the
        // first and last values are finite only when all are.
        rhs[0].is_finite() && rhs[n - 1].is_finite()
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
    fn solves_every_size_with_the_middle_row_at_either_parity() {
        // Sizes 1-9 put the meeting row after parts of equal and of unequal lengths. A
        // diagonally dominant, non-symmetric system with a known solution: A x = b by the matrix
        // product, then the solve must give x back.
        for n in 1..=9 {
            let lower: Vec<f64> = (0..n).map(|i| -1.0 - 0.1 * i as f64).collect();
            let upper: Vec<f64> = (0..n).map(|i| -0.5 - 0.05 * i as f64).collect();
            let diag: Vec<f64> = (0..n).map(|i| 3.0 + 0.3 * i as f64).collect();
            let x: Vec<f64> = (0..n).map(|i| 1.0 + (i as f64).sin()).collect();
            let mut b: Vec<f64> = (0..n)
                .map(|i| {
                    let mut v = diag[i] * x[i];
                    if i > 0 {
                        v += lower[i] * x[i - 1];
                    }
                    if i + 1 < n {
                        v += upper[i] * x[i + 1];
                    }
                    v
                })
                .collect();
            let mut factors = Factors::new(n);
            assert!(factors.factor(&lower, &diag, &upper));
            assert!(factors.solve(&mut b));
            for (i, (a, e)) in b.iter().zip(&x).enumerate() {
                assert!((a - e).abs() < 1e-13, "n {n} row {i}: {a} against {e}");
            }
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
