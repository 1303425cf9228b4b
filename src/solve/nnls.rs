//! Exact active-set solver for non-negative quadratic programs in normal-equation
//! form:
//!
//! $$ \min_{x \ge 0} \tfrac12 x^\top Q x - c^\top x $$
//!
//! with `Q` symmetric positive (semi)definite. For `Q = A'A + lambda M` and
//! `c = A'b` this is the Tikhonov-regularised non-negative least-squares problem.
//!
//! # Algorithm
//!
//! Lawson and Hanson's active-set NNLS, run on the cross-product matrices as
//! in Bro and de Jong's fast variant. With the gradient `w = c - Qx` and the
//! passive (free) set `P`:
//!
//! 1. pick the bound variable `t` with the largest `w_t > tol + rho_t`; stop
//!    when there is none;
//! 2. solve `Q_PP s = c_P` on `P + {t}`; while some `s_i <= 0`, step back to
//!    `x + alpha (s - x)` with `alpha = min_{s_i <= 0} x_i / (x_i - s_i)`, set
//!    the variable attaining the minimum (the *blocker*) to exactly zero and
//!    free it from `P`, together with any other variable the step left at zero
//!    up to rounding, and solve again (Lawson & Hanson 1974, ch. 23, algorithm
//!    NNLS, steps 5-11).
//!
//! Every returned `x` is non-negative by construction: a variable leaves `P`
//! with the value `0.0` and no clamp is applied.
//!
//! **Tolerances.** `tol_j = abs_tol + rel_tol sqrt(Q_jj) S`, with
//! `S = max_i |c_i| / sqrt(Q_ii)` over the columns with curvature, comes
//! from [`NnlsParams`]. Both `w_j` and `sqrt(Q_jj) S` scale with column `j`,
//! so the test does not change when one column is rescaled: a series
//! resistance beside distribution columns carrying a penalty `lambda` of
//! 1e20 is judged on its own scale, not on the penalty's (common practice
//! in scaled optimality tests, e.g. Nocedal & Wright 2006, section 2.2 on
//! scaling). `rho_t` bounds the rounding error of the computed
//! `w_t = c_t - sum_i Q_ti x_i`, `rho_t = gamma_{p+1} (|c_t| + sqrt(Q_tt)
//! sum_{i in P} sqrt(Q_ii) x_i)` with `gamma_k = k u / (1 - k u)`, `u = 2^-53`
//! and `p = |P|` (the dot-product bound `gamma_{p+1} sum |a_i b_i|`, Higham
//! 2002, section 3.1, with `|Q_ti| <= sqrt(Q_tt Q_ii)` for a semidefinite
//! `Q`); it is far below `tol` unless `x` is large, and keeps rounding noise
//! from being taken for a descent direction even with `tol = 0`.
//!
//! **Warm start.** A passive set `warm` is pruned until its subproblem solution
//! is strictly positive (columns without curvature, or numerically dependent
//! on earlier ones, are dropped first), which gives a feasible point that is
//! optimal on its own passive set, the invariant the main loop needs.
//!
//! **Factorisation.** Each subproblem is solved with a Cholesky factor of
//! `Q_PP` that grows by one row per entering variable. A pivot (the Schur
//! complement `d = Q_tt - q_Pt' Q_PP^{-1} q_Pt` of the entering variable) with
//! `d <= eta Q_tt` is numerically zero, where `eta = 8 gamma_{n+1}`: the
//! computed factor is the exact factor of `Q + dQ` with
//! `|dQ| <= gamma_{n+1} |L| |L'|` (Higham 2002, theorem 10.3), and the diagonal
//! of `|L| |L'|` is that of `Q`, so pivots below a small multiple of
//! `gamma_{n+1} Q_tt` are rounding noise (`eta` is about `1e-13` for `n = 100`).
//!
//! **Zero curvature.** When the entering variable's pivot is numerically zero,
//! the direction `v = (p, 1)` with `p = -Q_PP^{-1} q_Pt` has no curvature, and
//! since `Qv` vanishes on `P` the objective changes along it by
//! `f(x + alpha v) = f(x) - alpha r`, `r = c_t + c_P' p`, whatever the error in
//! `x`. Then:
//! - if `r <= tol` plus its rounding bound (see `Solver::descent_rate`), the
//!   variable is numerically dependent on `P` without descent, as a positive
//!   `w_t` on a dependent column of a least-squares problem always is: it is
//!   rejected, like a column that fails Lawson and Hanson's independence test;
//! - else if some `p_i < 0`, the solver moves along `v` to the first bound
//!   and exchanges that variable for `t` (the zero-curvature step of primal
//!   active-set methods, Nocedal & Wright 2006, chapter 16);
//! - otherwise no bound stops the descent and the subproblem is numerically
//!   singular: the pivot gets the smallest diagonal shift that makes it
//!   acceptable (up to `2 eta Q_tt`), the shift stays on that diagonal entry
//!   for the rest of the solve, and the status becomes
//!   [`SolveStatus::Degenerate`] with the largest shift in [`NnlsInfo::shift`].
//!
//! A variable whose own curvature is zero, `Q_tt <= 0`, with
//! `w_t > tol + rho_t` makes the problem unbounded ([`SolveStatus::Unbounded`]),
//! and so does a negative diagonal entry `Q_tt < -eta max_j Q_jj`.
//!
//! **Anti-cycling.** In exact arithmetic the objective at the start of each
//! outer iteration decreases strictly, so no passive set repeats and the
//! method is finite (the finiteness argument of Lawson & Hanson 1974, ch. 23).
//! Rounding on numerically dependent columns can break this, and these
//! safeguards keep the method finite:
//! - a variable whose entry fails (its subproblem value is not positive, so the
//!   passive set comes back unchanged) or that is rejected as dependent is
//!   barred from selection until the passive set changes, as Lawson and
//!   Hanson's Fortran subroutine NNLS does by setting that dual coefficient
//!   `W(J)` to zero before selecting again; any number of variables can be
//!   barred at once, and each selection counts as an iteration;
//! - the passive sets met at the start of outer iterations are watched for a
//!   repeat (only those reached by a step that did not lower the objective
//!   need recording, since every lap of a cycle has such a step); on the
//!   first repeat the selection switches from the largest gradient to the
//!   smallest eligible index (Bland's rule, R. G. Bland (1977), "New finite
//!   pivoting rules for the simplex method", Math. Oper. Res. 2(2), 103-107),
//!   and a second repeat ends the solve with [`SolveStatus::Degenerate`].
//!
//! # References
//! - C. L. Lawson, R. J. Hanson (1974), *Solving Least Squares Problems*,
//!   Prentice-Hall, chapter 23 (algorithm NNLS).
//! - R. Bro, S. de Jong (1997), "A fast non-negativity-constrained least squares
//!   algorithm", J. Chemometrics 11, 393-401.
//! - R. G. Bland (1977), "New finite pivoting rules for the simplex method",
//!   Math. Oper. Res. 2(2), 103-107.
//! - N. J. Higham (2002), *Accuracy and Stability of Numerical Algorithms*,
//!   2nd ed., SIAM, chapters 3 and 10.
//! - J. Nocedal, S. J. Wright (2006), *Numerical Optimization*, 2nd ed.,
//!   Springer, chapter 16 (active-set methods for quadratic programs).
//! - D. E. Knuth (1998), *The Art of Computer Programming*, vol. 3, 2nd ed.,
//!   Addison-Wesley, section 6.4 (multiplicative hashing).
//! - G. H. Golub, C. F. Van Loan (2013), *Matrix Computations*, 4th ed.,
//!   Johns Hopkins, section 6.5 (updating a Cholesky factor).

use crate::linalg::Matrix;
use nalgebra::{DMatrix, DVector};
use std::collections::HashSet;
use std::hash::{BuildHasherDefault, Hasher};

/// How an iterative solve ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SolveStatus {
    /// Optimality conditions met: every bound variable has
    /// `c_j - (Qx)_j <= tol` up to the rounding bound of that gradient, or
    /// depends numerically on the passive ones without descent, and `x` solves
    /// the subproblem on the passive set without any shift (see the module
    /// documentation).
    Converged,
    /// Iteration limit reached; the result is the last feasible iterate.
    MaxIterations,
    /// `Q` or `c` holds a NaN or an infinity, or one arose during the solve
    /// (overflow); the result is all zeros with an empty passive set.
    NonFinite,
    /// The objective decreases without bound along a feasible direction: a
    /// variable with zero curvature (`Q_jj <= 0` up to rounding) and positive
    /// gradient `c_j - (Qx)_j > tol`, or a negative diagonal entry (`Q` not
    /// semidefinite). The result is the last feasible iterate.
    Unbounded,
    /// The problem is numerically singular: a subproblem needed a diagonal
    /// shift (the largest is in [`NnlsInfo::shift`]; the result is then optimal
    /// for `Q` plus those shifts), or the active set cycled on numerically
    /// dependent columns, or a variable with positive gradient could not enter
    /// (the result is then the last iterate, optimal on its passive set).
    Degenerate,
}

