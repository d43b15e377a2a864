//! Block-tridiagonal linear solve with 2x2 blocks (block Thomas algorithm), in place, O(n), no
//! allocation. The block size 1 case is [`super::tridiag`].
//!
//! The coupled heat-and-moisture Newton matrix is block diagonally dominant (accumulation terms
//! on the diagonal blocks, diffusion and conduction off them), so no pivoting across blocks is
//! needed; each 2x2 pivot block is inverted exactly.

/// A 2x2 matrix, row major: [[a, b], [c, d]].
pub type Block = [f64; 4];

#[inline]
fn mul(p: &Block, q: &Block) -> Block {
    [
        p[0] * q[0] + p[1] * q[2],
        p[0] * q[1] + p[1] * q[3],
        p[2] * q[0] + p[3] * q[2],
        p[2] * q[1] + p[3] * q[3],
    ]
}

#[inline]
fn mul_vec(p: &Block, v: [f64; 2]) -> [f64; 2] {
    [p[0] * v[0] + p[1] * v[1], p[2] * v[0] + p[3] * v[1]]
}

#[inline]
fn inverse(p: &Block) -> Option<Block> {
    let det = p[0] * p[3] - p[1] * p[2];
    if det == 0.0 || !det.is_finite() {
        return None;
    }
    let inv = 1.0 / det;
    Some([p[3] * inv, -p[1] * inv, -p[2] * inv, p[0] * inv])
}

/// Solves `lower[i] u[i-1] + diag[i] u[i] + upper[i] u[i+1] = rhs[i]` for 2-vectors u[i],
/// writing u into `rhs`. `lower[0]` and `upper[n-1]` are ignored; `scratch` (n blocks) holds the
/// eliminated super-diagonal. Returns `false` when a pivot block is singular or the result is
/// not finite.
pub fn solve_in_place(
    lower: &[Block],
    diag: &[Block],
    upper: &[Block],
    rhs: &mut [[f64; 2]],
    scratch: &mut [Block],
) -> bool {
    let n = rhs.len();
    if n == 0 {
        return true;
    }
    let Some(inv) = inverse(&diag[0]) else {
        return false;
    };
    scratch[0] = mul(&inv, &upper[0]);
    rhs[0] = mul_vec(&inv, rhs[0]);
    for i in 1..n {
        let lc = mul(&lower[i], &scratch[i - 1]);
        let pivot = [
            diag[i][0] - lc[0],
            diag[i][1] - lc[1],
            diag[i][2] - lc[2],
            diag[i][3] - lc[3],
        ];
        let Some(inv) = inverse(&pivot) else {
            return false;
        };
        scratch[i] = mul(&inv, &upper[i]);
        let ld = mul_vec(&lower[i], rhs[i - 1]);
        rhs[i] = mul_vec(&inv, [rhs[i][0] - ld[0], rhs[i][1] - ld[1]]);
    }
    for i in (0..n - 1).rev() {
        let cu = mul_vec(&scratch[i], rhs[i + 1]);
        rhs[i] = [rhs[i][0] - cu[0], rhs[i][1] - cu[1]];
    }
    rhs.iter().all(|v| v[0].is_finite() && v[1].is_finite())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn solves_a_known_block_system() {
        // Four 2x2 blocks; the exact solution is chosen and the right-hand side built from it.
        let n = 4;
        let diag: Vec<Block> = (0..n).map(|i| [5.0 + i as f64, 1.0, -0.5, 4.0]).collect();
        let lower: Vec<Block> = (0..n).map(|_| [-1.0, 0.2, 0.3, -1.0]).collect();
        let upper: Vec<Block> = (0..n).map(|_| [-1.0, -0.1, 0.0, -1.2]).collect();
        let u: Vec<[f64; 2]> = (0..n).map(|i| [i as f64 + 1.0, 2.0 - i as f64]).collect();
        let mut rhs: Vec<[f64; 2]> = (0..n)
            .map(|i| {
                let mut r = mul_vec(&diag[i], u[i]);
                if i > 0 {
                    let l = mul_vec(&lower[i], u[i - 1]);
                    r = [r[0] + l[0], r[1] + l[1]];
                }
                if i + 1 < n {
                    let up = mul_vec(&upper[i], u[i + 1]);
                    r = [r[0] + up[0], r[1] + up[1]];
                }
                r
            })
            .collect();
        let mut scratch = vec![[0.0; 4]; n];
        assert!(solve_in_place(
            &lower,
            &diag,
            &upper,
            &mut rhs,
            &mut scratch
        ));
        for (a, e) in rhs.iter().zip(&u) {
            assert!((a[0] - e[0]).abs() < 1e-13 && (a[1] - e[1]).abs() < 1e-13);
        }
    }

    #[test]
    fn reports_a_singular_pivot() {
        let mut rhs = [[1.0, 1.0]];
        let mut s = [[0.0; 4]];
        assert!(!solve_in_place(
            &[[0.0; 4]],
            &[[1.0, 2.0, 2.0, 4.0]],
            &[[0.0; 4]],
            &mut rhs,
            &mut s
        ));
    }
}
