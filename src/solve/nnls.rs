//! Exact active-set solver for non-negative quadratic programs in normal-equation
//! form:
//!
//! $$ \min_{x \ge 0} \tfrac12 x^\top Q x - c^\top x $$
//!
//! with `Q` symmetric positive (semi)definite. For `Q = A'A + lambda M` and
//! `c = A'b` this is the Tikhonov-regularised non-negative least-squares problem.
//!
//! The algorithm is Lawson and Hanson's active-set NNLS, run on the
//! cross-product matrices as in Bro and de Jong's fast variant, with a warm
//! start from a given passive (free) set: the warm set is first pruned until
//! its unconstrained solution is strictly positive, which gives a feasible
//! point that is optimal on its own passive set, the invariant the main loop
//! needs. Each subproblem is solved by a Cholesky factorisation.
//!
//! # References
//! - C. L. Lawson, R. J. Hanson (1974), *Solving Least Squares Problems*,
//!   Prentice-Hall, chapter 23 (algorithm NNLS).
//! - R. Bro, S. de Jong (1997), "A fast non-negativity-constrained least squares
//!   algorithm", J. Chemometrics 11, 393-401.

use crate::linalg::Matrix;
use nalgebra::{DMatrix, DVector};

/// How an iterative solve ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SolveStatus {
    /// Optimality conditions met within tolerance.
    Converged,
    /// Iteration limit reached; the result is the last feasible iterate.
    MaxIterations,
    /// `Q` or `c` holds a NaN or an infinity; the result is all zeros.
    NonFinite,
    /// The objective decreases without bound along a feasible direction
    /// (a column of `Q` with zero curvature and positive gradient).
    Unbounded,
    /// A subproblem was numerically singular and was solved with a diagonal
    /// shift (reported in [`NnlsInfo::shift`]); the result is optimal for the
    /// shifted problem.
    Degenerate,
}

/// Tolerances and limits of [`nnls`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NnlsParams {
    /// Absolute tolerance on the gradient of a bound variable.
    pub abs_tol: f64,
    /// Tolerance relative to `max(|c|_inf, max_j Q_jj)`.
    pub rel_tol: f64,
    /// Active-set changes before giving up; `None` means `5 n + 20`.
    pub max_iter: Option<usize>,
}

impl Default for NnlsParams {
    /// `abs_tol = 0`, `rel_tol = 1e-12`, `max_iter = 5 n + 20`.
    fn default() -> Self {
        Self {
            abs_tol: 0.0,
            rel_tol: 1e-12,
            max_iter: None,
        }
    }
}

/// Diagnostics of one [`nnls`] solve.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct NnlsInfo {
    /// Number of passive-set changes.
    pub iterations: usize,
    /// How the solve ended.
    pub status: SolveStatus,
    /// Largest violation of the KKT conditions at the returned point,
    /// `max_j max(-x_j, -g_j, |x_j g_j|^(1/2))` with `g = Qx - c`.
    pub kkt_residual: f64,
    /// Largest diagonal shift applied to a singular subproblem (0 when none).
    pub shift: f64,
}

/// Result of [`nnls`].
#[derive(Clone, Debug)]
pub struct NnlsSolution {
    /// The minimiser, `x >= 0`.
    pub x: Vec<f64>,
    /// Indices of the passive (free, positive) variables, ascending.
    pub passive: Vec<usize>,
    /// Iterations, status, KKT residual.
    pub info: NnlsInfo,
}

/// Solves `min 1/2 x'Qx - c'x` subject to `x >= 0`.
///
/// `warm` is a passive set to start from (for example the one found at a
/// neighbouring regularisation parameter); pass `&[]` for a cold start.
/// Dual feasibility is accepted when every gradient component of a bound
/// variable satisfies `c_j - (Qx)_j <= tol`, with
/// `tol = abs_tol + rel_tol max(|c|_inf, max_j Q_jj)`.
pub fn nnls(q: &Matrix, c: &[f64], warm: &[usize], params: &NnlsParams) -> NnlsSolution {
    nnls_dense(q.dense(), c, warm, params)
}