/// Tolerances and limits of [`nnls`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NnlsParams {
    /// Absolute tolerance on the gradient of a bound variable.
    pub abs_tol: f64,
    /// Tolerance relative to `sqrt(Q_jj) max_i |c_i| / sqrt(Q_ii)` for
    /// the gradient of variable `j` (see the module documentation).
    pub rel_tol: f64,
    /// Active-set steps ([`NnlsInfo::iterations`]) before giving up; `None`
    /// means `5 n + 20`.
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
    /// Number of active-set steps: variables selected to enter (including
    /// those rejected as numerically dependent) and steps back that free
    /// variables.
    pub iterations: usize,
    /// How the solve ended.
    pub status: SolveStatus,
    /// Largest violation of the Kuhn-Tucker conditions of the problem
    /// (Lawson & Hanson 1974, ch. 23) at the returned point, with `g = Qx - c`:
    /// `max_j` of `max(0, -x_j)`, of `max(0, -g_j)` for bound variables (dual
    /// infeasibility) and of `|g_j|` for passive variables. Absolute, in the
    /// units of `c`; computed once at the end from the unshifted `Q`.
    /// Infinite for [`SolveStatus::NonFinite`].
    pub kkt_residual: f64,
    /// Largest diagonal shift applied to a singular subproblem, in the units
    /// of `Q` (0 when none, then the status is not `Degenerate` on its account).
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
/// variable satisfies `c_j - (Qx)_j <= tol` (plus the rounding bound of that
/// component), with `tol_j = abs_tol + rel_tol sqrt(Q_jj) max_i |c_i| /
/// sqrt(Q_ii)`. See
/// the module documentation for the pivot threshold, the handling of singular
/// subproblems and the anti-cycling rules, and [`SolveStatus`] for what each
/// outcome returns.
///
/// # Panics
/// When `q` is not square with one row per entry of `c`.
pub fn nnls(q: &Matrix, c: &[f64], warm: &[usize], params: &NnlsParams) -> NnlsSolution {
    assert!(
        q.nrows() == c.len() && q.ncols() == c.len(),
        "nnls needs a {0} x {0} matrix for {0} gradient entries, got {1} x {2}",
        c.len(),
        q.nrows(),
        q.ncols()
    );
    nnls_dense(q.dense(), c, warm, params)
}

/// [`nnls`] on the inner matrix type.
pub(crate) fn nnls_dense(
    q: &DMatrix<f64>,
    c: &[f64],
    warm: &[usize],
    params: &NnlsParams,
) -> NnlsSolution {
    let n = c.len();
    debug_assert_eq!(q.nrows(), n);
    debug_assert_eq!(q.ncols(), n);
    let piv = pivot_rel(n);
    let mut solver = Solver {
        q,
        c: DVector::from_column_slice(c),
        n,
        abs_tol: params.abs_tol,
        rel_scale: 0.0,
        curv_tol: 0.0,
        sqrt_diag: Vec::new(),
        max_iter: params.max_iter.unwrap_or(5 * n + 20),
        x: vec![0.0; n],
        passive: vec![false; n],
        chol: IncrementalCholesky::new(n, piv),
        iterations: 0,
    };
    if !all_finite(c) || !all_finite(q.as_slice()) {
        return solver.finish(SolveStatus::NonFinite);
    }
    let diag_max = q.diagonal().iter().fold(0.0_f64, |m, &v| m.max(v));
    solver.curv_tol = piv * diag_max;
    solver.sqrt_diag = q.diagonal().iter().map(|&v| v.max(0.0).sqrt()).collect();
    // S = max_i |c_i| / sqrt(Q_ii) over the columns with curvature.
    let s = (0..n)
        .filter(|&i| q[(i, i)] > 0.0)
        .map(|i| solver.c[i].abs() / solver.sqrt_diag[i])
        .fold(0.0_f64, f64::max);
    solver.rel_scale = params.rel_tol * s;
    if q.diagonal().iter().any(|&v| v < -solver.curv_tol) {
        // Negative curvature along a coordinate: f(alpha e_j) -> -inf.
        return solver.finish(SolveStatus::Unbounded);
    }
    let status = solver.run(warm);
    solver.finish(status)
}

/// True when no entry is a NaN or an infinity, i.e. has all exponent bits
/// set (IEEE 754-2008, section 3.4): adding `2^52` to the masked exponent
/// carries into the sign bit exactly then. Integer operations over the whole
/// slice, without an early exit, let the compiler vectorise the test, which
/// reads all of `Q` once per solve.
fn all_finite(v: &[f64]) -> bool {
    const EXPONENT: u64 = 0x7ff0_0000_0000_0000;
    const CARRY: u64 = 1 << 52;
    let flags = v
        .iter()
        .fold(0u64, |acc, x| acc | ((x.to_bits() & EXPONENT) + CARRY));
    flags >> 63 == 0
}

/// Safety factor on the rounding bound of a Cholesky pivot, see [`pivot_rel`].
const PIVOT_SAFETY: f64 = 8.0;

/// Relative pivot threshold `eta = 8 gamma_{n+1}` for an `n`-variable problem,
/// with `gamma_k = k u / (1 - k u)` and `u = 2^-53` (Higham 2002, lemma 3.1 and
/// theorem 10.3; see the module documentation). About `1e-13` for `n = 100`.
fn pivot_rel(n: usize) -> f64 {
    let ku = (n + 1) as f64 * (f64::EPSILON / 2.0);
    PIVOT_SAFETY * ku / (1.0 - ku)
}

/// Multiple of the unit roundoff below which a step leaves a variable at
/// zero: `x + alpha (s - x)` is computed with an error of at most about
/// `3 u (2 |x| + |s|)` (Higham 2002, section 3.1), so a result below
/// `8 u (|x| + |s|)` (with `8 u = 4 f64::EPSILON`) cannot be told from zero.
const STEP_ROUNDING: f64 = 4.0 * f64::EPSILON;

struct Solver<'a> {
    q: &'a DMatrix<f64>,
    c: DVector<f64>,
    n: usize,
    /// Absolute gradient tolerance.
    abs_tol: f64,
    /// `rel_tol S`: the relative tolerance of variable `j` is this times
    /// `sqrt(Q_jj)`.
    rel_scale: f64,
    /// Curvature `Q_jj` at or below which a column counts as zero.
    curv_tol: f64,
    /// `sqrt(Q_jj)`, for the rounding bound of the gradient.
    sqrt_diag: Vec<f64>,
    max_iter: usize,
    x: Vec<f64>,
    passive: Vec<bool>,
    chol: IncrementalCholesky,
    iterations: usize,
}

/// Why a bound variable is barred from selection (until the passive set
/// changes).
#[derive(Clone, Copy, PartialEq, Eq)]
enum Bar {
    Free,
    /// Its entry failed: the subproblem sent it straight back to zero.
    Failed,
    /// It depends numerically on the passive variables and offers no
    /// verifiable descent.
    Dependent,
}

/// How the insertion of one variable ended.
enum Entry {
    /// The passive set changed; the inner loop ran to a positive solution.
    Changed,
    /// The entering variable left at once and nothing else moved.
    Failed,
    /// The entering variable depends numerically on the passive ones and
    /// offers no descent; nothing moved.
    Dependent,
    /// The iteration limit was hit inside the inner loop.
    Cut,
}

