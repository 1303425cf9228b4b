//! The Tikhonov-regularised non-negative least-squares problem
//!
//! $$ \min_{x \ge 0} \lVert A x - b \rVert^2 + \lambda\, x^\top M x $$
//!
//! on plain matrices: `A` is the (already weighted) design matrix, `M` a
//! symmetric positive semidefinite penalty matrix. Cross products are formed
//! once, so a solve at a new `lambda` costs one NNLS on `n x n` matrices.
//!
//! # References
//! - A. N. Tikhonov, V. Y. Arsenin (1977), *Solutions of Ill-Posed Problems*,
//!   Winston, Washington.
//! - P. C. Hansen (1998), *Rank-Deficient and Discrete Ill-Posed Problems*,
//!   SIAM, chapter 5 (general-form Tikhonov regularisation).

use super::nnls::{NnlsInfo, NnlsParams, nnls_dense, solve_subset};
use crate::linalg::Matrix;
use nalgebra::{DMatrix, DVector};
use std::sync::Arc;

/// A regularised least-squares problem ready for repeated solves.
///
/// The design matrix, its cross product, the penalty and the prior are held
/// behind shared pointers: an inversion plan ([`crate::pipeline::Plan`])
/// prepares them once and every response on the same axis reuses them.
#[derive(Clone, Debug)]
pub struct Tikhonov {
    a: Arc<DMatrix<f64>>,
    b: DVector<f64>,
    ata: Arc<DMatrix<f64>>,
    atb: DVector<f64>,
    penalty: Arc<DMatrix<f64>>,
    /// The prior `factor * E` as the shared `E` and its factor.
    prior: Option<(Arc<DMatrix<f64>>, f64)>,
    nnls: NnlsParams,
}

/// One solve at a fixed `lambda`.
#[derive(Clone, Debug)]
pub struct TikhonovSolution {
    /// Regularisation parameter used.
    pub lambda: f64,
    /// Minimiser, `x >= 0`.
    pub x: Vec<f64>,
    /// `||A x - b||^2`.
    pub residual_sq: f64,
    /// `x' M x`.
    pub penalty_sq: f64,
    /// Free (positive) variables at the solution, ascending.
    pub free: Vec<usize>,
    /// Iterations, status and KKT residual of the NNLS solve.
    pub info: NnlsInfo,
}

impl Tikhonov {
    /// Sets up the problem. `a` is `m x n`, `b` has `m` entries, `penalty`
    /// is `n x n`. Fails when the sizes disagree.
    pub fn new(a: Matrix, b: Vec<f64>, penalty: Matrix) -> crate::Result<Self> {
        if a.nrows() != b.len() || penalty.nrows() != a.ncols() || penalty.ncols() != a.ncols() {
            return Err(crate::Error::Data(format!(
                "a {} x {} design matrix needs {} right-hand-side values and a {} x {} penalty, got {} values and a {} x {} penalty",
                a.nrows(),
                a.ncols(),
                a.nrows(),
                a.ncols(),
                a.ncols(),
                b.len(),
                penalty.nrows(),
                penalty.ncols()
            )));
        }
        Ok(Self::from_dense(a.0, DVector::from_vec(b), penalty.0))
    }

    /// [`Tikhonov::new`] on the inner matrix types (sizes checked by the caller).
    pub(crate) fn from_dense(a: DMatrix<f64>, b: DVector<f64>, penalty: DMatrix<f64>) -> Self {
        let ata = crate::linalg::gram_dense(&a);
        Self::from_parts(Arc::new(a), b, Arc::new(ata), Arc::new(penalty), None)
    }

    /// A problem from prepared, shared pieces: `ata` must be `a' a`; the
    /// prior is `factor * E` given as `(E, factor)`.
    pub(crate) fn from_parts(
        a: Arc<DMatrix<f64>>,
        b: DVector<f64>,
        ata: Arc<DMatrix<f64>>,
        penalty: Arc<DMatrix<f64>>,
        prior: Option<(Arc<DMatrix<f64>>, f64)>,
    ) -> Self {
        debug_assert_eq!(a.nrows(), b.len());
        debug_assert_eq!(a.ncols(), penalty.nrows());
        debug_assert_eq!(ata.nrows(), a.ncols());
        let atb = a.tr_mul(&b);
        Self {
            a,
            b,
            ata,
            atb,
            penalty,
            prior,
            nnls: NnlsParams::default(),
        }
    }

