//! The dense matrix of taumap's public API.
//!
//! Kernels, penalty Gram matrices and regularised problems are dense and small
//! (a few hundred rows, a few hundred columns). The public API hands them out
//! as [`Matrix`], a newtype over the linear-algebra crate used inside, so that
//! a caller (a script, a batch module, a later Python binding) needs no
//! linear-algebra crate of its own and the crate inside can change without
//! breaking anyone. Values are stored column by column.

use crate::{Error, Result};
use nalgebra::DMatrix;

/// A dense matrix of `f64`, stored column-major.
#[derive(Clone, Debug, PartialEq)]
pub struct Matrix(pub(crate) DMatrix<f64>);

impl Matrix {
    /// An `nrows x ncols` matrix of zeros.
    pub fn zeros(nrows: usize, ncols: usize) -> Self {
        Self(DMatrix::zeros(nrows, ncols))
    }

    /// The `n x n` identity.
    pub fn identity(n: usize) -> Self {
        Self(DMatrix::identity(n, n))
    }

    /// The matrix whose entry `(i, j)` is `f(i, j)`.
    pub fn from_fn(nrows: usize, ncols: usize, f: impl FnMut(usize, usize) -> f64) -> Self {
        Self(DMatrix::from_fn(nrows, ncols, f))
    }

    /// A matrix from its rows, concatenated. Fails when `values` does not
    /// hold `nrows * ncols` numbers.
    pub fn from_row_major(nrows: usize, ncols: usize, values: &[f64]) -> Result<Self> {
        if values.len() != nrows * ncols {
            return Err(Error::Data(format!(
                "a {nrows} x {ncols} matrix needs {} values, got {}",
                nrows * ncols,
                values.len()
            )));
        }
        Ok(Self(DMatrix::from_row_slice(nrows, ncols, values)))
    }

    /// Number of rows.
    pub fn nrows(&self) -> usize {
        self.0.nrows()
    }

    /// Number of columns.
    pub fn ncols(&self) -> usize {
        self.0.ncols()
    }

    /// Entry `(i, j)`; panics when out of range, like slice indexing.
    pub fn get(&self, i: usize, j: usize) -> f64 {
        self.0[(i, j)]
    }

    /// Column `j` as a slice (the storage is column-major).
    pub fn column(&self, j: usize) -> &[f64] {
        let n = self.0.nrows();
        &self.0.as_slice()[j * n..(j + 1) * n]
    }

    /// Every entry, row after row.
    pub fn to_row_major(&self) -> Vec<f64> {
        let (m, n) = self.0.shape();
        (0..m * n).map(|k| self.0[(k / n, k % n)]).collect()
    }

    /// The product `self * x`.
    ///
    /// # Panics
    /// When `x` does not have `ncols` entries.
    pub fn mul_vec(&self, x: &[f64]) -> Vec<f64> {
        assert_eq!(x.len(), self.ncols(), "mul_vec needs one value per column");
        let mut out = vec![0.0; self.nrows()];
        for (j, &xj) in x.iter().enumerate() {
            if xj != 0.0 {
                for (o, a) in out.iter_mut().zip(self.column(j)) {
                    *o += a * xj;
                }
            }
        }
        out
    }

    /// The Gram matrix `self' self`.
    pub fn gram(&self) -> Matrix {
        Self(gram_dense(&self.0))
    }

    /// The inner linear-algebra value.
    pub(crate) fn dense(&self) -> &DMatrix<f64> {
        &self.0
    }
}

/// `a' a` by a blocked matrix product: the transpose is copied once so that
/// the product runs through the optimised general kernel (several times
/// faster than column-by-column dot products at the sizes of a DRT problem).
pub(crate) fn gram_dense(a: &DMatrix<f64>) -> DMatrix<f64> {
    let at = a.transpose();
    &at * a
}

/// `sum_i a_i b_i` over the shorter length, with four partial sums: the
/// additions of one partial sum do not wait for the others, so the loop runs
/// several times faster than a single running sum (and vectorises), at the
/// cost of a different but equally accurate rounding (pairwise-style
/// summation; N. J. Higham, *Accuracy and Stability of Numerical
/// Algorithms*, 2nd ed. (2002), section 4.2).
#[inline]
pub(crate) fn dot(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut acc = [0.0f64; 4];
    let (ca, cb) = (a.chunks_exact(4), b.chunks_exact(4));
    let (ra, rb) = (ca.remainder(), cb.remainder());
    for (x, y) in ca.zip(cb) {
        acc[0] += x[0] * y[0];
        acc[1] += x[1] * y[1];
        acc[2] += x[2] * y[2];
        acc[3] += x[3] * y[3];
    }
    let mut s = (acc[0] + acc[1]) + (acc[2] + acc[3]);
    for (x, y) in ra.iter().zip(rb) {
        s += x * y;
    }
    s
}

impl std::ops::Index<(usize, usize)> for Matrix {
    type Output = f64;

    fn index(&self, ij: (usize, usize)) -> &f64 {
        &self.0[ij]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn layout_and_products() {
        let m = Matrix::from_row_major(2, 3, &[1.0, 2.0, 3.0, 4.0, 5.0, 6.0]).unwrap();
        assert_eq!(m.get(1, 0), 4.0);
        assert_eq!(m.column(2), &[3.0, 6.0]);
        assert_eq!(m.to_row_major(), vec![1.0, 2.0, 3.0, 4.0, 5.0, 6.0]);
        assert_eq!(m.mul_vec(&[1.0, 0.0, -1.0]), vec![-2.0, -2.0]);
        let g = m.gram();
        assert_eq!(g.get(0, 1), 1.0 * 2.0 + 4.0 * 5.0);
        assert!(Matrix::from_row_major(2, 2, &[1.0]).is_err());
        // Four partial sums and a remainder: lengths 0 to 9 against the
        // exact integer sums.
        for n in 0..10 {
            let a: Vec<f64> = (0..n).map(|i| i as f64 + 1.0).collect();
            let b: Vec<f64> = (0..n).map(|i| 2.0 * i as f64 - 3.0).collect();
            let want: f64 = (0..n)
                .map(|i| (i as f64 + 1.0) * (2.0 * i as f64 - 3.0))
                .sum();
            assert_eq!(dot(&a, &b), want, "n = {n}");
        }
    }
}
