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

/// Solves `lower[i] u[i-1] + diag[i] u[i] + upper[i] u[i+1] = rhs[i]` for 2-vectors `u[i]`,
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
    // The running eliminated block and right-hand side stay in registers; zipped slices run
    // without bounds checks.
    let mut carried = mul(&inv, &upper[0]);
    let mut value = mul_vec(&inv, rhs[0]);
    scratch[0] = carried;
    rhs[0] = value;
    let rows = rhs
        .iter_mut()
        .zip(scratch.iter_mut())
        .zip(lower.iter().zip(diag).zip(upper))
        .skip(1);
    for ((r, s), ((l, d), u)) in rows {
        let lc = mul(l, &carried);
        let pivot = [d[0] - lc[0], d[1] - lc[1], d[2] - lc[2], d[3] - lc[3]];
        let Some(inv) = inverse(&pivot) else {
            return false;
        };
        carried = mul(&inv, u);
        *s = carried;
        let ld = mul_vec(l, value);
        value = mul_vec(&inv, [r[0] - ld[0], r[1] - ld[1]]);
        *r = value;
    }
    // Row i takes scratch[i] times row i + 1.
    for (r, s) in rhs[..n - 1]
        .iter_mut()
        .rev()
        .zip(scratch[..n - 1].iter().rev())
    {
        let cu = mul_vec(s, value);
        value = [r[0] - cu[0], r[1] - cu[1]];
        *r = value;
    }
    // Every value feeds the last row on the way down and the first on the way back (a NaN or
    // infinity stays non-finite through any product or sum, even with zero factors), so the
    // first row is finite only when all are.
    rhs[0][0].is_finite() && rhs[0][1].is_finite()
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
    fn reports_a_non_finite_value_anywhere() {
        let n = 5;
        let diag: Vec<Block> = (0..n).map(|_| [4.0, 0.5, 0.5, 4.0]).collect();
        let lower: Vec<Block> = (0..n)
            .map(|i| {
                if i == 2 {
                    [0.0; 4]
                } else {
                    [-1.0, 0.0, 0.0, -1.0]
                }
            })
            .collect();
        let upper: Vec<Block> = (0..n)
            .map(|i| {
                if i == 1 {
                    [0.0; 4]
                } else {
                    [-1.0, 0.0, 0.0, -1.0]
                }
            })
            .collect();
        for bad in [f64::NAN, f64::INFINITY] {
            for at in 0..2 * n {
                let mut rhs = vec![[1.0, 1.0]; n];
                rhs[at / 2][at % 2] = bad;
                let mut scratch = vec![[0.0; 4]; n];
                assert!(
                    !solve_in_place(&lower, &diag, &upper, &mut rhs, &mut scratch),
                    "{bad} at {at} not reported"
                );
            }
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
