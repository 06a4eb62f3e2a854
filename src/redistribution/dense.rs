//! A small dense row-major matrix of f64: just what redistribution matrices and the wafer
//! solver need (products, matrix–vector products, diagonal scaling). Invariant: `data.len()
//! == rows · cols`. No heavy linear-algebra dependency: the operations are few and plain,
//! and a product skips zero entries, which makes products with specular (sparse) matrices
//! cheap. Dense products go through [`gemm_sub`], a cache-blocked kernel with register tiles
//! (packing after K. Goto & R. A. van de Geijn, "Anatomy of high-performance matrix
//! multiplication", ACM Trans. Math. Softw. 34, 12 (2008), from memory).

/// Dense row-major matrix.
#[derive(Clone, Debug, PartialEq)]
pub struct Matrix {
    rows: usize,
    cols: usize,
    data: Vec<f64>,
}

impl Matrix {
    /// All-zero `rows × cols` matrix.
    pub fn zeros(rows: usize, cols: usize) -> Self {
        Matrix {
            rows,
            cols,
            data: vec![0.0; rows * cols],
        }
    }
    /// n × n identity.
    pub fn identity(n: usize) -> Self {
        let mut m = Self::zeros(n, n);
        for i in 0..n {
            m.data[i * n + i] = 1.0;
        }
        m
    }
    /// From row-major data; `None` if the length is not `rows · cols`.
    pub fn from_row_major(rows: usize, cols: usize, data: Vec<f64>) -> Option<Self> {
        (data.len() == rows * cols).then_some(Matrix { rows, cols, data })
    }
    #[inline]
    pub fn rows(&self) -> usize {
        self.rows
    }
    #[inline]
    pub fn cols(&self) -> usize {
        self.cols
    }
    /// Row-major data.
    #[inline]
    pub fn as_slice(&self) -> &[f64] {
        &self.data
    }
    #[inline]
    pub fn as_mut_slice(&mut self) -> &mut [f64] {
        &mut self.data
    }
    #[inline]
    pub fn get(&self, i: usize, j: usize) -> f64 {
        self.data[i * self.cols + j]
    }
    #[inline]
    pub fn set(&mut self, i: usize, j: usize, v: f64) {
        self.data[i * self.cols + j] = v;
    }
    #[inline]
    pub fn add_at(&mut self, i: usize, j: usize, v: f64) {
        self.data[i * self.cols + j] += v;
    }
    #[inline]
    pub fn row(&self, i: usize) -> &[f64] {
        &self.data[i * self.cols..(i + 1) * self.cols]
    }
    /// Sum of column `j`.
    pub fn column_sum(&self, j: usize) -> f64 {
        (0..self.rows).map(|i| self.get(i, j)).sum()
    }
    /// Sums of every column (one row-major pass; cheaper than `column_sum` per column).
    pub fn column_sums(&self) -> Vec<f64> {
        let mut out = vec![0.0; self.cols];
        for row in self.data.chunks(self.cols.max(1)) {
            out.iter_mut().zip(row).for_each(|(o, x)| *o += x);
        }
        out
    }
    /// self · v.
    pub fn mul_vec(&self, v: &[f64]) -> Vec<f64> {
        debug_assert_eq!(v.len(), self.cols);
        (0..self.rows)
            .map(|i| self.row(i).iter().zip(v).map(|(a, b)| a * b).sum())
            .collect()
    }
    /// vᵀ · self (a row vector times the matrix).
    pub fn vec_mul(&self, v: &[f64]) -> Vec<f64> {
        debug_assert_eq!(v.len(), self.rows);
        let mut out = vec![0.0; self.cols];
        for (i, vi) in v.iter().enumerate() {
            if *vi != 0.0 {
                for (o, a) in out.iter_mut().zip(self.row(i)) {
                    *o += vi * a;
                }
            }
        }
        out
    }
    /// self · other. Dense: [`gemm_sub`]. When `other` is sparse (under 1/8 nonzero, e.g. a
    /// specular matrix) its rows are compressed and only nonzeros are visited, skipping zero
    /// entries of `self` too.
    pub fn matmul(&self, other: &Matrix) -> Matrix {
        assert_eq!(
            self.cols, other.rows,
            "matrix product shape mismatch (a lightfold bug)"
        );
        let mut out = Matrix::zeros(self.rows, other.cols);
        let n = other.cols;
        if n == 0 || self.rows == 0 {
            return out;
        }
        let nnz = other.data.iter().filter(|x| **x != 0.0).count();
        if nnz * 8 < other.data.len() {
            let sparse: Vec<Vec<(usize, f64)>> = (0..other.rows)
                .map(|k| {
                    other
                        .row(k)
                        .iter()
                        .enumerate()
                        .filter(|(_, v)| **v != 0.0)
                        .map(|(j, v)| (j, *v))
                        .collect()
                })
                .collect();
            for i in 0..self.rows {
                let orow = &mut out.data[i * n..(i + 1) * n];
                for (k, a) in self.row(i).iter().enumerate() {
                    if *a != 0.0 {
                        for (j, b) in &sparse[k] {
                            orow[*j] += a * b;
                        }
                    }
                }
            }
            return out;
        }
        // out = 0 − self · (−other) would need a copy; instead accumulate −(self·other) and
        // negate once.
        gemm_sub(
            self.rows,
            n,
            self.cols,
            &self.data,
            self.cols,
            &other.data,
            n,
            &mut out.data,
            n,
        );
        out.data.iter_mut().for_each(|x| *x = -*x);
        out
    }
    /// self ← self · diag(d) (scales column j by `d[j]`).
    pub fn scale_columns(&mut self, d: &[f64]) {
        debug_assert_eq!(d.len(), self.cols);
        for row in self.data.chunks_mut(self.cols.max(1)) {
            for (x, s) in row.iter_mut().zip(d) {
                *x *= s;
            }
        }
    }
    /// self ← diag(d) · self (scales row i by `d[i]`).
    pub fn scale_rows(&mut self, d: &[f64]) {
        debug_assert_eq!(d.len(), self.rows);
        for (row, s) in self.data.chunks_mut(self.cols.max(1)).zip(d) {
            for x in row {
                *x *= s;
            }
        }
    }
    /// Largest |entry| (0 for an empty matrix).
    pub fn max_abs(&self) -> f64 {
        self.data.iter().fold(0.0, |m, x| m.max(x.abs()))
    }
}

