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

use super::nnls::{SolveStatus, nnls_normal, solve_subset};
use nalgebra::{DMatrix, DVector};

/// A regularised least-squares problem ready for repeated solves.
#[derive(Clone, Debug)]
pub struct Tikhonov {
    a: DMatrix<f64>,
    b: DVector<f64>,
    ata: DMatrix<f64>,
    atb: DVector<f64>,
    penalty: DMatrix<f64>,
    prior: Option<DMatrix<f64>>,
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
    /// Active-set iterations.
    pub iterations: usize,
    /// Whether the solver converged.
    pub status: SolveStatus,
}

impl Tikhonov {
    /// Sets up the problem. `a` is `m x n`, `b` has `m` entries, `penalty` is `n x n`.
    pub fn new(a: DMatrix<f64>, b: DVector<f64>, penalty: DMatrix<f64>) -> Self {
        debug_assert_eq!(a.nrows(), b.len());
        debug_assert_eq!(a.ncols(), penalty.nrows());
        let ata = a.tr_mul(&a);
        let atb = a.tr_mul(&b);
        Self {
            a,
            b,
            ata,
            atb,
            penalty,
            prior: None,
        }
    }

    /// Adds a fixed quadratic term `x' P x` (not scaled by `lambda`) to the
    /// objective: a prior that holds independently of the regularisation
    /// strength. It is not counted in `penalty_sq` nor in the data fit.
    #[must_use]
    pub fn with_prior(mut self, prior: DMatrix<f64>) -> Self {
        debug_assert_eq!(prior.nrows(), self.ncols());
        self.prior = Some(prior);
        self
    }

    fn normal_matrix(&self, lambda: f64) -> DMatrix<f64> {
        let mut q = &self.ata + &self.penalty * lambda;
        if let Some(p) = &self.prior {
            q += p;
        }
        q
    }