/// [`nnls`] on the inner matrix type.
pub(crate) fn nnls_dense(
    q: &DMatrix<f64>,
    c: &[f64],
    warm: &[usize],
    params: &NnlsParams,
) -> NnlsSolution {
    let c = DVector::from_column_slice(c);
    let n = c.len();
    debug_assert_eq!(q.nrows(), n);
    debug_assert_eq!(q.ncols(), n);
    let scale = c.amax().max(q.diagonal().amax()).max(f64::MIN_POSITIVE);
    let tol = params.abs_tol + params.rel_tol * scale;
    let max_iter = params.max_iter.unwrap_or(5 * n + 20);

    let mut passive = vec![false; n];
    for &i in warm {
        if i < n {
            passive[i] = true;
        }
    }
    let mut x = DVector::zeros(n);
    let mut iterations = 0;
    let mut chol = IncrementalCholesky::new(n);

    // Warm start: prune until the subproblem solution is strictly positive.
    loop {
        let set: Vec<usize> = (0..n).filter(|&i| passive[i]).collect();
        if set.is_empty() {
            break;
        }
        let s = chol.refactor_and_solve(q, &c, &set);
        let mut pruned = false;
        for (k, &i) in set.iter().enumerate() {
            if s[k] <= 0.0 {
                passive[i] = false;
                pruned = true;
            }
        }
        if !pruned {
            x.fill(0.0);
            for (k, &i) in set.iter().enumerate() {
                x[i] = s[k];
            }
            break;
        }
        iterations += 1;
    }
    if !chol.matches(&passive) {
        let set: Vec<usize> = (0..n).filter(|&i| passive[i]).collect();
        chol.refactor_and_solve(q, &c, &set);
    }

    let mut status = SolveStatus::Converged;
    let mut blocked: Option<usize> = None;
    loop {
        if iterations >= max_iter {
            status = SolveStatus::MaxIterations;
            break;
        }
        // Gradient from the passive columns only (x is zero elsewhere).
        let mut w = c.clone();
        for &i in chol.order() {
            let xi = x[i];
            if xi != 0.0 {
                w.axpy(-xi, &q.column(i), 1.0);
            }
        }
        let mut best: Option<(usize, f64)> = None;
        for j in 0..n {
            if !passive[j] && Some(j) != blocked && w[j] > tol && best.is_none_or(|(_, b)| w[j] > b)
            {
                best = Some((j, w[j]));
            }
        }
        let Some((t, _)) = best else { break };
        passive[t] = true;
        iterations += 1;
        let mut s = if chol.append(q, t) {
            chol.solve(&c)
        } else {
            // Numerically dependent column: keep it out.
            passive[t] = false;
            blocked = Some(t);
            continue;
        };
        // Inner loop: step back towards feasibility until the subproblem
        // solution is positive on the passive set.
        loop {
            let set: Vec<usize> = chol.order().to_vec();
            if s.iter().all(|&v| v > 0.0) {
                for (k, &i) in set.iter().enumerate() {
                    x[i] = s[k];
                }
                blocked = None;
                break;
            }
            let mut alpha = f64::INFINITY;
            for (k, &i) in set.iter().enumerate() {
                if s[k] <= 0.0 {
                    let d = x[i] - s[k];
                    if d > 0.0 {
                        alpha = alpha.min(x[i] / d);
                    }
                }
            }
            if !alpha.is_finite() {
                alpha = 0.0;
            }
            for (k, &i) in set.iter().enumerate() {
                x[i] += alpha * (s[k] - x[i]);
            }
            let mut removed_any = false;
            for &i in &set {
                if x[i] <= 0.0 {
                    x[i] = 0.0;
                    passive[i] = false;
                    removed_any = true;
                }
            }
            if !removed_any {
                // Degenerate step (alpha rounding): drop the most negative.
                if let Some((k, _)) = s.iter().enumerate().min_by(|a, b| a.1.total_cmp(b.1)) {
                    x[set[k]] = 0.0;
                    passive[set[k]] = false;
                }
            }
            iterations += 1;
            if !passive[t] {
                // The entering variable left at once: numerically degenerate;
                // keep it out for the next pick to avoid cycling.
                blocked = Some(t);
            }
            let keep: Vec<usize> = set.iter().copied().filter(|&i| passive[i]).collect();
            s = chol.refactor_and_solve(q, &c, &keep);
            if iterations >= max_iter {
                break;
            }
        }
    }
    let passive_idx: Vec<usize> = (0..n).filter(|&i| passive[i]).collect();
    NnlsSolution {
        x: x.iter().map(|v| v.max(0.0)).collect(),
        passive: passive_idx,
        info: NnlsInfo {
            iterations,
            status,
            kkt_residual: 0.0,
            shift: 0.0,
        },
    }
}