impl Solver<'_> {
    /// Gradient tolerance of variable `j`: `abs_tol + rel_tol S sqrt(Q_jj)`.
    fn tol(&self, j: usize) -> f64 {
        self.abs_tol + self.rel_scale * self.sqrt_diag[j]
    }

    fn column(&self, j: usize) -> &[f64] {
        &self.q.as_slice()[j * self.n..(j + 1) * self.n]
    }

    /// Bit set of the passive variables, the key of the cycle detector.
    fn key(&self) -> Vec<u64> {
        let mut k = vec![0u64; self.n.div_ceil(64)];
        for &i in self.chol.order() {
            k[i / 64] |= 1 << (i % 64);
        }
        k
    }

    /// `f = 1/2 x'Qx - c'x = -c_P' x_P / 2` at a subproblem minimiser.
    fn objective(&self) -> f64 {
        -0.5 * self
            .chol
            .order()
            .iter()
            .map(|&i| self.c[i] * self.x[i])
            .sum::<f64>()
    }

    /// `w = c - Qx`, from the passive columns only (x is zero elsewhere).
    /// Returns `(gamma_{p+1}, sum_{i in P} sqrt(Q_ii) x_i)`, the two factors of
    /// the rounding bound of [`Self::noise`].
    fn gradient(&self, w: &mut [f64]) -> (f64, f64) {
        w.copy_from_slice(self.c.as_slice());
        let mut sigma = 0.0;
        for &i in self.chol.order() {
            let xi = self.x[i];
            sigma += self.sqrt_diag[i] * xi;
            for (wj, qj) in w.iter_mut().zip(self.column(i)) {
                *wj -= xi * qj;
            }
        }
        let ku = (self.chol.order().len() + 1) as f64 * (f64::EPSILON / 2.0);
        (ku / (1.0 - ku), sigma)
    }

    /// Bound `rho_j` on the rounding error of the computed
    /// `w_j = c_j - sum_i Q_ji x_i`: `gamma_{p+1} (|c_j| + sum_i |Q_ji| x_i)`
    /// (Higham 2002, section 3.1), with `|Q_ji| <= sqrt(Q_jj Q_ii)` for a
    /// semidefinite `Q`.
    fn noise(&self, j: usize, (gamma, sigma): (f64, f64)) -> f64 {
        gamma * (self.c[j].abs() + self.sqrt_diag[j] * sigma)
    }

    /// Prunes the warm set until its subproblem solution is strictly positive.
    fn warm_start(&mut self, warm: &[usize]) -> Result<(), SolveStatus> {
        for &i in warm {
            if i < self.n {
                self.passive[i] = true;
            }
        }
        loop {
            // A column without curvature cannot be passive (see `run`).
            let set: Vec<usize> = (0..self.n)
                .filter(|&i| self.passive[i] && self.q[(i, i)] > self.curv_tol)
                .collect();
            self.passive.fill(false);
            for &i in &set {
                self.passive[i] = true;
            }
            for i in self.chol.refactor_dropping(self.q, &set) {
                self.passive[i] = false;
            }
            if self.chol.order().is_empty() {
                return Ok(());
            }
            let s = self.chol.solve(&self.c);
            if s.iter().any(|v| !v.is_finite()) {
                return Err(SolveStatus::NonFinite);
            }
            if s.iter().all(|&v| v > 0.0) {
                for (k, &i) in self.chol.order().iter().enumerate() {
                    self.x[i] = s[k];
                }
                return Ok(());
            }
            for (k, &i) in self.chol.order().iter().enumerate() {
                if s[k] <= 0.0 {
                    self.passive[i] = false;
                }
            }
            self.iterations += 1;
        }
    }

    fn run(&mut self, warm: &[usize]) -> SolveStatus {
        if let Err(status) = self.warm_start(warm) {
            return status;
        }
        let n = self.n;
        let mut w = vec![0.0; n];
        // Variables barred from selection until the passive set changes.
        let mut barred = vec![Bar::Free; n];
        let mut guard = CycleGuard::default();
        guard.visit(self.objective(), || self.key());
        let mut shift_seen = 0.0;
        let mut degenerate = false;
        loop {
            let bound = self.gradient(&mut w);
            let mut best: Option<(usize, f64)> = None;
            let mut stuck = false;
            for j in 0..n {
                if self.passive[j] {
                    continue;
                }
                let wj = w[j];
                // `wj <= tol` first: most bound variables have w_j < 0.
                let tol = self.tol(j);
                if wj <= tol || wj <= tol + self.noise(j, bound) {
                    continue;
                }
                if !wj.is_finite() {
                    return SolveStatus::NonFinite;
                }
                // No curvature at all: a descent along e_j never ends. A
                // small positive Q_jj is judged by the pivot test instead,
                // relative to Q_jj itself, so that a column beside heavily
                // penalised ones is not taken for a zero column.
                if self.q[(j, j)] <= 0.0 {
                    return SolveStatus::Unbounded;
                }
                match barred[j] {
                    Bar::Failed => stuck = true,
                    Bar::Dependent => {}
                    // Bland's rule: the smallest eligible index.
                    Bar::Free if guard.bland => best = best.or(Some((j, wj))),
                    Bar::Free => {
                        if best.is_none_or(|(_, b)| wj > b) {
                            best = Some((j, wj));
                        }
                    }
                }
            }
            let Some((t, _)) = best else {
                degenerate |= stuck;
                break;
            };
            if self.iterations >= self.max_iter {
                return SolveStatus::MaxIterations;
            }
            self.iterations += 1;
            match self.enter(t) {
                Err(status) => return status,
                Ok(Entry::Cut) => return SolveStatus::MaxIterations,
                Ok(Entry::Failed) => barred[t] = Bar::Failed,
                Ok(Entry::Dependent) => barred[t] = Bar::Dependent,
                Ok(Entry::Changed) => {
                    barred.fill(Bar::Free);
                    if self.chol.max_shift > shift_seen {
                        // A new shift changes the problem: start a new history.
                        shift_seen = self.chol.max_shift;
                        guard = CycleGuard::default();
                        guard.visit(self.objective(), || self.key());
                    } else if guard.visit(self.objective(), || self.key()) == Cycle::Stall {
                        degenerate = true;
                        break;
                    }
                }
            }
        }
        if degenerate || self.chol.max_shift > 0.0 {
            SolveStatus::Degenerate
        } else {
            SolveStatus::Converged
        }
    }

    /// Rate `c_t + c_P' p` at which the objective falls along the
    /// zero-curvature direction `(p, 1)` of a dependent variable `t`, and a
    /// bound on its rounding error: `gamma_{p+1} (|c_t| + sum_k |p_k c_k|)` for
    /// the sum (Higham 2002, section 3.1) plus the effect of the backward
    /// error `dQ` of the solve that gave `p` (`|dQ| <= gamma_{3p+1} |L||L'|`,
    /// ibid. theorem 10.4), which moves the rate by `x_P' dQ p`, at most
    /// `gamma_{3p+1} (sum_i sqrt(Q_ii) x_i) (sum_k sqrt(Q_kk) |p_k|)` because
    /// `(|L||L'|)_ik <= sqrt(Q_ii Q_kk)`.
    fn descent_rate(&self, t: usize, order: &[usize], p: &[f64]) -> (f64, f64) {
        let mut rate = self.c[t];
        let mut size = self.c[t].abs();
        let mut sigma = 0.0;
        let mut pi = 0.0;
        for (k, &i) in order.iter().enumerate() {
            rate += p[k] * self.c[i];
            size += (p[k] * self.c[i]).abs();
            sigma += self.sqrt_diag[i] * self.x[i];
            pi += self.sqrt_diag[i] * p[k].abs();
        }
        let gamma = |k: usize| {
            let ku = k as f64 * (f64::EPSILON / 2.0);
            ku / (1.0 - ku)
        };
        let p = order.len();
        (rate, gamma(p + 1) * size + gamma(3 * p + 1) * sigma * pi)
    }

    /// Brings `t` (with gradient `w_t > tol`) into the passive set and runs
    /// the inner loop until the subproblem solution is positive.
    fn enter(&mut self, t: usize) -> Result<Entry, SolveStatus> {
        let mut removed_other = false;
        let d2 = self.chol.trial(self.q, t);
        let thr = self.chol.threshold(self.q, t);
        let mut s = if d2 > thr {
            self.chol.commit(t, d2);
            self.passive[t] = true;
            self.chol.solve(&self.c)
        } else {
            // Zero curvature along p = (-Q_PP^{-1} q_Pt, 1), on which the
            // objective falls at the rate -g'v = c_t + c_P' p (Qv vanishes on
            // P and x lives on P), independent of the error in x.
            let p = self.chol.null_direction();
            if p.iter().any(|v| !v.is_finite()) {
                return Err(SolveStatus::NonFinite);
            }
            let order = self.chol.order().to_vec();
            let (rate, noise) = self.descent_rate(t, &order, &p);
            if rate <= self.tol(t) + noise {
                // Numerically dependent column without verifiable descent: the
                // positive w_t is rounding in x, and t must not enter.
                return Ok(Entry::Dependent);
            }
            let mut blocker: Option<(f64, usize)> = None;
            for (k, &i) in order.iter().enumerate() {
                if p[k] < 0.0 {
                    let a = self.x[i] / -p[k];
                    if blocker.is_none_or(|(b, _)| a < b) {
                        blocker = Some((a, i));
                    }
                }
            }
            // Beyond alpha = rate / thr the neglected curvature (at most thr)
            // could undo the linear decrease: treat that as unblocked.
            match blocker.filter(|&(a, _)| a <= rate / thr) {
                Some((alpha, b)) => {
                    for (k, &i) in order.iter().enumerate() {
                        let xo = self.x[i];
                        let step = alpha * p[k];
                        let xn = xo + step;
                        if i == b || xn <= 0.0 || (p[k] < 0.0 && xn <= STEP_ROUNDING * (xo - step))
                        {
                            self.x[i] = 0.0;
                            self.passive[i] = false;
                            removed_other = true;
                        } else {
                            self.x[i] = xn;
                        }
                    }
                    self.x[t] = alpha;
                    self.passive[t] = true;
                    self.iterations += 1; // the blocker out
                    let mut set: Vec<usize> =
                        order.into_iter().filter(|&i| self.passive[i]).collect();
                    set.push(t);
                    self.chol.refactor_and_solve(self.q, &self.c, &set)
                }
                None => {
                    self.chol.commit_shifted(self.q, t, d2);
                    self.passive[t] = true;
                    self.chol.solve(&self.c)
                }
            }
        };
        // Inner loop: step back towards feasibility until the subproblem
        // solution is positive on the passive set.
        loop {
            if s.iter().any(|v| !v.is_finite()) {
                return Err(SolveStatus::NonFinite);
            }
            if s.iter().all(|&v| v > 0.0) {
                for (k, &i) in self.chol.order().iter().enumerate() {
                    self.x[i] = s[k];
                }
                return Ok(if removed_other || self.passive[t] {
                    Entry::Changed
                } else {
                    Entry::Failed
                });
            }
            if self.iterations >= self.max_iter {
                // Return the feasible iterate; the entering variable may still
                // sit at zero, so the passive set is what is positive.
                for i in 0..self.n {
                    if self.passive[i] && self.x[i] <= 0.0 {
                        self.passive[i] = false;
                        self.x[i] = 0.0;
                    }
                }
                return Ok(Entry::Cut);
            }
            let order = self.chol.order().to_vec();
            step_to_bound(&mut self.x, &mut self.passive, &order, &s);
            removed_other |= order.iter().any(|&i| i != t && !self.passive[i]);
            self.iterations += 1;
            let keep: Vec<usize> = order.into_iter().filter(|&i| self.passive[i]).collect();
            s = self.chol.refactor_and_solve(self.q, &self.c, &keep);
        }
    }

    /// Packs the result; computes the KKT residual from scratch.
    fn finish(&self, status: SolveStatus) -> NnlsSolution {
        let n = self.n;
        let non_finite = |iterations| NnlsSolution {
            x: vec![0.0; n],
            passive: Vec::new(),
            info: NnlsInfo {
                iterations,
                status: SolveStatus::NonFinite,
                kkt_residual: f64::INFINITY,
                shift: self.chol.max_shift,
            },
        };
        if status == SolveStatus::NonFinite {
            return non_finite(self.iterations);
        }
        let passive: Vec<usize> = (0..n).filter(|&i| self.passive[i]).collect();
        let mut g: Vec<f64> = self.c.iter().map(|v| -v).collect();
        for &i in &passive {
            let xi = self.x[i];
            for (gj, qj) in g.iter_mut().zip(self.column(i)) {
                *gj += xi * qj;
            }
        }
        let mut kkt = 0.0_f64;
        for ((&gj, &free), &xj) in g.iter().zip(&self.passive).zip(&self.x) {
            let v = if free { gj.abs() } else { (-gj).max(0.0) };
            kkt = kkt.max(v).max(-xj);
        }
        if !kkt.is_finite() || g.iter().any(|v| !v.is_finite()) {
            return non_finite(self.iterations);
        }
        NnlsSolution {
            x: self.x.clone(),
            passive,
            info: NnlsInfo {
                iterations: self.iterations,
                status,
                kkt_residual: kkt,
                shift: self.chol.max_shift,
            },
        }
    }
}