    /// Adds a fixed quadratic term `x' P x` (not scaled by `lambda`) to the
    /// objective: a prior that holds independently of the regularisation
    /// strength. It is not counted in `penalty_sq` nor in the data fit.
    ///
    /// Fails when `prior` is not `n x n` for the `n` unknowns.
    pub fn with_prior(mut self, prior: Matrix) -> crate::Result<Self> {
        if prior.nrows() != self.ncols() || prior.ncols() != self.ncols() {
            return Err(crate::Error::Data(format!(
                "a problem with {} unknowns needs a {0} x {0} prior, got {} x {}",
                self.ncols(),
                prior.nrows(),
                prior.ncols()
            )));
        }
        self.prior = Some((Arc::new(prior.0), 1.0));
        Ok(self)
    }

    /// The same problem with another penalty matrix `M` (`n x n`), sharing
    /// the design, its cross product and the prior.
    pub(crate) fn with_penalty(&self, penalty: DMatrix<f64>) -> Self {
        debug_assert_eq!(penalty.nrows(), self.ncols());
        Self {
            penalty: Arc::new(penalty),
            ..self.clone()
        }
    }

    /// The same problem on the unknowns `keep` only (ascending indices):
    /// design, cross product, penalty and prior restricted, without
    /// forming a cross product again.
    pub(crate) fn keep_columns(&self, keep: &[usize]) -> Self {
        let k = keep.len();
        let sub = |m: &DMatrix<f64>| DMatrix::from_fn(k, k, |r, c| m[(keep[r], keep[c])]);
        Self {
            a: Arc::new(self.a.select_columns(keep)),
            b: self.b.clone(),
            ata: Arc::new(sub(&self.ata)),
            atb: DVector::from_fn(k, |r, _| self.atb[keep[r]]),
            penalty: Arc::new(sub(&self.penalty)),
            prior: self.prior.as_ref().map(|(p, f)| (Arc::new(sub(p)), *f)),
            nnls: self.nnls,
        }
    }

    /// The tolerances of every NNLS solve of this problem.
    #[must_use]
    pub fn with_nnls_params(mut self, params: NnlsParams) -> Self {
        self.nnls = params;
        self
    }

    /// `A'A + lambda M (+ P)`, in one pass over the three matrices.
    fn normal_matrix(&self, lambda: f64) -> DMatrix<f64> {
        let n = self.ncols();
        let (a, m) = (self.ata.as_slice(), self.penalty.as_slice());
        let values: Vec<f64> = match &self.prior {
            Some((p, f)) => a
                .iter()
                .zip(m)
                .zip(p.as_slice())
                .map(|((a, m), p)| (lambda * m + a) + p * f)
                .collect(),
            None => a.iter().zip(m).map(|(a, m)| lambda * m + a).collect(),
        };
        DMatrix::from_vec(n, n, values)
    }

    /// The same problem restricted to a subset of rows (used by cross-validation).
    ///
    /// # Panics
    /// When a row index is out of range.
    pub fn rows(&self, rows: &[usize]) -> Self {
        let a = self.a.select_rows(rows);
        let b = DVector::from_fn(rows.len(), |i, _| self.b[rows[i]]);
        let ata = crate::linalg::gram_dense(&a);
        let mut t = Self::from_parts(
            Arc::new(a),
            b,
            Arc::new(ata),
            self.penalty.clone(),
            self.prior.clone(),
        );
        t.nnls = self.nnls;
        t
    }

    /// Number of equations.
    pub fn nrows(&self) -> usize {
        self.a.nrows()
    }

    /// Number of unknowns.
    pub fn ncols(&self) -> usize {
        self.a.ncols()
    }

    /// The design matrix.
    pub fn design(&self) -> Matrix {
        Matrix(self.a.as_ref().clone())
    }

    /// The design matrix, without a copy.
    pub(crate) fn design_dense(&self) -> &DMatrix<f64> {
        &self.a
    }

    /// The right-hand side.
    pub fn rhs(&self) -> &[f64] {
        self.b.as_slice()
    }