/// Rows of the register tile of [`gemm_sub`].
const MR: usize = 4;
/// Columns of the register tile (one packed panel of B).
const NR: usize = 8;
/// Depth of a packed block of B (its rows): KC × NC f64 stay in a 256 KB-class cache.
const KC: usize = 128;
/// Columns of a packed block of B.
const NC: usize = 256;

/// C ← C − A·B for row-major slices with leading dimensions (`lda`, `ldb`, `ldc` ≥ the
/// respective column counts): A is m × k, B is k × n, C is m × n.
///
/// Blocked for the cache: B is packed block by block (KC rows × NC columns) into panels of NR
/// columns; for every MR rows of A the register tile C[MR × NR] accumulates Σ_p A[i, p] B[p, j]
/// over the block's depth and is subtracted from C once. Every element of C receives its
/// block sums in the fixed order of p blocks, so results do not depend on anything but the
/// shapes. Rows of A that are zero over a block are skipped (sparse structure stays cheap).
#[allow(clippy::too_many_arguments)]
pub fn gemm_sub(
    m: usize,
    n: usize,
    k: usize,
    a: &[f64],
    lda: usize,
    b: &[f64],
    ldb: usize,
    c: &mut [f64],
    ldc: usize,
) {
    if m == 0 || n == 0 || k == 0 {
        return;
    }
    assert!(
        a.len() >= (m - 1) * lda + k
            && b.len() >= (k - 1) * ldb + n
            && c.len() >= (m - 1) * ldc + n,
        "gemm shapes (a lightfold bug)"
    );
    let mut packed = vec![0.0; KC * NC.next_multiple_of(NR)];
    for p0 in (0..k).step_by(KC) {
        let kc = KC.min(k - p0);
        for j0 in (0..n).step_by(NC) {
            let nc = NC.min(n - j0);
            let panels = nc.div_ceil(NR);
            // Pack B[p0.., j0..] into panels: panel q holds kc rows of NR columns.
            for q in 0..panels {
                let (jq, w) = (j0 + q * NR, NR.min(nc - q * NR));
                let dst = &mut packed[q * kc * NR..(q + 1) * kc * NR];
                for p in 0..kc {
                    let src = &b[(p0 + p) * ldb + jq..(p0 + p) * ldb + jq + w];
                    let d = &mut dst[p * NR..(p + 1) * NR];
                    d[..w].copy_from_slice(src);
                    d[w..].iter_mut().for_each(|x| *x = 0.0);
                }
            }
            row_blocks(m, nc, kc, panels, j0, p0, a, lda, &packed, c, ldc);
        }
    }
}