/// Outcome of [`CycleGuard::visit`].
#[derive(Debug, PartialEq, Eq)]
enum Cycle {
    /// A passive set not met before.
    New,
    /// The first repeat: selection switches to Bland's rule.
    Bland,
    /// A repeat under Bland's rule: stop.
    Stall,
}

/// Watches the passive sets met at the start of outer iterations, where the
/// iterate is the subproblem minimiser of its set and the objective is
/// `f = -c_P' x_P / 2`; in exact arithmetic `f` falls strictly, so no set
/// repeats. A cycle returns to its first set and value, so in every lap some
/// step fails to lower the computed `f`, and the set it reaches is the same
/// in every lap: recording only the sets reached by such steps finds any
/// cycle on its second lap at the cost of one dot product per step. On the
/// first repeat the selection switches to the smallest eligible index (Bland
/// 1977) and the record restarts; a repeat under Bland's rule means rounding
/// defeats the method, and the solve stops.
#[derive(Default)]
struct CycleGuard {
    seen: HashSet<Vec<u64>, BuildHasherDefault<SetHasher>>,
    bland: bool,
    /// Objective at the previous visit.
    last: Option<f64>,
}

/// Multiplicative hash of the bit-set words of a passive set (Fibonacci
/// hashing with the 64-bit golden-ratio constant, D. E. Knuth, *The Art of
/// Computer Programming* vol. 3, section 6.4): a few instructions per word
/// instead of the default keyed hash, which the cycle guard does not need.
#[derive(Default)]
struct SetHasher(u64);

impl Hasher for SetHasher {
    fn write(&mut self, bytes: &[u8]) {
        for chunk in bytes.chunks(8) {
            let mut word = [0u8; 8];
            word[..chunk.len()].copy_from_slice(chunk);
            self.write_u64(u64::from_le_bytes(word));
        }
    }

    fn write_u64(&mut self, v: u64) {
        self.0 = (self.0.rotate_left(5) ^ v).wrapping_mul(0x9e37_79b9_7f4a_7c15);
    }

    fn write_usize(&mut self, v: usize) {
        self.write_u64(v as u64);
    }

    fn finish(&self) -> u64 {
        self.0
    }
}

impl CycleGuard {
    /// Visits a passive set with objective `f`; `key` gives its bit set.
    fn visit(&mut self, f: f64, key: impl FnOnce() -> Vec<u64>) -> Cycle {
        let descent = self.last.is_some_and(|last| f < last);
        self.last = Some(f);
        if descent {
            return Cycle::New;
        }
        let key = key();
        if !self.seen.contains(&key) {
            self.seen.insert(key);
            Cycle::New
        } else if self.bland {
            Cycle::Stall
        } else {
            self.bland = true;
            self.seen.clear();
            self.seen.insert(key);
            Cycle::Bland
        }
    }
}

/// One step of Lawson and Hanson's inner loop (1974, ch. 23, steps 8-11):
/// `x <- x + alpha (s - x)` over the passive variables `order` (`s` in the
/// same order), with `alpha = min_{s_i <= 0} x_i / (x_i - s_i)`. The variable
/// attaining the minimum (the blocker) is set to exactly zero and freed from
/// the passive set, and so is any other variable the step leaves at or below
/// zero up to rounding ([`STEP_ROUNDING`]). Returns the blocker, `None` when
/// `s > 0` (no step).
fn step_to_bound(x: &mut [f64], passive: &mut [bool], order: &[usize], s: &[f64]) -> Option<usize> {
    let mut best: Option<(f64, usize)> = None;
    for (k, &i) in order.iter().enumerate() {
        if s[k] <= 0.0 {
            // x_i > 0 on the passive set except for an entering variable at 0.
            let a = if x[i] > 0.0 {
                x[i] / (x[i] - s[k])
            } else {
                0.0
            };
            if best.is_none_or(|(b, _)| a < b) {
                best = Some((a, i));
            }
        }
    }
    let (alpha, blocker) = best?;
    for (k, &i) in order.iter().enumerate() {
        let xo = x[i];
        let xn = xo + alpha * (s[k] - xo);
        if i == blocker || xn <= 0.0 || (s[k] <= 0.0 && xn <= STEP_ROUNDING * (xo + s[k].abs())) {
            x[i] = 0.0;
            passive[i] = false;
        } else {
            x[i] = xn;
        }
    }
    Some(blocker)
}

/// Cholesky factor `L L' = Q_SS + diag(shift_S)` of the passive block, in the
/// order variables entered, so that a new variable costs one forward
/// substitution (O(p^2)) instead of a new factorisation (O(p^3)). Removals
/// keep the rows of the unchanged prefix and rebuild the rest.
///
/// Source: the row-append update of a Cholesky factor, e.g. G. H. Golub,
/// C. F. Van Loan, *Matrix Computations*, 4th ed. (2013), section 6.5.
struct IncrementalCholesky {
    /// Packed row-major lower triangle: row `a` holds `L[a, 0..=a]` from
    /// offset `a (a + 1) / 2` ([`packed`]). It grows as variables enter, so
    /// a solve never clears more than the rows it uses.
    l: Vec<f64>,
    order: Vec<usize>,
    /// Relative pivot threshold, [`pivot_rel`].
    piv: f64,
    /// Diagonal shift kept on each variable (0 for almost all).
    shift: Vec<f64>,
    /// Largest entry of `shift`.
    max_shift: f64,
}

use crate::linalg::dot;

/// Offset of row `a` in a packed lower triangle.
fn packed(a: usize) -> usize {
    a * (a + 1) / 2
}

impl IncrementalCholesky {
    fn new(n: usize, piv: f64) -> Self {
        Self {
            l: Vec::with_capacity(packed(n.min(64))),
            order: Vec::with_capacity(n),
            piv,
            shift: vec![0.0; n],
            max_shift: 0.0,
        }
    }

    fn order(&self) -> &[usize] {
        &self.order
    }

    /// Pivot threshold `eta (Q_tt + shift_t)` of variable `t`.
    fn threshold(&self, q: &DMatrix<f64>, t: usize) -> f64 {
        self.piv * (q[(t, t)] + self.shift[t]).abs().max(f64::MIN_POSITIVE)
    }

    /// Computes row `p` of the factor for variable `t` (forward substitution
    /// `L r = Q[order, t]`, written into row `p`) and returns the squared
    /// pivot `Q_tt + shift_t - r'r`, without committing `t`.
    fn trial(&mut self, q: &DMatrix<f64>, t: usize) -> f64 {
        let p = self.order.len();
        let col = q.column(t);
        let (rp, end) = (packed(p), packed(p + 1));
        if self.l.len() < end {
            self.l.resize(end, 0.0);
        }
        for a in 0..p {
            let ra = packed(a);
            let v = col[self.order[a]] - dot(&self.l[ra..ra + a], &self.l[rp..rp + a]);
            self.l[rp + a] = v / self.l[ra + a];
        }
        let row = &self.l[rp..rp + p];
        q[(t, t)] + self.shift[t] - dot(row, row)
    }

    /// Commits the row left by [`Self::trial`] with squared pivot `d2 > 0`.
    fn commit(&mut self, t: usize, d2: f64) {
        let p = self.order.len();
        self.l[packed(p) + p] = d2.sqrt();
        self.order.push(t);
    }

    /// Commits `t` after [`Self::trial`] returned a numerically zero pivot
    /// `d2`, adding to `Q_tt` the smallest shift that brings the pivot to
    /// twice the threshold.
    fn commit_shifted(&mut self, q: &DMatrix<f64>, t: usize, d2: f64) {
        let target = 2.0 * self.threshold(q, t);
        let delta = target - d2;
        self.shift[t] += delta;
        self.max_shift = self.max_shift.max(self.shift[t]);
        self.commit(t, target);
    }

    /// `p = -L'^{-1} r` for the row `r` left by [`Self::trial`]: the passive
    /// part of the direction `(-Q_PP^{-1} q_Pt, 1)`, in factor order.
    fn null_direction(&self) -> Vec<f64> {
        let p = self.order.len();
        let rp = packed(p);
        let mut y: Vec<f64> = self.l[rp..rp + p].iter().map(|v| -v).collect();
        self.back_substitute(&mut y);
        y
    }

    /// Solves `L' y_new = y` in place.
    fn back_substitute(&self, y: &mut [f64]) {
        for a in (0..y.len()).rev() {
            let ra = packed(a);
            y[a] /= self.l[ra + a];
            let ya = y[a];
            let row = &self.l[ra..ra + a];
            for (yb, lb) in y[..a].iter_mut().zip(row) {
                *yb -= lb * ya;
            }
        }
    }

    /// Solves `(Q_SS + diag(shift_S)) s = c_S` with the current factor; `s` is
    /// in factor order.
    fn solve(&self, c: &DVector<f64>) -> Vec<f64> {
        let p = self.order.len();
        let mut y = vec![0.0; p];
        for a in 0..p {
            let ra = packed(a);
            let v = c[self.order[a]] - dot(&self.l[ra..ra + a], &y[..a]);
            y[a] = v / self.l[ra + a];
        }
        self.back_substitute(&mut y);
        y
    }