    /// The same problem restricted to a subset of rows (used by cross-validation).
    pub fn rows(&self, rows: &[usize]) -> Self {
        let a = self.a.select_rows(rows);
        let b = DVector::from_fn(rows.len(), |i, _| self.b[rows[i]]);
        let mut t = Self::new(a, b, self.penalty.clone());
        t.prior.clone_from(&self.prior);
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
    pub fn design(&self) -> &DMatrix<f64> {
        &self.a
    }

    /// The right-hand side.
    pub fn rhs(&self) -> &DVector<f64> {
        &self.b
    }

    /// The penalty matrix.
    pub fn penalty(&self) -> &DMatrix<f64> {
        &self.penalty
    }

    /// The fixed prior term, if any (see [`Tikhonov::with_prior`]).
    pub fn prior(&self) -> Option<&DMatrix<f64>> {
        self.prior.as_ref()
    }

    /// The full objective `||Ax - b||^2 + lambda x'Mx + x'Px` at `x`.
    pub fn objective(&self, lambda: f64, x: &[f64]) -> f64 {
        let xv = DVector::from_column_slice(x);
        let r = &self.a * &xv - &self.b;
        let mut v = r.norm_squared() + lambda * xv.dot(&(&self.penalty * &xv));
        if let Some(p) = &self.prior {
            v += xv.dot(&(p * &xv));
        }
        v
    }

    /// `tr(A'A) / tr(M)` restricted to the penalised unknowns: the natural
    /// scale of `lambda` for this problem.
    pub fn lambda_scale(&self) -> f64 {
        let (mut ta, mut tm) = (0.0, 0.0);
        for j in 0..self.ncols() {
            if self.penalty[(j, j)] > 0.0 {
                ta += self.ata[(j, j)];
                tm += self.penalty[(j, j)];
            }
        }
        if tm > 0.0 && ta > 0.0 { ta / tm } else { 1.0 }
    }

    /// Solves at `lambda >= 0`, warm-started from the free set `warm`.
    pub fn solve(&self, lambda: f64, warm: &[usize]) -> TikhonovSolution {
        let q = self.normal_matrix(lambda);
        let sol = nnls_normal(&q, &self.atb, warm);
        self.finish(lambda, sol.x, sol.passive, sol.iterations, sol.status)
    }

    /// Solves at every value of `lambdas`, from the largest down, each solve
    /// warm-started from the free set of the previous one, and maps each
    /// solution with `f`. Results come back in the order of `lambdas`.
    pub fn sweep<T>(&self, lambdas: &[f64], mut f: impl FnMut(TikhonovSolution) -> T) -> Vec<T> {
        let mut order: Vec<usize> = (0..lambdas.len()).collect();
        order.sort_by(|&a, &b| lambdas[b].total_cmp(&lambdas[a]));
        let mut warm: Vec<usize> = Vec::new();
        let mut out: Vec<Option<T>> = (0..lambdas.len()).map(|_| None).collect();
        for i in order {
            let solution = self.solve(lambdas[i], &warm);
            warm.clone_from(&solution.free);
            out[i] = Some(f(solution));
        }
        out.into_iter().flatten().collect()
    }

    fn finish(
        &self,
        lambda: f64,
        x: Vec<f64>,
        free: Vec<usize>,
        iterations: usize,
        status: SolveStatus,
    ) -> TikhonovSolution {
        let xv = DVector::from_column_slice(&x);
        let r = &self.a * &xv - &self.b;
        let residual_sq = r.norm_squared();
        let penalty_sq = xv.dot(&(&self.penalty * &xv)).max(0.0);
        TikhonovSolution {
            lambda,
            x,
            residual_sq,
            penalty_sq,
            free,
            iterations,
            status,
        }
    }

    /// Predicted right-hand side `A x`.
    pub fn predict(&self, x: &[f64]) -> Vec<f64> {
        (&self.a * DVector::from_column_slice(x))
            .iter()
            .copied()
            .collect()
    }

    /// Trace of the influence matrix on the free set,
    /// `tr H = tr( A_F (A_F' A_F + lambda M_FF + P_FF)^{-1} A_F' )`, the effective number
    /// of fitted parameters at a constrained solution: bound variables are held
    /// at zero and do not respond to the data.
    pub fn influence_trace(&self, lambda: f64, free: &[usize]) -> f64 {
        let p = free.len();
        if p == 0 {
            return 0.0;
        }
        let q = DMatrix::from_fn(p, p, |i, j| {
            let (a, b) = (free[i], free[j]);
            self.ata[(a, b)]
                + lambda * self.penalty[(a, b)]
                + self.prior.as_ref().map_or(0.0, |m| m[(a, b)])
        });
        let g = DMatrix::from_fn(p, p, |i, j| self.ata[(free[i], free[j])]);
        match q.clone().cholesky() {
            Some(ch) => ch.solve(&g).trace(),
            None => {
                // Singular free block (an unpenalised column without data
                // support): solve column by column with the shifted solver.
                (0..p)
                    .map(|k| {
                        let col = DVector::from_fn(p, |i, _| g[(i, k)]);
                        let idx: Vec<usize> = (0..p).collect();
                        solve_subset(&q, &col, &idx)[k]
                    })
                    .sum()
            }
        }
    }
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
        let t = Tikhonov::new(a.clone(), b.clone(), DMatrix::identity(4, 4));
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

    #[test]
    fn sweep_matches_cold_solves_in_input_order() {
        let a = DMatrix::from_fn(15, 5, |i, j| (((i * 31 + j * 17) % 11) as f64 / 11.0) - 0.2);
        let b = DVector::from_fn(15, |i, _| ((i as f64) * 0.9).sin());
        let t = Tikhonov::new(a, b, DMatrix::identity(5, 5));
        let lambdas = [1e-3, 1.0, 1e-1];
        let swept = t.sweep(&lambdas, |s| (s.lambda, s.x));
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
        let t = Tikhonov::new(a, b, DMatrix::identity(2, 2));
        let sub = t.rows(&[1, 3, 5]);
        assert_eq!(sub.nrows(), 3);
        assert_eq!(sub.design()[(1, 1)], 6.0);
        assert_eq!(sub.rhs()[2], 5.0);
    }
}