    /// The penalty matrix.
    pub fn penalty(&self) -> Matrix {
        Matrix(self.penalty.as_ref().clone())
    }

    /// The fixed prior term, if any (see [`Tikhonov::with_prior`]).
    pub fn prior(&self) -> Option<Matrix> {
        self.prior.as_ref().map(|(p, f)| Matrix(p.as_ref() * *f))
    }

    /// The matrix `A'A + lambda M + P` of the normal equations. The
    /// objective is `x'(A'A + lambda M + P)x - 2 x'A'b + b'b`, so a Gaussian
    /// likelihood of noise variance `s^2` with the penalty as a Gaussian
    /// prior has the posterior precision `(A'A + lambda M + P) / s^2` and the
    /// unconstrained mean `(A'A + lambda M + P)^-1 A'b` (the Bayesian reading
    /// of Tikhonov regularisation; G. Wahba, J. R. Statist. Soc. B 40,
    /// 364-372, 1978).
    pub fn normal_equations(&self, lambda: f64) -> Matrix {
        Matrix(self.normal_matrix(lambda))
    }

    /// The right-hand side `A'b` of the normal equations.
    pub fn normal_rhs(&self) -> &[f64] {
        self.atb.as_slice()
    }

    /// The full objective `||Ax - b||^2 + lambda x'Mx + x'Px` at `x`.
    ///
    /// # Panics
    /// When `x` does not hold one value per unknown.
    pub fn objective(&self, lambda: f64, x: &[f64]) -> f64 {
        let xv = DVector::from_column_slice(x);
        let r = self.a.as_ref() * &xv - &self.b;
        let mut v = r.norm_squared() + lambda * xv.dot(&(self.penalty.as_ref() * &xv));
        if let Some((p, f)) = &self.prior {
            v += f * xv.dot(&(p.as_ref() * &xv));
        }
        v
    }

    /// Solves at `lambda >= 0`, warm-started from the free set `warm`.
    pub fn solve(&self, lambda: f64, warm: &[usize]) -> TikhonovSolution {
        let q = self.normal_matrix(lambda);
        let sol = nnls_dense(&q, self.atb.as_slice(), warm, &self.nnls);
        // Only the free columns contribute (x is zero elsewhere).
        let m = self.nrows();
        let mut r: Vec<f64> = self.b.iter().map(|b| -b).collect();
        for &j in &sol.passive {
            let xj = sol.x[j];
            for (ri, aij) in r.iter_mut().zip(&self.a.as_slice()[j * m..(j + 1) * m]) {
                *ri += aij * xj;
            }
        }
        let residual_sq = crate::linalg::dot(&r, &r);
        let n = self.ncols();
        let penalty_sq = sol
            .passive
            .iter()
            .map(|&j| {
                let col = &self.penalty.as_slice()[j * n..(j + 1) * n];
                sol.x[j] * sol.passive.iter().map(|&i| col[i] * sol.x[i]).sum::<f64>()
            })
            .sum::<f64>()
            // x'Mx >= 0 for a semidefinite M; rounding can leave -1e-30.
            .max(0.0);
        TikhonovSolution {
            lambda,
            x: sol.x,
            residual_sq,
            penalty_sq,
            free: sol.passive,
            info: sol.info,
        }
    }

    /// Solves at every value of `lambdas`, from the largest down, each solve
    /// warm-started from the free set of the previous one (the first from
    /// `warm`), and maps each solution with `f`. Results come back in the
    /// order of `lambdas`.
    pub fn sweep<T>(
        &self,
        lambdas: &[f64],
        warm: &[usize],
        mut f: impl FnMut(TikhonovSolution) -> T,
    ) -> Vec<T> {
        let mut order: Vec<usize> = (0..lambdas.len()).collect();
        order.sort_by(|&a, &b| lambdas[b].total_cmp(&lambdas[a]));
        let mut warm: Vec<usize> = warm.to_vec();
        let mut out: Vec<Option<T>> = (0..lambdas.len()).map(|_| None).collect();
        for i in order {
            let solution = self.solve(lambdas[i], &warm);
            warm.clone_from(&solution.free);
            out[i] = Some(f(solution));
        }
        out.into_iter().flatten().collect()
    }