    /// Length of the prefix of `set` that matches the current order; those
    /// rows of the factor stay valid.
    fn common_prefix(&self, set: &[usize]) -> usize {
        self.order
            .iter()
            .zip(set)
            .take_while(|(a, b)| a == b)
            .count()
    }

    /// Rebuilds the factor for `set` (kept in the given order) and solves; a
    /// numerically zero pivot gets the minimal shift of
    /// [`Self::commit_shifted`].
    fn refactor_and_solve(
        &mut self,
        q: &DMatrix<f64>,
        c: &DVector<f64>,
        set: &[usize],
    ) -> Vec<f64> {
        let keep = self.common_prefix(set);
        self.order.truncate(keep);
        for &i in &set[keep..] {
            let d2 = self.trial(q, i);
            if d2 > self.threshold(q, i) {
                self.commit(i, d2);
            } else {
                self.commit_shifted(q, i, d2);
            }
        }
        self.solve(c)
    }

    /// Rebuilds the factor for `set`, leaving out each variable whose pivot is
    /// numerically zero (it depends on the ones before it); returns those.
    fn refactor_dropping(&mut self, q: &DMatrix<f64>, set: &[usize]) -> Vec<usize> {
        let keep = self.common_prefix(set);
        self.order.truncate(keep);
        let mut dropped = Vec::new();
        for &i in &set[keep..] {
            let d2 = self.trial(q, i);
            if d2 > self.threshold(q, i) {
                self.commit(i, d2);
            } else {
                dropped.push(i);
            }
        }
        dropped
    }
}

