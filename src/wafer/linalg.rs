//! Dense LU factorisation with partial pivoting, for the wafer solver's linear systems.
//!
//! Algorithm: right-looking Gaussian elimination with row pivoting (G. H. Golub &
//! C. F. Van Loan, *Matrix Computations*, 4th ed., Johns Hopkins (2013), Alg. 3.4.1), row-major
//! so the update loop runs with unit stride. Why our own: the solver needs one factorisation
//! and a few triangular solves per wavelength on matrices of at most a few thousand rows; a
//! general linear-algebra crate (with BLAS/LAPACK bindings or a large generic API) would be a
//! heavy dependency for ~80 lines, and this keeps the build pure Rust and quick.
//! Backward stability: ‖ΔA‖ ≤ γ_{3n} |L||U| (Higham 2002, Thm 9.3); the systems here are
//! I − (substochastic operator), diagonally dominant when light is absorbed or escapes.

use crate::redistribution::Matrix;
use crate::redistribution::dense::gemm_sub;

/// Columns per panel of the blocked factorisation (a panel row block of U, 64 × n f64,
/// stays in a 256 KB-class cache for n up to ~4000).
const PANEL: usize = 64;

/// A factorised square matrix P A = L U (unit lower L below the diagonal, U on and above).
#[derive(Clone, Debug)]
pub struct Lu {
    n: usize,
    lu: Vec<f64>,
    perm: Vec<usize>,
}

/// The matrix is singular to working precision.
#[derive(Clone, Debug, PartialEq)]
pub struct Singular {
    /// Elimination step (column) where no usable pivot was found.
    pub column: usize,
    /// The largest candidate pivot found there.
    pub pivot: f64,
}

impl Lu {
    /// Factorises `a` (consumed). Fails when the best pivot of a column is below
    /// 1e-14 · max|a|.
    ///
    /// Blocked right-looking form (Golub & Van Loan 2013, §3.4.9): panels of `PANEL` (64)
    /// columns are factorised with row pivoting applied across whole rows, then the block row
    /// of U is solved and the trailing matrix updated by one blocked matrix product per panel
    /// ([`gemm_sub`], where nearly all the work is). Same arithmetic as the unblocked
    /// algorithm up to the order of the additions.
    pub fn factor(a: Matrix) -> Result<Lu, Singular> {
        assert_eq!(
            a.rows(),
            a.cols(),
            "LU of a non-square matrix (a lightfold bug)"
        );
        let n = a.rows();
        let floor = 1e-14 * a.max_abs();
        let mut lu = a.as_slice().to_vec();
        let mut perm: Vec<usize> = (0..n).collect();
        let mut k0 = 0;
        while k0 < n {
            let k1 = (k0 + PANEL).min(n);
            // Panel: columns k0..k1, rows k0..n.
            for k in k0..k1 {
                let (mut p, mut best) = (k, lu[k * n + k].abs());
                for i in k + 1..n {
                    let v = lu[i * n + k].abs();
                    if v > best {
                        best = v;
                        p = i;
                    }
                }
                if best <= floor || best.is_nan() {
                    return Err(Singular {
                        column: k,
                        pivot: best,
                    });
                }
                if p != k {
                    let (lo, hi) = lu.split_at_mut(p * n);
                    lo[k * n..(k + 1) * n].swap_with_slice(&mut hi[..n]);
                    perm.swap(k, p);
                }
                let (top, rest) = lu.split_at_mut((k + 1) * n);
                let prow = &top[k * n + k..k * n + k1];
                let inv = 1.0 / prow[0];
                for row in rest.chunks_mut(n) {
                    let l = row[k] * inv;
                    row[k] = l;
                    if l != 0.0 {
                        for (x, y) in row[k + 1..k1].iter_mut().zip(&prow[1..]) {
                            *x -= l * y;
                        }
                    }
                }
            }
            if k1 < n {
                // Block row of U: U12 = L11⁻¹ A12 (unit lower triangular, forward).
                for k in k0..k1 {
                    let (top, rest) = lu.split_at_mut((k + 1) * n);
                    let urow = &top[k * n + k1..(k + 1) * n];
                    for row in rest.chunks_mut(n).take(k1 - k - 1) {
                        let l = row[k];
                        if l != 0.0 {
                            for (x, y) in row[k1..].iter_mut().zip(urow) {
                                *x -= l * y;
                            }
                        }
                    }
                }
                // Trailing update A22 −= L21 U12 by the blocked product kernel (L21 copied
                // out: it shares rows with A22).
                let (top, rest) = lu.split_at_mut(k1 * n);
                let (m, kb) = (n - k1, k1 - k0);
                let mut l21 = Vec::with_capacity(m * kb);
                for row in rest.chunks(n) {
                    l21.extend_from_slice(&row[k0..k1]);
                }
                gemm_sub(
                    m,
                    n - k1,
                    kb,
                    &l21,
                    kb,
                    &top[k0 * n + k1..],
                    n,
                    &mut rest[k1..],
                    n,
                );
            }
            k0 = k1;
        }
        Ok(Lu { n, lu, perm })
    }