/// Cholesky factor `L L' = Q_SS` of the passive block, in the order variables
/// entered, so that a new variable costs one forward substitution (O(p^2))
/// instead of a new factorisation (O(p^3)). Removals refactor from scratch.
///
/// Source: the row-append update of a Cholesky factor, e.g. G. H. Golub,
/// C. F. Van Loan, *Matrix Computations*, 4th ed. (2013), section 6.5.
struct IncrementalCholesky {
    /// Row-major lower triangle with row stride `n`: row `a` holds L[a, 0..=a].
    l: Vec<f64>,
    n: usize,
    order: Vec<usize>,
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

impl IncrementalCholesky {
    fn new(n: usize) -> Self {
        Self {
            l: vec![0.0; n * n],
            n,
            order: Vec::with_capacity(n),
        }
    }

    fn order(&self) -> &[usize] {
        &self.order
    }

    fn matches(&self, passive: &[bool]) -> bool {
        self.order.len() == passive.iter().filter(|&&p| p).count()
            && self.order.iter().all(|&i| passive[i])
    }

    /// Appends variable `t`; false when its pivot is not positive.
    fn append(&mut self, q: &DMatrix<f64>, t: usize) -> bool {
        let p = self.order.len();
        let n = self.n;
        // Forward substitution L r = Q[order, t], written straight into row p.
        let col = q.column(t);
        for a in 0..p {
            let v = col[self.order[a]] - dot(&self.l[a * n..a * n + a], &self.l[p * n..p * n + a]);
            self.l[p * n + a] = v / self.l[a * n + a];
        }
        let row = &self.l[p * n..p * n + p];
        let d2 = q[(t, t)] - dot(row, row);
        if d2.is_nan() || d2 <= 1e-13 * q[(t, t)].abs().max(f64::MIN_POSITIVE) {
            return false;
        }
        self.l[p * n + p] = d2.sqrt();
        self.order.push(t);
        true
    }

    /// Solves `Q_SS s = c_S` with the current factor; `s` is in factor order.
    fn solve(&self, c: &DVector<f64>) -> Vec<f64> {
        let p = self.order.len();
        let n = self.n;
        let mut y = vec![0.0; p];
        for a in 0..p {
            let v = c[self.order[a]] - dot(&self.l[a * n..a * n + a], &y[..a]);
            y[a] = v / self.l[a * n + a];
        }
        // Back substitution L' s = y, row by row of L.
        for a in (0..p).rev() {
            y[a] /= self.l[a * n + a];
            let ya = y[a];
            let row = &self.l[a * n..a * n + a];
            for (yb, lb) in y[..a].iter_mut().zip(row) {
                *yb -= lb * ya;
            }
        }
        y
    }

