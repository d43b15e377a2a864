//! Tridiagonal linear solve (Thomas algorithm), in place, O(n), no allocation.

/// Solves `lower[i] x[i-1] + diag[i] x[i] + upper[i] x[i+1] = rhs[i]`, writing x into `rhs`.
///
/// `lower[0]` and `upper[n-1]` are ignored. `scratch` must have the same length. The matrices
/// assembled by the solver are diagonally dominant M-matrices (diffusion plus a positive
/// accumulation term), for which the algorithm is stable without pivoting. Returns `false`
/// when a pivot vanishes or the result is not finite.
pub fn solve_in_place(
    lower: &[f64],
    diag: &[f64],
    upper: &[f64],
    rhs: &mut [f64],
    scratch: &mut [f64],
) -> bool {
    let n = rhs.len();
    if n == 0 {
        return true;
    }
    // One division per row: the reciprocal pivot serves both the elimination and the solution.
    let mut inverse = 1.0 / diag[0];
    if !inverse.is_finite() {
        return false;
    }
    rhs[0] *= inverse;
    for i in 1..n {
        scratch[i] = upper[i - 1] * inverse;
        inverse = 1.0 / (diag[i] - lower[i] * scratch[i]);
        if !inverse.is_finite() {
            return false;
        }
        rhs[i] = (rhs[i] - lower[i] * rhs[i - 1]) * inverse;
    }
    for i in (0..n - 1).rev() {
        rhs[i] -= scratch[i + 1] * rhs[i + 1];
    }
    // A sum is finite only when every term is (and vectorises, unlike a test per value).
    rhs.iter().sum::<f64>().is_finite()
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
        let mut scratch = [0.0; 4];
        assert!(solve_in_place(&lower, &diag, &upper, &mut b, &mut scratch));
        for (a, e) in b.iter().zip(x) {
            assert!((a - e).abs() < 1e-14);
        }
    }

    #[test]
    fn reports_a_zero_pivot() {
        let mut b = [1.0, 1.0];
        let mut s = [0.0; 2];
        assert!(!solve_in_place(
            &[0.0, 1.0],
            &[0.0, 1.0],
            &[1.0, 0.0],
            &mut b,
            &mut s
        ));
    }
}