    /// Predicted right-hand side `A x`.
    ///
    /// # Panics
    /// When `x` does not hold one value per unknown.
    pub fn predict(&self, x: &[f64]) -> Vec<f64> {
        (self.a.as_ref() * DVector::from_column_slice(x))
            .iter()
            .copied()
            .collect()
    }

    /// Trace of the influence matrix on the free set,
    /// `tr H = tr( A_F (A_F' A_F + lambda M_FF + P_FF)^{-1} A_F' )`, the effective number
    /// of fitted parameters at a constrained solution: bound variables are held
    /// at zero and do not respond to the data.
    ///
    /// # Panics
    /// When an index of `free` is out of range.
    pub fn influence_trace(&self, lambda: f64, free: &[usize]) -> f64 {
        let p = free.len();
        if p == 0 {
            return 0.0;
        }
        // Q_FF and G_FF = A_F'A_F, row-major (both symmetric).
        let mut q = vec![0.0; p * p];
        let mut g = vec![0.0; p * p];
        for i in 0..p {
            for j in 0..=i {
                let (a, b) = (free[i], free[j]);
                let gij = self.ata[(a, b)];
                let qij = gij
                    + lambda * self.penalty[(a, b)]
                    + self.prior.as_ref().map_or(0.0, |(m, f)| m[(a, b)] * f);
                (g[i * p + j], g[j * p + i]) = (gij, gij);
                (q[i * p + j], q[j * p + i]) = (qij, qij);
            }
        }
        match trace_of_inverse_product(&q, &g, p) {
            Some(t) => t,
            None => {
                // Singular free block (an unpenalised column without data
                // support): solve column by column with the shifted solver.
                let qm = DMatrix::from_row_slice(p, p, &q);
                let idx: Vec<usize> = (0..p).collect();
                (0..p)
                    .map(|k| {
                        let col = DVector::from_fn(p, |i, _| g[i * p + k]);
                        solve_subset(&qm, &col, &idx)[k]
                    })
                    .sum()
            }
        }
    }
}