    /// Rebuilds the factor for `set` (kept in the given order) and solves;
    /// falls back to the shifted dense solve when the block is singular.
    fn refactor_and_solve(
        &mut self,
        q: &DMatrix<f64>,
        c: &DVector<f64>,
        set: &[usize],
    ) -> Vec<f64> {
        // The rows of the factor for a prefix of `set` that matches the
        // current order are still valid: keep them.
        let keep = self
            .order
            .iter()
            .zip(set)
            .take_while(|(a, b)| a == b)
            .count();
        self.order.truncate(keep);
        let mut ok = true;
        for &i in &set[keep..] {
            if !self.append(q, i) {
                ok = false;
                break;
            }
        }
        if ok {
            return self.solve(c);
        }
        // Singular block: solve densely with a diagonal shift, then keep the
        // factor consistent with that shifted block.
        self.order = set.to_vec();
        let s = solve_subset(q, c, set);
        let p = set.len();
        let mut sub = DMatrix::from_fn(p, p, |a, b| q[(set[a], set[b])]);
        let shift = 1e-12 * sub.diagonal().amax().max(f64::MIN_POSITIVE);
        for a in 0..p {
            sub[(a, a)] += shift;
        }
        if let Some(ch) = sub.cholesky() {
            let lm = ch.l();
            for a in 0..p {
                for b in 0..=a {
                    self.l[a * self.n + b] = lm[(a, b)];
                }
            }
        }
        s.iter().copied().collect()
    }
}

/// Solves `Q_SS s = c_S` by Cholesky, adding a small diagonal shift when `Q_SS`
/// is numerically singular (e.g. an unregularised column outside the data's
/// reach).
pub(crate) fn solve_subset(q: &DMatrix<f64>, c: &DVector<f64>, set: &[usize]) -> DVector<f64> {
    let p = set.len();
    let mut sub = DMatrix::from_fn(p, p, |a, b| q[(set[a], set[b])]);
    let rhs = DVector::from_fn(p, |a, _| c[set[a]]);
    let diag_max = sub.diagonal().amax().max(f64::MIN_POSITIVE);
    let mut shift = 0.0;
    for _ in 0..8 {
        if let Some(ch) = sub.clone().cholesky() {
            return ch.solve(&rhs);
        }
        let next = if shift == 0.0 {
            1e-14 * diag_max
        } else {
            shift * 100.0
        };
        for a in 0..p {
            sub[(a, a)] += next - shift;
        }
        shift = next;
    }
    // Cholesky keeps failing only for non-finite input: fall back to LU.
    sub.lu().solve(&rhs).unwrap_or_else(|| DVector::zeros(p))
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn nnls_normal(q: &DMatrix<f64>, c: &DVector<f64>, warm: &[usize]) -> NnlsSolution {
        nnls_dense(q, c.as_slice(), warm, &NnlsParams::default())
    }

    fn problem(a: &DMatrix<f64>, b: &DVector<f64>) -> (DMatrix<f64>, DVector<f64>) {
        (a.transpose() * a, a.transpose() * b)
    }

    /// KKT conditions of the bound-constrained QP: x >= 0, g = Qx - c >= 0 on the
    /// bound set, g = 0 on the free set.
    fn assert_kkt(q: &DMatrix<f64>, c: &DVector<f64>, x: &[f64]) {
        let xv = DVector::from_column_slice(x);
        let g = q * &xv - c;
        let scale = c.amax().max(1.0);
        for i in 0..x.len() {
            assert!(x[i] >= 0.0);
            assert!(g[i] >= -1e-8 * scale, "dual infeasible at {i}: {}", g[i]);
            assert!(
                (x[i] * g[i]).abs() <= 1e-8 * scale * scale,
                "complementarity at {i}"
            );
        }
    }

    #[test]
    fn two_by_two_with_one_bound_active() {
        // min (x1-1)^2 + (x2+2)^2  ->  x = (1, 0), worked by hand.
        let q = DMatrix::from_row_slice(2, 2, &[2.0, 0.0, 0.0, 2.0]);
        let c = DVector::from_column_slice(&[2.0, -4.0]);
        let s = nnls_normal(&q, &c, &[]);
        assert!((s.x[0] - 1.0).abs() < 1e-14);
        assert_eq!(s.x[1], 0.0);
        assert_eq!(s.passive, vec![0]);
        assert_eq!(s.info.status, SolveStatus::Converged);
    }

    #[test]
    fn lawson_hanson_textbook_style_example() {
        // A = [[1,0],[1,1],[0,1]] (columns), b = (2, 1, -1): unconstrained LS
        // gives x = (2, -1); with x2 >= 0, by hand, x = (1.5, 0).
        let a = DMatrix::from_row_slice(3, 2, &[1.0, 0.0, 1.0, 1.0, 0.0, 1.0]);
        let b = DVector::from_column_slice(&[2.0, 1.0, -1.0]);
        let (q, c) = problem(&a, &b);
        let s = nnls_normal(&q, &c, &[]);
        assert!((s.x[0] - 1.5).abs() < 1e-13, "{:?}", s.x);
        assert_eq!(s.x[1], 0.0);
    }

    #[test]
    fn warm_start_reaches_the_same_solution() {
        let a = DMatrix::from_fn(30, 12, |i, j| {
            (((i * 7919 + j * 104729) % 1009) as f64 / 1009.0) - 0.3
        });
        let b = DVector::from_fn(30, |i, _| ((i as f64) * 0.7).cos());
        let (q, c) = problem(&a, &b);
        let cold = nnls_normal(&q, &c, &[]);
        let warm = nnls_normal(&q, &c, &[0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11]);
        assert_kkt(&q, &c, &cold.x);
        for (u, v) in cold.x.iter().zip(&warm.x) {
            assert!((u - v).abs() < 1e-9);
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        /// NNLS output is non-negative and meets the optimality conditions for
        /// random full-rank problems (Lawson & Hanson 1974, theorem 23.4 KKT).
        #[test]
        fn random_problems_meet_kkt(seed in 0u64..10_000, m in 5usize..40, n in 1usize..15) {
            let mut state = seed.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            let mut next = || {
                state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                ((state >> 11) as f64 / (1u64 << 53) as f64) * 2.0 - 1.0
            };
            let a = DMatrix::from_fn(m, n, |_, _| next());
            let b = DVector::from_fn(m, |_, _| next());
            let (mut q, c) = problem(&a, &b);
            // small ridge keeps rank-deficient draws (m < n) well posed
            for i in 0..n { q[(i, i)] += 1e-6; }
            let s = nnls_normal(&q, &c, &[]);
            prop_assert_eq!(s.info.status, SolveStatus::Converged);
            assert_kkt(&q, &c, &s.x);
        }
    }
}