/// Solves `Q_SS s = c_S` by Cholesky, adding a small diagonal shift when `Q_SS`
/// is numerically singular (e.g. an unregularised column outside the data's
/// reach): the shift starts at `1e-14 max_i Q_ii` and grows a hundredfold per
/// failed attempt, up to eight attempts, after which the block is solved by
/// LU. On a singular block the result is accurate in the range of `Q_SS` and
/// arbitrary along its null space. A block or right-hand side holding a NaN
/// or an infinity, or a block that LU cannot solve either, gives all NaN, so
/// that the failure cannot pass for a number. [`nnls`] does not use this
/// function; it handles singular blocks itself and reports them.
pub(crate) fn solve_subset(q: &DMatrix<f64>, c: &DVector<f64>, set: &[usize]) -> DVector<f64> {
    let p = set.len();
    let mut sub = DMatrix::from_fn(p, p, |a, b| q[(set[a], set[b])]);
    let rhs = DVector::from_fn(p, |a, _| c[set[a]]);
    if sub.iter().chain(rhs.iter()).any(|v| !v.is_finite()) {
        return DVector::from_element(p, f64::NAN);
    }
    let diag_max = sub.diagonal().amax().max(f64::MIN_POSITIVE);
    let mut shift = 0.0;
    for _ in 0..8 {
        if let Some(ch) = sub.clone().cholesky() {
            return ch.solve(&rhs);
        }
        let next = if shift > 0.0 {
            shift * 100.0
        } else {
            1e-14 * diag_max
        };
        for a in 0..p {
            sub[(a, a)] += next - shift;
        }
        shift = next;
    }
    sub.lu()
        .solve(&rhs)
        .unwrap_or_else(|| DVector::from_element(p, f64::NAN))
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

    /// Uniform numbers in [-1, 1) from a 64-bit linear congruential generator
    /// (Knuth's MMIX constants), so that every test problem is reproducible.
    fn lcg(seed: u64) -> impl FnMut() -> f64 {
        let mut state = seed
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        move || {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((state >> 11) as f64 / (1u64 << 53) as f64) * 2.0 - 1.0
        }
    }

    fn objective(q: &DMatrix<f64>, c: &DVector<f64>, x: &[f64]) -> f64 {
        let xv = DVector::from_column_slice(x);
        0.5 * xv.dot(&(q * &xv)) - c.dot(&xv)
    }

    /// Exact optimum by enumeration: the minimiser of a convex QP over x >= 0
    /// is the subproblem solution `Q_PP^{-1} c_P` of its support P, which is
    /// feasible, and every feasible subproblem solution is a feasible point,
    /// so the optimum is the least objective over the feasible ones (Lawson &
    /// Hanson 1974, ch. 23). Subsets whose block has a squared Cholesky pivot
    /// at or below `min_pivot` times its diagonal entry are skipped (use 0 for
    /// a definite `Q`, 1e-10 for a singular one): for `Q = A'A` some optimal
    /// support has linearly independent columns (ibid., lemma on the NNLS
    /// solution), so nothing is lost on rank-deficient problems, and the
    /// meaningless solutions of singular blocks cannot pass for a minimum.
    fn brute_force(q: &DMatrix<f64>, c: &DVector<f64>, min_pivot: f64) -> (f64, Vec<f64>) {
        let n = c.len();
        let mut best = (0.0, vec![0.0; n]);
        for mask in 1u32..(1 << n) {
            let set: Vec<usize> = (0..n).filter(|&i| mask & (1 << i) != 0).collect();
            let p = set.len();
            let sub = DMatrix::from_fn(p, p, |a, b| q[(set[a], set[b])]);
            let Some(ch) = sub.clone().cholesky() else {
                continue;
            };
            let l = ch.l();
            if (0..p).any(|a| l[(a, a)] * l[(a, a)] <= min_pivot * sub[(a, a)]) {
                continue;
            }
            let z = ch.solve(&DVector::from_fn(p, |a, _| c[set[a]]));
            if z.iter().any(|&v| v < 0.0) {
                continue;
            }
            let mut x = vec![0.0; n];
            for (a, &i) in set.iter().enumerate() {
                x[i] = z[a];
            }
            let f = objective(q, c, &x);
            if f < best.0 {
                best = (f, x);
            }
        }
        best
    }

    /// Rounding scale of an objective evaluation at `x`:
    /// `|x|'|Q||x| + |c|'|x|` (Higham 2002, section 3.1).
    fn objective_scale(q: &DMatrix<f64>, c: &DVector<f64>, x: &[f64]) -> f64 {
        let xv = DVector::from_column_slice(x).abs();
        xv.dot(&(q.abs() * &xv)) + c.abs().dot(&xv)
    }

    /// The objective at `x` matches the brute-force optimum to `rel_tol =
    /// 1e-9`, with `abs_tol = 1e-13` times the rounding scale of either
    /// evaluation (large when an optimal support is ill-conditioned).
    fn objective_matches(
        q: &DMatrix<f64>,
        c: &DVector<f64>,
        x: &[f64],
        min_pivot: f64,
    ) -> Result<(), String> {
        let (fb, xb) = brute_force(q, c, min_pivot);
        let f = objective(q, c, x);
        let abs_tol = 1e-13 * objective_scale(q, c, x).max(objective_scale(q, c, &xb));
        let rel_tol = 1e-9;
        if (f - fb).abs() <= abs_tol + rel_tol * fb.abs() {
            Ok(())
        } else {
            Err(format!(
                "objective {f} vs brute force {fb} (abs_tol {abs_tol})"
            ))
        }
    }

    /// Checks what every solve must deliver whatever its status: `x >= 0`
    /// exactly (no clamp in the solver), `x_j = 0.0` exactly off the passive
    /// set, `x_j > 0` on it, and `info.kkt_residual` equal to an independent
    /// evaluation of its definition.
    fn assert_consistent(q: &DMatrix<f64>, c: &DVector<f64>, s: &NnlsSolution) {
        let n = c.len();
        let g = q * DVector::from_column_slice(&s.x) - c;
        let mut kkt = 0.0_f64;
        for j in 0..n {
            let free = s.passive.contains(&j);
            assert!(s.x[j] >= 0.0, "x[{j}] = {} < 0", s.x[j]);
            if free {
                assert!(s.x[j] > 0.0, "passive x[{j}] = {}", s.x[j]);
                kkt = kkt.max(g[j].abs());
            } else {
                assert_eq!(s.x[j], 0.0, "bound x[{j}] not exactly zero");
                kkt = kkt.max(-g[j]);
            }
        }
        // Two evaluations of a rounding-level residual differ by the rounding
        // of the terms of Qx - c.
        let terms = q.abs() * DVector::from_column_slice(&s.x);
        let abs_tol = 1e-13 * (c.amax() + terms.amax());
        let rel_tol = 1e-6;
        assert!(
            (s.info.kkt_residual - kkt).abs() <= abs_tol + rel_tol * kkt,
            "kkt_residual {} vs {}",
            s.info.kkt_residual,
            kkt
        );
        assert!(s.passive.windows(2).all(|w| w[0] < w[1]));
    }

    /// Kuhn-Tucker conditions (Lawson & Hanson 1974, ch. 23) within a tolerance
    /// relative to the size of the terms that make up the gradient,
    /// `scale = |c|_inf + max_j sum_i |Q_ji| x_i`: `g = Qx - c >= -tol` on the
    /// bound set and `|g| <= tol` on the passive set, `tol = 1e-9 scale`.
    fn assert_kkt_scaled(q: &DMatrix<f64>, c: &DVector<f64>, s: &NnlsSolution) {
        let xv = DVector::from_column_slice(&s.x);
        let g = q * &xv - c;
        let terms = q.abs() * &xv;
        let tol = 1e-9 * (c.amax() + terms.amax());
        for j in 0..c.len() {
            if s.passive.contains(&j) {
                assert!(g[j].abs() <= tol, "passive gradient {j}: {} > {tol}", g[j]);
            } else {
                assert!(g[j] >= -tol, "dual infeasible at {j}: {} < -{tol}", g[j]);
            }
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
        assert_eq!(s.info.shift, 0.0);
        // g = (0, 4): the only KKT term is |g_0| = 0 on the free variable.
        assert!(s.info.kkt_residual <= 1e-14);
    }

    /// A series resistance beside two distribution columns that carry a
    /// penalty of 1e20: the penalised columns stay at zero and the
    /// resistance takes the mean of the data, `x_0 = c_0 / Q_00`, however
    /// large the penalty (by hand: with x_1 = x_2 = 0 the problem in x_0
    /// alone is min (x_0 - mean b)^2 m / 2). A tolerance scaled by the
    /// largest diagonal of Q left x_0 at zero with a gradient of 84.
    #[test]
    fn unpenalised_column_is_judged_on_its_own_scale() {
        let b = [12.0, 11.0, 10.5, 10.2, 10.0, 10.0];
        let m = b.len();
        let a = DMatrix::from_fn(m, 3, |i, j| match j {
            0 => 1.0,
            1 => 1.0 / (1.0 + i as f64),
            _ => (i as f64 / 5.0).powi(2),
        });
        let b = DVector::from_column_slice(&b);
        let (mut q, c) = problem(&a, &b);
        for j in 1..3 {
            q[(j, j)] += 1e20;
        }
        let s = nnls_normal(&q, &c, &[]);
        let mean = b.sum() / m as f64;
        assert!((s.x[0] - mean).abs() <= 1e-12 * mean, "{:?}", s.x);
        assert!(s.x[1] < 1e-15 && s.x[2] < 1e-15, "{:?}", s.x);
        assert_eq!(s.info.status, SolveStatus::Converged);
        assert!(s.info.kkt_residual <= 1e-9, "{}", s.info.kkt_residual);
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

    /// Lawson & Hanson's step 8-11 with a step length whose rounding leaves
    /// the blocker at 1.1e-16 instead of 0 (x = 0.9428571428571428,
    /// s = -0.6111111111111112 gives alpha = x/(x - s) and
    /// x + alpha (s - x) = 1.1e-16 in IEEE double arithmetic). The blocker must
    /// be the variable set to zero, not the one with the most negative `s`.
    #[test]
    fn step_zeroes_the_blocker_not_the_most_negative_s() {
        let (x0, s0) = (0.9428571428571428, -0.6111111111111112);
        let alpha = x0 / (x0 - s0);
        assert!(x0 + alpha * (s0 - x0) > 0.0, "the rounding this test needs");
        // Variable 1 is the blocker (alpha = 0.607); variable 2 has the most
        // negative s but a longer step to its bound (10/15 = 0.667); variable 0
        // stays positive.
        let order = [0, 1, 2];
        let mut x = vec![1.0, x0, 10.0];
        let mut passive = vec![true; 3];
        let s = [2.0, s0, -5.0];
        let blocker = step_to_bound(&mut x, &mut passive, &order, &s);
        assert_eq!(blocker, Some(1));
        assert_eq!(x[1], 0.0);
        assert_eq!(passive, vec![true, false, true]);
        let x2 = 10.0 + alpha * (-15.0);
        assert!((x[2] - x2).abs() <= 1e-15 * x2, "{} vs {x2}", x[2]);
        let x0_new = 1.0 + alpha * 1.0;
        assert!((x[0] - x0_new).abs() <= 1e-15 * x0_new);
    }

    /// A second variable tied with the blocker (same x and s) is left at the
    /// same rounding residue and must leave the passive set with it.
    #[test]
    fn step_frees_ties_of_the_blocker() {
        let (x0, s0) = (0.9428571428571428, -0.6111111111111112);
        let order = [3, 1];
        let mut x = vec![0.0, x0, 0.0, x0];
        let mut passive = vec![false, true, false, true];
        let blocker = step_to_bound(&mut x, &mut passive, &order, &[s0, s0]);
        assert_eq!(blocker, Some(3));
        assert_eq!(x, vec![0.0; 4]);
        assert_eq!(passive, vec![false; 4]);
    }

    /// `Q = A'A + ridge max_j (A'A)_jj I`, `c = A'b`, with `A` (`m x n`) and
    /// `b` drawn from [`lcg`]; the products are summed in index order, so
    /// that every bit of `Q` and `c` is reproducible.
    fn ridge_problem(seed: u64, m: usize, n: usize, ridge: f64) -> (DMatrix<f64>, DVector<f64>) {
        let mut next = lcg(seed);
        let a = DMatrix::from_fn(m, n, |_, _| next());
        let b = DVector::from_fn(m, |_, _| next());
        let dot = |u: &dyn Fn(usize) -> f64, v: &dyn Fn(usize) -> f64| {
            (0..m).fold(0.0, |acc, k| acc + u(k) * v(k))
        };
        let mut q = DMatrix::from_fn(n, n, |i, j| dot(&|k| a[(k, i)], &|k| a[(k, j)]));
        let c = DVector::from_fn(n, |i, _| dot(&|k| a[(k, i)], &|k| b[k]));
        let shift = ridge * q.diagonal().amax();
        for i in 0..n {
            q[(i, i)] += shift;
        }
        (q, c)
    }

    /// Random ill-conditioned problems, ridge `1e-13` relative and `A` of
    /// `m <= n` rows (condition numbers up to 1e13), where steps back to
    /// feasibility leave rounding residues on the blockers: the objective
    /// must match the brute-force optimum to 1e-9 relative. (`c` stays in the
    /// range of `A'`: with `c` outside it, `x` grows like `1/ridge` and no
    /// method can reach 1e-9 on the objective.)
    #[test]
    fn ill_conditioned_problems_match_brute_force() {
        for seed in 0..400u64 {
            let n = 2 + (seed % 7) as usize;
            let m = 1 + (seed as usize / 7) % n;
            let (q, c) = ridge_problem(seed, m, n, 1e-13);
            let s = nnls_normal(&q, &c, &[]);
            assert_eq!(s.info.status, SolveStatus::Converged, "seed {seed}");
            assert_eq!(s.info.shift, 0.0);
            assert_consistent(&q, &c, &s);
            if let Err(e) = objective_matches(&q, &c, &s.x, 0.0) {
                panic!("seed {seed}: {e}");
            }
        }
    }

    /// Problems found by a random search in which a step back leaves its
    /// blocker at a rounding residue instead of zero. Freeing the blocker
    /// keeps Lawson and Hanson's path; the former fallback, which freed the
    /// variable with the most negative `s` instead (a variable still inside
    /// the feasible region), broke the monotone descent and took 10, 9 and
    /// 14 steps instead of 6, 5 and 10 (seen by restoring it). Each must
    /// reach the brute-force optimum in the step count of the exact path.
    #[test]
    fn blocker_left_at_a_rounding_residue_costs_no_extra_step() {
        let cases = [
            (18806, 5, 6, 1e-13, 6),
            (101051, 4, 8, 1e-10, 5),
            (64189, 7, 8, 1e-13, 10),
        ];
        for (seed, m, n, ridge, steps) in cases {
            let (q, c) = ridge_problem(seed, m, n, ridge);
            let s = nnls_normal(&q, &c, &[]);
            assert_eq!(s.info.status, SolveStatus::Converged, "seed {seed}");
            assert_eq!(s.info.iterations, steps, "seed {seed}");
            assert_consistent(&q, &c, &s);
            objective_matches(&q, &c, &s.x, 0.0).unwrap();
        }
    }

    #[test]
    fn nan_in_q_is_non_finite() {
        let mut q = DMatrix::<f64>::identity(3, 3);
        q[(2, 1)] = f64::NAN;
        let c = DVector::from_column_slice(&[1.0, 1.0, 1.0]);
        let s = nnls_normal(&q, &c, &[0, 1]);
        assert_eq!(s.info.status, SolveStatus::NonFinite);
        assert_eq!(s.x, vec![0.0; 3]);
        assert!(s.passive.is_empty());
        // Also where the iteration never reads it: variables 1 and 2 stay at
        // zero (c < 0), so only the input check can see this NaN.
        let c = DVector::from_column_slice(&[1.0, -1.0, -1.0]);
        let s = nnls_normal(&q, &c, &[]);
        assert_eq!(s.info.status, SolveStatus::NonFinite);
        assert_eq!(s.x, vec![0.0; 3]);
        assert!(s.passive.is_empty());
        assert_eq!(s.info.kkt_residual, f64::INFINITY);
    }

    #[test]
    fn infinity_in_c_is_non_finite() {
        let q = DMatrix::<f64>::identity(3, 3);
        let c = DVector::from_column_slice(&[1.0, f64::INFINITY, -1.0]);
        let s = nnls_normal(&q, &c, &[]);
        assert_eq!(s.info.status, SolveStatus::NonFinite);
        assert_eq!(s.x, vec![0.0; 3]);
        assert!(s.passive.is_empty());
    }

    /// Finite data whose solution overflows: x = 1e200 / 1e-200 = inf.
    #[test]
    fn overflow_during_the_solve_is_non_finite() {
        let q = DMatrix::from_row_slice(2, 2, &[1e-200, 0.0, 0.0, 1e-200]);
        let c = DVector::from_column_slice(&[1e200, 1e100]);
        let s = nnls_normal(&q, &c, &[]);
        assert_eq!(s.info.status, SolveStatus::NonFinite);
        assert_eq!(s.x, vec![0.0; 2]);
        assert!(s.passive.is_empty());
    }

    /// Variable 1 has a zero row and column and c_1 = 1 > 0: the objective is
    /// -x_1 + (terms without x_1), unbounded below as x_1 grows.
    #[test]
    fn zero_column_with_positive_gradient_is_unbounded() {
        let q = DMatrix::from_row_slice(3, 3, &[2.0, 0.0, 0.5, 0.0, 0.0, 0.0, 0.5, 0.0, 1.0]);
        let c = DVector::from_column_slice(&[1.0, 1.0, -1.0]);
        let s = nnls_normal(&q, &c, &[]);
        assert_eq!(s.info.status, SolveStatus::Unbounded);
        assert_consistent(&q, &c, &s);
        assert!(s.info.kkt_residual >= 1.0 - 1e-12);
        // The same column with c_1 = -1: bounded, x_1 = 0, x = (0.5, 0, 0).
        let c = DVector::from_column_slice(&[1.0, -1.0, -1.0]);
        let s = nnls_normal(&q, &c, &[]);
        assert_eq!(s.info.status, SolveStatus::Converged);
        assert_eq!(s.passive, vec![0]);
        assert!((s.x[0] - 0.5).abs() <= 1e-15);
    }

    /// `Q_11 = 1e-20` next to `Q_00 = 1`, with `c_1 = 1`: small curvature
    /// is still curvature, judged relative to the column itself (a column
    /// beside penalised ones has a diagonal far below theirs), so the
    /// minimiser `x = (1, 1e20)` (by hand: `x_j = c_j / Q_jj`) is found,
    /// cold or warm started. With `Q_11 = 0` exactly the problem is
    /// unbounded, and a warm set holding that column must not smuggle it in
    /// as passive.
    #[test]
    fn small_curvature_is_curvature_and_zero_curvature_is_unbounded() {
        let q = DMatrix::from_row_slice(2, 2, &[1.0, 0.0, 0.0, 1e-20]);
        let c = DVector::from_column_slice(&[1.0, 1.0]);
        for warm in [&[][..], &[1][..], &[0, 1][..]] {
            let s = nnls_normal(&q, &c, warm);
            assert_eq!(s.info.status, SolveStatus::Converged, "warm {warm:?}");
            assert!((s.x[0] - 1.0).abs() <= 1e-15, "{:?}", s.x);
            assert!((s.x[1] - 1e20).abs() <= 1e5, "{:?}", s.x);
        }
        let q = DMatrix::from_row_slice(2, 2, &[1.0, 0.0, 0.0, 0.0]);
        for warm in [&[][..], &[1][..], &[0, 1][..]] {
            let s = nnls_normal(&q, &c, warm);
            assert_eq!(s.info.status, SolveStatus::Unbounded, "warm {warm:?}");
            assert_consistent(&q, &c, &s);
            assert!(s.passive.iter().all(|&i| i == 0));
        }
    }

    /// A negative diagonal entry: f(a e_1) = -a^2/2 -> -inf for any gradient.
    #[test]
    fn negative_curvature_is_unbounded() {
        let q = DMatrix::from_row_slice(2, 2, &[1.0, 0.0, 0.0, -1.0]);
        let c = DVector::from_column_slice(&[1.0, -1.0]);
        let s = nnls_normal(&q, &c, &[]);
        assert_eq!(s.info.status, SolveStatus::Unbounded);
        assert_consistent(&q, &c, &s);
    }

    /// `A = [[1, -1], [0, e]]`, `b = (1, 1)`, `e = 1e-8`: the least-squares
    /// problem has the exact non-negative solution `x = (1 + 1/e, 1/e)`, but
    /// `1 + e^2` rounds to 1, so the computed `Q = A'A` is singular while the
    /// gradient `c_1 - Q_10 x_0 = e` stays far above the tolerance, and the
    /// zero-curvature direction `(1, 1)` has no blocking bound. The solve needs
    /// a shift: it must say so, with a shift at rounding level, and `x` must
    /// be optimal for the shifted matrix.
    #[test]
    fn singular_subproblem_needs_a_shift_and_reports_it() {
        let e = 1e-8;
        let a = DMatrix::from_row_slice(2, 2, &[1.0, -1.0, 0.0, e]);
        let b = DVector::from_column_slice(&[1.0, 1.0]);
        let (q, c) = problem(&a, &b);
        assert_eq!(q[(1, 1)], 1.0, "the rounding this test needs");
        let s = nnls_normal(&q, &c, &[]);
        assert_eq!(s.info.status, SolveStatus::Degenerate);
        assert!(s.info.shift > 0.0);
        assert!(s.info.shift <= 4.0 * pivot_rel(2), "shift {}", s.info.shift);
        assert_consistent(&q, &c, &s);
        assert_eq!(s.passive, vec![0, 1]);
        // Stationary for Q + diag(0, shift): x_1 = e / shift, x_0 = 1 + x_1.
        let x1 = e / s.info.shift;
        assert!((s.x[1] - x1).abs() <= 1e-6 * x1, "{} vs {x1}", s.x[1]);
        assert!((s.x[0] - (1.0 + x1)).abs() <= 1e-6 * x1);
    }

    /// `Q = [[1, 0.5], [0.5, 0.25]]` (column 1 is half column 0), `c = (1,
    /// 0.8)`: variable 0 enters first (`w = c`), giving `x = (1, 0)`; then
    /// `w_1 = 0.3 > 0` but the pivot of column 1 is exactly zero. Along the
    /// zero-curvature direction `(-0.5, 1)` the objective falls at rate 0.3
    /// until `x_0` reaches zero at step 2; the exchange and the solve on
    /// `{1}` give the optimum `x = (0, 3.2)` (objective -1.28 against -0.5 at
    /// `(1, 0)`, by hand), with no shift.
    #[test]
    fn zero_curvature_step_exchanges_dependent_columns() {
        let q = DMatrix::from_row_slice(2, 2, &[1.0, 0.5, 0.5, 0.25]);
        let c = DVector::from_column_slice(&[1.0, 0.8]);
        let s = nnls_normal(&q, &c, &[]);
        assert_eq!(s.info.status, SolveStatus::Converged);
        assert_eq!(s.info.shift, 0.0);
        assert_eq!(s.passive, vec![1]);
        assert_eq!(s.x[0], 0.0);
        assert!((s.x[1] - 3.2).abs() <= 1e-15 * 3.2, "{:?}", s.x);
        assert!((objective(&q, &c, &s.x) + 1.28).abs() <= 1e-14);
        assert_consistent(&q, &c, &s);
    }

    /// A warm set holding two copies of one column is singular; the copy is
    /// dropped (no shift needed) and the result is the cold one.
    #[test]
    fn singular_warm_set_is_pruned_without_shift() {
        let a = DMatrix::from_row_slice(3, 3, &[1.0, 1.0, 0.0, 2.0, 2.0, 1.0, 0.0, 0.0, 1.0]);
        let b = DVector::from_column_slice(&[1.0, 2.0, 0.5]);
        let (q, c) = problem(&a, &b);
        let cold = nnls_normal(&q, &c, &[]);
        let warm = nnls_normal(&q, &c, &[0, 1, 2]);
        for s in [&cold, &warm] {
            assert_eq!(s.info.status, SolveStatus::Converged);
            assert_eq!(s.info.shift, 0.0);
            assert_consistent(&q, &c, s);
        }
        for s in [&cold, &warm] {
            objective_matches(&q, &c, &s.x, 1e-10).unwrap();
        }
    }

    /// The iteration cap returns the last feasible iterate, flagged.
    #[test]
    fn iteration_cap_returns_a_feasible_iterate() {
        let mut next = lcg(7);
        let a = DMatrix::from_fn(20, 10, |_, _| next());
        let b = DVector::from_fn(20, |_, _| next());
        let (q, c) = problem(&a, &b);
        let full = nnls_normal(&q, &c, &[]);
        assert!(full.info.iterations > 3, "{}", full.info.iterations);
        for cap in 0..3 {
            let params = NnlsParams {
                max_iter: Some(cap),
                ..NnlsParams::default()
            };
            let s = nnls_dense(&q, c.as_slice(), &[], &params);
            assert_eq!(s.info.status, SolveStatus::MaxIterations);
            assert!(s.info.iterations <= cap);
            assert_consistent(&q, &c, &s);
            // Each iterate descends from x = 0, where the objective is 0, and
            // is short of the optimum, which the KKT residual shows.
            assert!(objective(&q, &c, &s.x) <= 0.0);
            assert!(s.info.kkt_residual > 1e-6, "{}", s.info.kkt_residual);
        }
    }

    /// A negative tolerance makes the solver select bound variables whose
    /// gradient is negative, so that their entry fails at once (the subproblem
    /// gives `s_t = w_t / d < 0`), the situation rounding creates on
    /// dependent columns, here on demand. With `Q = I` and `c = (1, -0.5,
    /// -0.25)`, variables 1 and 2 fail in turn; each must stay excluded until
    /// the passive set changes, or the two alternate up to the iteration cap.
    /// Steps: select 0; select 1, free it; select 2, free it.
    #[test]
    fn failed_entries_are_excluded_not_cycled() {
        let q = DMatrix::<f64>::identity(3, 3);
        let c = DVector::from_column_slice(&[1.0, -0.5, -0.25]);
        let params = NnlsParams {
            abs_tol: -1.0,
            ..NnlsParams::default()
        };
        let s = nnls_dense(&q, c.as_slice(), &[], &params);
        assert_eq!(s.info.status, SolveStatus::Degenerate);
        assert_eq!(s.info.iterations, 5);
        assert_eq!(s.x, vec![1.0, 0.0, 0.0]);
        assert_eq!(s.passive, vec![0]);
        assert_consistent(&q, &c, &s);
    }

    /// The cycle guard: sets reached with a falling objective are not
    /// recorded; among the others the first repeat switches to Bland's rule
    /// and restarts the record, a repeat after that stalls.
    #[test]
    fn cycle_guard_switches_to_bland_then_stalls() {
        let (a, b, d) = (vec![0b011u64], vec![0b101u64], vec![0b110u64]);
        let mut g = CycleGuard::default();
        assert_eq!(g.visit(-1.0, || a.clone()), Cycle::New);
        // Falling objective: repeats are not even looked at.
        assert_eq!(g.visit(-2.0, || a.clone()), Cycle::New);
        assert_eq!(g.visit(-3.0, || b.clone()), Cycle::New);
        // A lap of a cycle: -3 -> -2 -> -3 visits b again without descent.
        assert_eq!(g.visit(-2.0, || d.clone()), Cycle::New);
        assert_eq!(g.visit(-3.0, || b.clone()), Cycle::New);
        assert_eq!(g.visit(-2.0, || d.clone()), Cycle::Bland);
        assert!(g.bland);
        assert_eq!(g.visit(-3.0, || b.clone()), Cycle::New);
        assert_eq!(g.visit(-2.0, || a.clone()), Cycle::New);
        assert_eq!(g.visit(-2.0, || d.clone()), Cycle::Stall);
    }

    /// `Q = [[1, 1], [1, 1]]` is singular; the shifted solve must be right in
    /// the range of `Q` (`s_0 + s_1 = 1` for `c = (1, 1)`) and finite.
    #[test]
    fn solve_subset_shifts_a_singular_block() {
        let q = DMatrix::from_row_slice(3, 3, &[1.0, 1.0, 0.0, 1.0, 1.0, 0.0, 0.0, 0.0, 2.0]);
        let c = DVector::from_column_slice(&[1.0, 1.0, 4.0]);
        let s = solve_subset(&q, &c, &[0, 1]);
        assert_eq!(s.len(), 2);
        assert!(s.iter().all(|v| v.is_finite()));
        assert!((s[0] + s[1] - 1.0).abs() <= 1e-9, "{s}");
        let s = solve_subset(&q, &c, &[2]);
        assert!((s[0] - 2.0).abs() <= 1e-15);
    }

    /// Non-finite input must not come back as a clean-looking zero vector.
    #[test]
    fn solve_subset_on_non_finite_input_is_not_finite() {
        let mut q = DMatrix::<f64>::identity(2, 2);
        q[(0, 0)] = f64::INFINITY;
        let c = DVector::from_column_slice(&[1.0, 1.0]);
        let s = solve_subset(&q, &c, &[0, 1]);
        assert!(s.iter().all(|v| v.is_nan()), "{s}");
        // A non-finite entry outside the block does not matter.
        let s = solve_subset(&q, &c, &[1]);
        assert!((s[0] - 1.0).abs() <= 1e-15);
    }

    /// Problem found by a random search (`degenerate_problem(337213, 0, 3,
    /// 12)`: rank 3, 12 columns): a column that depends on the passive ones
    /// shows a gradient far above the tolerance, caused by the error of `x`
    /// (about 200), while the descent rate along its zero-curvature
    /// direction is within its rounding bound. Taken for descent, it starts a
    /// chain of shifts that ends in overflow; it must be rejected instead.
    #[test]
    fn dependent_column_with_gradient_noise_is_rejected() {
        let (q, c) = degenerate_problem(337213, 0, 3, 12);
        let s = nnls_normal(&q, &c, &[]);
        assert_eq!(s.info.status, SolveStatus::Converged);
        assert_eq!(s.info.shift, 0.0);
        assert_consistent(&q, &c, &s);
        assert_kkt_scaled(&q, &c, &s);
        assert!(s.x.iter().all(|&v| v < 1e3), "{:?}", s.x);
    }

    /// Columns `1..=k` are multiples of column 0 plus noise of size `eps`.
    fn near_dependent_problem(
        seed: u64,
        m: usize,
        n: usize,
        eps: f64,
        k: usize,
    ) -> (DMatrix<f64>, DVector<f64>) {
        let mut next = lcg(seed);
        let mut a = DMatrix::from_fn(m, n, |_, _| next());
        for j in 1..=k {
            let noise = DVector::from_fn(m, |_, _| eps * next());
            let col = a.column(0) * (1.0 + j as f64 * 0.1) + noise;
            a.set_column(j, &col);
        }
        let b = DVector::from_fn(m, |_, _| next());
        problem(&a, &b)
    }

    /// Problems found by a random search over near-dependent columns with a
    /// zero tolerance: without the rounding bound `rho_j` on the gradient,
    /// noise selects a variable whose entry fails, and the solve ends
    /// `Degenerate` with the KKT conditions violated by that noise.
    #[test]
    fn gradient_noise_is_not_selected_at_zero_tolerance() {
        let params = NnlsParams {
            abs_tol: 0.0,
            rel_tol: 0.0,
            max_iter: None,
        };
        for (seed, m, n, eps, k) in [(101190, 3, 10, 1e-4, 2), (253662, 5, 9, 1e-7, 1)] {
            let (q, c) = near_dependent_problem(seed, m, n, eps, k);
            let s = nnls_dense(&q, c.as_slice(), &[], &params);
            assert_eq!(s.info.status, SolveStatus::Converged, "seed {seed}");
            assert_eq!(s.info.shift, 0.0);
            assert_consistent(&q, &c, &s);
            assert_kkt_scaled(&q, &c, &s);
        }
    }

    /// Builds a rank-deficient or degenerate `Q = A'A`, `c = A'b` without any
    /// ridge: `kind` 0 has fewer rows than columns, 1 duplicated columns,
    /// 2 zero columns, 3 scaled copies (by -1 and 2.5 among others), 4 all of
    /// these at once.
    fn degenerate_problem(seed: u64, kind: u8, m: usize, n: usize) -> (DMatrix<f64>, DVector<f64>) {
        let mut next = lcg(seed);
        let rows = if kind == 0 { m.min(n - 1).max(1) } else { m };
        let mut a = DMatrix::from_fn(rows, n, |_, _| next());
        for j in 1..n {
            let pick = ((next() + 1.0) * 0.5 * j as f64) as usize % j;
            let u = next();
            let dup = matches!(kind, 1 | 4) && u < -0.3;
            let zero = matches!(kind, 2 | 4) && u > 0.5;
            let scaled = matches!(kind, 3 | 4) && (-0.3..0.1).contains(&u);
            if dup || scaled {
                let f = if dup {
                    1.0
                } else {
                    [2.5, -1.0, 0.5, 3.0][j % 4]
                };
                let col = a.column(pick) * f;
                a.set_column(j, &col);
            } else if zero {
                a.column_mut(j).fill(0.0);
            }
        }
        let b = DVector::from_fn(rows, |_, _| next());
        problem(&a, &b)
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        /// NNLS output is non-negative and meets the optimality conditions for
        /// random full-rank problems (Lawson & Hanson 1974, theorem 23.4 KKT).
        #[test]
        fn random_problems_meet_kkt(seed in 0u64..10_000, m in 5usize..40, n in 1usize..15) {
            let mut next = lcg(seed);
            let a = DMatrix::from_fn(m, n, |_, _| next());
            let b = DVector::from_fn(m, |_, _| next());
            let (mut q, c) = problem(&a, &b);
            // small ridge keeps rank-deficient draws (m < n) well posed
            for i in 0..n { q[(i, i)] += 1e-6; }
            let s = nnls_normal(&q, &c, &[]);
            prop_assert_eq!(s.info.status, SolveStatus::Converged);
            prop_assert_eq!(s.info.shift, 0.0);
            assert_kkt(&q, &c, &s.x);
            assert_consistent(&q, &c, &s);
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(512))]
        /// Rank-deficient and degenerate problems without a ridge, cold and
        /// warm started: never the iteration cap, `x >= 0` exactly, KKT within
        /// `1e-9` of the gradient's scale and, for `n <= 8`, the brute-force
        /// optimum to `1e-9` relative.
        #[test]
        fn degenerate_problems_converge_to_the_optimum(
            seed in 0u64..1_000_000,
            kind in 0u8..5,
            m in 2usize..14,
            n in 2usize..13,
            warm_mask in any::<u16>(),
        ) {
            let (q, c) = degenerate_problem(seed, kind, m, n);
            let warm: Vec<usize> = (0..n).filter(|&i| warm_mask & (1 << i) != 0).collect();
            let s = nnls_dense(&q, c.as_slice(), &warm, &NnlsParams::default());
            prop_assert!(
                matches!(s.info.status, SolveStatus::Converged | SolveStatus::Degenerate),
                "status {:?}", s.info.status
            );
            assert_consistent(&q, &c, &s);
            assert_kkt_scaled(&q, &c, &s);
            if n <= 8 {
                let matches = objective_matches(&q, &c, &s.x, 1e-10);
                prop_assert!(matches.is_ok(), "{:?}", matches);
            }
        }

        /// The same problems with a zero tolerance, so that rounding noise in
        /// the gradient of dependent columns is taken for descent: only the
        /// anti-cycling rules and the dependency test stop the solve. It must
        /// still end (never the iteration cap) with a finite `x >= 0`, and a
        /// `Converged` answer must be the optimum.
        #[test]
        fn zero_tolerance_still_terminates(
            seed in 0u64..1_000_000,
            kind in 0u8..5,
            m in 2usize..14,
            n in 2usize..13,
        ) {
            let (q, c) = degenerate_problem(seed, kind, m, n);
            let params = NnlsParams { abs_tol: 0.0, rel_tol: 0.0, max_iter: None };
            let s = nnls_dense(&q, c.as_slice(), &[], &params);
            prop_assert!(
                matches!(s.info.status, SolveStatus::Converged | SolveStatus::Degenerate),
                "status {:?}", s.info.status
            );
            assert_consistent(&q, &c, &s);
            prop_assert!(s.x.iter().all(|v| v.is_finite()));
            if s.info.status == SolveStatus::Converged {
                assert_kkt_scaled(&q, &c, &s);
            }
        }
    }
}