/// The rows of one packed block: runs the AVX build of [`row_blocks_generic`] where the CPU
/// has it (same operations in the same order, so bitwise the same results: no fused
/// multiply-add is formed), else the baseline build.
#[allow(clippy::too_many_arguments)]
#[inline]
fn row_blocks(
    m: usize,
    nc: usize,
    kc: usize,
    panels: usize,
    j0: usize,
    p0: usize,
    a: &[f64],
    lda: usize,
    packed: &[f64],
    c: &mut [f64],
    ldc: usize,
) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx") {
        // SAFETY: the CPU supports AVX (checked just above), the only requirement of a
        // `target_feature` function; the body is safe Rust.
        unsafe { row_blocks_avx(m, nc, kc, panels, j0, p0, a, lda, packed, c, ldc) };
        return;
    }
    row_blocks_generic(m, nc, kc, panels, j0, p0, a, lda, packed, c, ldc);
}

#[cfg(target_arch = "x86_64")]
#[allow(clippy::too_many_arguments)]
#[target_feature(enable = "avx")]
fn row_blocks_avx(
    m: usize,
    nc: usize,
    kc: usize,
    panels: usize,
    j0: usize,
    p0: usize,
    a: &[f64],
    lda: usize,
    packed: &[f64],
    c: &mut [f64],
    ldc: usize,
) {
    row_blocks_generic(m, nc, kc, panels, j0, p0, a, lda, packed, c, ldc);
}

#[allow(clippy::too_many_arguments)]
#[inline(always)]
fn row_blocks_generic(
    m: usize,
    nc: usize,
    kc: usize,
    panels: usize,
    j0: usize,
    p0: usize,
    a: &[f64],
    lda: usize,
    packed: &[f64],
    c: &mut [f64],
    ldc: usize,
) {
    let mut i = 0;
    while i < m {
        let rows = MR.min(m - i);
        // Skip row groups whose A block is all zero.
        let zero =
            (i..i + rows).all(|r| a[r * lda + p0..r * lda + p0 + kc].iter().all(|x| *x == 0.0));
        if !zero {
            for q in 0..panels {
                let (jq, w) = (j0 + q * NR, NR.min(nc - q * NR));
                let bp = &packed[q * kc * NR..(q + 1) * kc * NR];
                let mut acc = [[0.0f64; NR]; MR];
                if rows == MR {
                    tile::<MR>(kc, a, i * lda + p0, lda, bp, &mut acc);
                } else {
                    for (r, acc_r) in acc.iter_mut().enumerate().take(rows) {
                        let mut one = [[0.0f64; NR]; 1];
                        tile::<1>(kc, a, (i + r) * lda + p0, lda, bp, &mut one);
                        *acc_r = one[0];
                    }
                }
                for (r, acc_r) in acc.iter().enumerate().take(rows) {
                    let crow = &mut c[(i + r) * ldc + jq..(i + r) * ldc + jq + w];
                    for (x, y) in crow.iter_mut().zip(acc_r) {
                        *x -= y;
                    }
                }
            }
        }
        i += rows;
    }
}