/// `tr(Q^{-1} G)` for symmetric `p x p` matrices given row-major, `Q`
/// positive definite; `None` when its Cholesky factorisation breaks down.
///
/// With `Q = L L'` and `X = L^{-1}`, `tr(Q^{-1} G) = tr(X' X G) = sum_k x_k'
/// G x_k` over the rows `x_k` of `X` (nonzero in their first `k + 1`
/// entries): about `p^3/2` multiply-adds (factor `p^3/6`, inverse `p^3/6`,
/// quadratic forms `p^3/6` using the symmetry of `G`), against `7 p^3/6` for
/// solving `Q Y = G` and taking the trace (G. H. Golub, C. F. Van Loan,
/// *Matrix Computations*, 4th ed. (2013), sections 3.1 and 4.2).
fn trace_of_inverse_product(q: &[f64], g: &[f64], p: usize) -> Option<f64> {
    use crate::linalg::dot;
    // Cholesky, row-major lower triangle in place.
    let mut l = q.to_vec();
    for i in 0..p {
        for j in 0..=i {
            let s = l[i * p + j] - dot(&l[i * p..i * p + j], &l[j * p..j * p + j]);
            if i == j {
                if !(s > 0.0 && s.is_finite()) {
                    return None;
                }
                l[i * p + i] = s.sqrt();
            } else {
                l[i * p + j] = s / l[j * p + j];
            }
        }
    }
    // L' row by row, so the back substitution reads contiguous memory.
    let mut lt = vec![0.0; p * p];
    for i in 0..p {
        for j in 0..=i {
            lt[j * p + i] = l[i * p + j];
        }
    }
    // Row k of X = L^{-1} solves x_k L = e_k (back substitution on L').
    let mut x = vec![0.0; p];
    let mut trace = 0.0;
    for k in 0..p {
        x[k] = 1.0 / lt[k * p + k];
        for j in (0..k).rev() {
            let s = dot(&x[j + 1..=k], &lt[j * p + j + 1..j * p + k + 1]);
            x[j] = -s / lt[j * p + j];
        }
        // x_k' G x_k over the first k + 1 entries, symmetric G.
        let mut quad = 0.0;
        for i in 0..=k {
            let row = &g[i * p..i * p + i];
            quad += x[i] * (x[i] * g[i * p + i] + 2.0 * dot(row, &x[..i]));
        }
        trace += quad;
    }
    Some(trace)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Ridge regression (M = I) without active bounds has the closed form
    /// x = (A'A + lambda I)^{-1} A'b and tr H = sum s_i^2/(s_i^2 + lambda)
    /// over the singular values s_i of A (Hansen 1998, section 5.1).
    #[test]
    fn unconstrained_ridge_matches_svd_formulas() {
        let a = DMatrix::from_fn(20, 4, |i, j| {
            1.0 / (1.0 + i as f64 + j as f64) + if i == j { 1.0 } else { 0.0 }
        });
        let x_true = DVector::from_column_slice(&[1.0, 2.0, 0.5, 1.5]);
        let b = &a * &x_true;
        let t = Tikhonov::from_dense(a.clone(), b.clone(), DMatrix::identity(4, 4));
        let lambda = 0.05;
        let s = t.solve(lambda, &[]);
        let want = (a.transpose() * &a + DMatrix::identity(4, 4) * lambda)
            .cholesky()
            .unwrap()
            .solve(&(a.transpose() * &b));
        for i in 0..4 {
            assert!((s.x[i] - want[i]).abs() < 1e-12);
        }
        assert_eq!(s.free, vec![0, 1, 2, 3]);
        let sv = a.clone().svd(false, false).singular_values;
        let tr_want: f64 = sv.iter().map(|s| s * s / (s * s + lambda)).sum();
        assert!((t.influence_trace(lambda, &s.free) - tr_want).abs() < 1e-12);
        let r = &a * DVector::from_column_slice(&s.x) - &b;
        assert!((s.residual_sq - r.norm_squared()).abs() < 1e-14);
    }

    /// The trace through the triangular inverse equals the trace of the
    /// direct solve Q^{-1} G on a random symmetric positive-definite pair.
    #[test]
    fn trace_of_inverse_product_matches_a_direct_solve() {
        let p = 9;
        let b = DMatrix::from_fn(14, p, |i, j| (((i * 37 + j * 11) % 17) as f64 / 17.0) - 0.4);
        let g = b.transpose() * &b;
        let q = &g
            + DMatrix::from_fn(
                p,
                p,
                |i, j| if i == j { 0.3 + 0.01 * i as f64 } else { 0.0 },
            );
        let want = q.clone().cholesky().unwrap().solve(&g).trace();
        let row = |m: &DMatrix<f64>| m.transpose().as_slice().to_vec();
        let got = trace_of_inverse_product(&row(&q), &row(&g), p).unwrap();
        assert!((got - want).abs() < 1e-12 * want, "{got} vs {want}");
        // A singular Q gives None, not a number.
        let zero = vec![0.0; p * p];
        assert!(trace_of_inverse_product(&zero, &row(&g), p).is_none());
    }

    #[test]
    fn sweep_matches_cold_solves_in_input_order() {
        let a = DMatrix::from_fn(15, 5, |i, j| (((i * 31 + j * 17) % 11) as f64 / 11.0) - 0.2);
        let b = DVector::from_fn(15, |i, _| ((i as f64) * 0.9).sin());
        let t = Tikhonov::from_dense(a, b, DMatrix::identity(5, 5));
        let lambdas = [1e-3, 1.0, 1e-1];
        let swept = t.sweep(&lambdas, &[], |s| (s.lambda, s.x));
        for (k, (lam, x)) in swept.iter().enumerate() {
            assert_eq!(*lam, lambdas[k]);
            let cold = t.solve(lambdas[k], &[]);
            for (u, v) in x.iter().zip(&cold.x) {
                assert!((u - v).abs() < 1e-10);
            }
        }
    }

    #[test]
    fn row_subset_keeps_only_those_equations() {
        let a = DMatrix::from_fn(6, 2, |i, j| (i + 2 * j) as f64 + 1.0);
        let b = DVector::from_fn(6, |i, _| i as f64);
        let t = Tikhonov::from_dense(a, b, DMatrix::identity(2, 2));
        let sub = t.rows(&[1, 3, 5]);
        assert_eq!(sub.nrows(), 3);
        assert_eq!(sub.design().get(1, 1), 6.0);
        assert_eq!(sub.rhs()[2], 5.0);
    }
}