    /// Solves A x = b; returns x.
    pub fn solve(&self, b: &[f64]) -> Vec<f64> {
        let n = self.n;
        debug_assert_eq!(b.len(), n);
        let mut x: Vec<f64> = self.perm.iter().map(|&p| b[p]).collect();
        for i in 0..n {
            let row = &self.lu[i * n..i * n + i];
            let s: f64 = row.iter().zip(&x[..i]).map(|(l, y)| l * y).sum();
            x[i] -= s;
        }
        for i in (0..n).rev() {
            let row = &self.lu[i * n..(i + 1) * n];
            let s: f64 = row[i + 1..]
                .iter()
                .zip(&x[i + 1..])
                .map(|(u, y)| u * y)
                .sum();
            x[i] = (x[i] - s) / row[i];
        }
        x
    }

    /// Solves A X = B for a matrix right-hand side (row-major, unit-stride updates).
    pub fn solve_matrix(&self, b: &Matrix) -> Matrix {
        let n = self.n;
        let m = b.cols();
        assert_eq!(b.rows(), n, "LU solve shape mismatch (a lightfold bug)");
        let mut x = vec![0.0; n * m];
        for (i, &p) in self.perm.iter().enumerate() {
            x[i * m..(i + 1) * m].copy_from_slice(b.row(p));
        }
        for i in 0..n {
            let (done, cur) = x.split_at_mut(i * m);
            let xi = &mut cur[..m];
            for k in 0..i {
                let l = self.lu[i * n + k];
                if l != 0.0 {
                    for (a, c) in xi.iter_mut().zip(&done[k * m..(k + 1) * m]) {
                        *a -= l * c;
                    }
                }
            }
        }
        for i in (0..n).rev() {
            let (head, tail) = x.split_at_mut((i + 1) * m);
            let xi = &mut head[i * m..];
            for k in i + 1..n {
                let u = self.lu[i * n + k];
                if u != 0.0 {
                    for (a, c) in xi.iter_mut().zip(&tail[(k - i - 1) * m..(k - i) * m]) {
                        *a -= u * c;
                    }
                }
            }
            let d = 1.0 / self.lu[i * n + i];
            xi.iter_mut().for_each(|a| *a *= d);
        }
        Matrix::from_row_major(n, m, x).expect("shape")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn solves_a_system_that_needs_pivoting() {
        let a = Matrix::from_row_major(3, 3, vec![0.0, 2.0, 1.0, 1.0, 1.0, 1.0, 2.0, 1.0, 0.0])
            .unwrap();
        let x_true = [1.0, -2.0, 3.0];
        let b = a.mul_vec(&x_true);
        let lu = Lu::factor(a.clone()).unwrap();
        let x = lu.solve(&b);
        for (u, v) in x.iter().zip(x_true) {
            assert!((u - v).abs() < 1e-14);
        }
        let bm = Matrix::from_row_major(3, 2, vec![b[0], 1.0, b[1], 0.0, b[2], 0.0]).unwrap();
        let xm = lu.solve_matrix(&bm);
        assert!((xm.get(1, 0) + 2.0).abs() < 1e-14);
        let back = a.matmul(&xm);
        assert!((back.get(0, 1) - 1.0).abs() < 1e-14 && back.get(2, 1).abs() < 1e-14);
    }

    #[test]
    fn blocked_factorisation_solves_a_large_system() {
        // 150 × 150 (three panels): diagonally weighted pseudo-random matrix.
        let n = 150;
        let mut data = vec![0.0; n * n];
        let mut x: u64 = 12345;
        for (i, v) in data.iter_mut().enumerate() {
            x = crate::sampling::splitmix64(x);
            *v = (x >> 11) as f64 / (1u64 << 53) as f64 - 0.5
                + if i % (n + 1) == 0 { 3.0 } else { 0.0 };
        }
        let a = Matrix::from_row_major(n, n, data).unwrap();
        let x_true: Vec<f64> = (0..n).map(|i| (i as f64 * 0.37).sin()).collect();
        let b = a.mul_vec(&x_true);
        let x = Lu::factor(a).unwrap().solve(&b);
        let err = x
            .iter()
            .zip(&x_true)
            .fold(0.0f64, |m, (u, v)| m.max((u - v).abs()));
        assert!(err < 1e-12, "max error {err:e}");
    }

    #[test]
    fn singular_matrix_is_reported() {
        let a = Matrix::from_row_major(2, 2, vec![1.0, 2.0, 2.0, 4.0]).unwrap();
        assert_eq!(Lu::factor(a).unwrap_err().column, 1);
    }
}