/// Register tile: `acc[r][j] = Σ_p A[start + r·lda + p] · bp[p·NR + j]`, p < kc.
#[inline(always)]
fn tile<const R: usize>(
    kc: usize,
    a: &[f64],
    start: usize,
    lda: usize,
    bp: &[f64],
    acc: &mut [[f64; NR]; R],
) {
    let rows: [&[f64]; R] = std::array::from_fn(|r| &a[start + r * lda..start + r * lda + kc]);
    for (p, b) in bp.chunks_exact(NR).take(kc).enumerate() {
        let b: &[f64; NR] = b.try_into().expect("panel width");
        for r in 0..R {
            let l = rows[r][p];
            for j in 0..NR {
                acc[r][j] += l * b[j];
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sparse_and_blocked_products_agree_with_the_definition() {
        let n = 70; // more than one k block
        let a = Matrix::from_row_major(
            n,
            n,
            (0..n * n)
                .map(|i| ((i * 7919) % 101) as f64 - 50.0)
                .collect(),
        )
        .unwrap();
        let mut d = Matrix::identity(n); // sparse path
        d.set(3, 60, 2.5);
        for (b, name) in [(a.clone(), "dense"), (d, "sparse")] {
            let c = a.matmul(&b);
            for (i, j) in [(0, 0), (5, 60), (69, 3), (33, 68)] {
                let want: f64 = (0..n).map(|k| a.get(i, k) * b.get(k, j)).sum();
                assert_eq!(c.get(i, j), want, "{name} ({i},{j})");
            }
        }
    }

    #[test]
    fn blocked_product_handles_ragged_shapes() {
        // Shapes that leave partial register tiles and blocks in every direction.
        let (m, k, n) = (7, 131, 261);
        let a = Matrix::from_row_major(
            m,
            k,
            (0..m * k).map(|i| ((i * 31) % 17) as f64 - 8.0).collect(),
        )
        .unwrap();
        let b = Matrix::from_row_major(
            k,
            n,
            (0..k * n).map(|i| ((i * 13) % 11) as f64 - 5.0).collect(),
        )
        .unwrap();
        let c = a.matmul(&b);
        for (i, j) in [(0, 0), (6, 260), (3, 255), (5, 256), (6, 7)] {
            let want: f64 = (0..k).map(|p| a.get(i, p) * b.get(p, j)).sum();
            assert_eq!(c.get(i, j), want, "({i},{j})");
        }
    }

    #[test]
    fn product_matches_hand_result() {
        let a = Matrix::from_row_major(2, 3, vec![1., 2., 0., 0., 1., 4.]).unwrap();
        let b = Matrix::from_row_major(3, 2, vec![1., 0., 2., 1., 0., 3.]).unwrap();
        let c = a.matmul(&b);
        assert_eq!(c.as_slice(), &[5., 2., 2., 13.]);
        assert_eq!(a.mul_vec(&[1., 1., 1.]), vec![3., 5.]);
        assert_eq!(a.vec_mul(&[1., 1.]), vec![1., 3., 4.]);
        assert_eq!(a.column_sums(), vec![1., 3., 4.]);
        let mut d = a.clone();
        d.scale_columns(&[1., 0., 2.]);
        assert_eq!(d.as_slice(), &[1., 0., 0., 0., 0., 8.]);
        d.scale_rows(&[2., 1.]);
        assert_eq!(d.as_slice(), &[2., 0., 0., 0., 0., 8.]);
    }
}
