//! A small dense row-major matrix of f64: just what redistribution matrices and the wafer
//! solver need (products, matrix–vector products, diagonal scaling). Invariant: `data.len()
//! == rows · cols`. No heavy linear-algebra dependency: the operations are few and plain,
//! and a product skips zero entries, which makes products with specular (sparse) matrices
//! cheap.

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
    /// self · other. Dense: i-k-j order (unit-stride inner loop) with the k loop blocked so
    /// a block of `other`'s rows stays in cache while the rows of `self` sweep over it; zero
    /// entries of `self` are skipped. When `other` is sparse (under 1/8 nonzero, e.g. a
    /// specular matrix) its rows are compressed and only nonzeros are visited.
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
        const KB: usize = 64;
        let mut k0 = 0;
        while k0 < self.cols {
            let k1 = (k0 + KB).min(self.cols);
            for i in 0..self.rows {
                let orow = &mut out.data[i * n..(i + 1) * n];
                let arow = &self.data[i * self.cols + k0..i * self.cols + k1];
                for (dk, a) in arow.iter().enumerate() {
                    if *a != 0.0 {
                        for (o, b) in orow.iter_mut().zip(other.row(k0 + dk)) {
                            *o += a * b;
                        }
                    }
                }
            }
            k0 = k1;
        }
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
    fn product_matches_hand_result() {
        let a = Matrix::from_row_major(2, 3, vec![1., 2., 0., 0., 1., 4.]).unwrap();
        let b = Matrix::from_row_major(3, 2, vec![1., 0., 2., 1., 0., 3.]).unwrap();
        let c = a.matmul(&b);
        assert_eq!(c.as_slice(), &[5., 2., 2., 13.]);
        assert_eq!(a.mul_vec(&[1., 1., 1.]), vec![3., 5.]);
        assert_eq!(a.vec_mul(&[1., 1.]), vec![1., 3., 4.]);
        let mut d = a.clone();
        d.scale_columns(&[1., 0., 2.]);
        assert_eq!(d.as_slice(), &[1., 0., 0., 0., 0., 8.]);
        d.scale_rows(&[2., 1.]);
        assert_eq!(d.as_slice(), &[2., 0., 0., 0., 0., 8.]);
    }
}
