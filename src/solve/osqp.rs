//! Independent quadratic-programming backend built on OSQP.
//!
//! The native solver finds the non-negative least-squares solution with an
//! active-set method. This module solves the same problem written as a convex
//! quadratic program with a completely different algorithm, the operator
//! splitting (ADMM) method of OSQP, so that the two results can be compared:
//!
//! $$ \min_{x} \tfrac12 x^\top P x + q^\top x \quad \text{subject to} \quad x \ge 0 $$
//!
//! A regularised non-negative least-squares problem
//! `min ‖A x − b‖² + λ²‖L x‖²` maps onto it with `P = AᵀA + λ² LᵀL` and
//! `q = −Aᵀb`. The module works on plain dense matrices and knows nothing about
//! impedance.
//!
//! It is compiled only with the `osqp` cargo feature, because OSQP is C code
//! built with CMake.
//!
//! # References
//!
//! - B. Stellato, G. Banjac, P. Goulart, A. Bemporad, S. Boyd (2020), "OSQP: an
//!   operator splitting solver for quadratic programs", Mathematical
//!   Programming Computation 12, 637–672, doi:10.1007/s12532-020-00179-2.

use std::borrow::Cow;
use std::panic::{AssertUnwindSafe, catch_unwind};

use osqp::{CscMatrix, Problem, Settings, Status};

use crate::{Error, Result};

/// OSQP's value for an infinite bound (`OSQP_INFTY` in the C header
/// `osqp_api_constants.h`).
///
/// OSQP treats any bound at or beyond `OSQP_INFTY · OSQP_MIN_SCALING`
/// (1e30 · 1e-4) as absent, even after its internal row scaling, which is why
/// this value rather than `f64::INFINITY` is passed as the upper bound.
const OSQP_INFTY: f64 = 1e30;

/// Largest asymmetry `|P_ij − P_ji|` accepted, relative to the largest
/// `|P_ij|`. OSQP reads only the upper triangle, so an asymmetric `P` would
/// otherwise be solved silently as a different matrix.
const SYMMETRY_REL_TOL: f64 = 1e-10;

/// Settings for [`solve_nonneg_qp`].
///
/// The defaults aim at a reference solution rather than speed: tight
/// tolerances, solution polishing and a large iteration budget.
#[derive(Debug, Clone, PartialEq)]
pub struct OsqpOptions {
    /// Absolute tolerance of OSQP's primal and dual residuals (dimensionless:
    /// the cost is rescaled to unit size first, see [`solve_nonneg_qp`]).
    /// Default `1e-10`.
    pub eps_abs: f64,
    /// Relative tolerance of OSQP's primal and dual residuals. Default `1e-10`.
    pub eps_rel: f64,
    /// Maximum number of ADMM iterations. Default `200_000`.
    pub max_iter: u32,
    /// Refine the ADMM solution by solving the KKT system of the detected
    /// active set ("solution polishing" in Stellato et al. 2020). OSQP keeps
    /// the polished point only when it has smaller residuals. Default `true`.
    pub polish: bool,
}

impl Default for OsqpOptions {
    fn default() -> Self {
        Self {
            eps_abs: 1e-10,
            eps_rel: 1e-10,
            max_iter: 200_000,
            polish: true,
        }
    }
}

impl OsqpOptions {
    /// Checks that OSQP will accept these settings.
    ///
    /// Returns [`Error::Param`] for a negative or non-finite tolerance, a zero
    /// `max_iter` or one above `i32::MAX`, and [`Error::Config`] when both
    /// tolerances are zero.
    pub fn validate(&self) -> Result<()> {
        for (name, value) in [("eps_abs", self.eps_abs), ("eps_rel", self.eps_rel)] {
            if !(value.is_finite() && value >= 0.0) {
                return Err(Error::Param {
                    name,
                    expected: "a finite number >= 0",
                    value,
                });
            }
        }
        if self.eps_abs <= 0.0 && self.eps_rel <= 0.0 {
            return Err(Error::Config(
                "osqp: `eps_abs` and `eps_rel` cannot both be 0 (make at least one positive)"
                    .to_owned(),
            ));
        }
        // OSQP stores the limit in a C integer, which is 32 bits wide on
        // 32-bit targets.
        if self.max_iter == 0 || self.max_iter > i32::MAX as u32 {
            return Err(Error::Param {
                name: "max_iter",
                expected: "between 1 and 2147483647",
                value: f64::from(self.max_iter),
            });
        }
        Ok(())
    }
}

/// Result of [`solve_nonneg_qp`].
#[derive(Debug, Clone, PartialEq)]
pub struct OsqpSolution {
    /// The minimiser as OSQP returned it, in the caller's units. It is not
    /// clipped, so entries on an active bound may be negative by about the
    /// tolerance.
    pub x: Vec<f64>,
    /// `½ xᵀ P x + qᵀ x` evaluated at `x` with the caller's `P` and `q`.
    pub objective: f64,
    /// Number of ADMM iterations OSQP took.
    pub iterations: u32,
    /// OSQP's status: `"solved"`, `"solved inaccurate"` (residuals within
    /// ten times the tolerances), `"maximum iterations reached"` or
    /// `"time limit reached"`. Only `"solved"` meets the requested tolerances.
    pub status: String,
}

/// Solves a convex quadratic program over the non-negative orthant with OSQP.
///
/// $$ \min_{x \in \mathbb{R}^n} \tfrac12 x^\top P x + q^\top x
///    \quad \text{subject to} \quad x \ge 0 $$
///
/// `p_row_major` holds the dense, symmetric positive semidefinite `n × n`
/// matrix `P` row by row, with `n = q.len()`.
///
/// The bound is written in OSQP's form `l ≤ A x ≤ u` with `A = I`, `l = 0`
/// and `u = +∞` (OSQP's `OSQP_INFTY`), plus one empty row `0 ≤ 0 ≤ 0` that
/// changes nothing but keeps OSQP's polishing step from printing, and `P` is
/// passed as its upper triangle in compressed sparse column form, with exact
/// zeros left out.
///
/// Scaling: `P` and `q` are divided by
/// `c = max(max_ij |P_ij|, max_i |q_i|)` before the solve. This leaves the
/// minimiser unchanged but makes OSQP's absolute tolerance `eps_abs` a
/// tolerance relative to the size of the data instead of one in the caller's
/// (squared) units; OSQP then applies its own Ruiz equilibration on top. `x`
/// needs no unscaling, and the returned objective is computed with the
/// original `P` and `q`.
///
/// A result that stops at the iteration limit is still returned, with its
/// status; check [`OsqpSolution::status`] before relying on it.
///
/// # Errors
///
/// [`Error::Config`] when `P` does not have `n²` entries, is not symmetric,
/// contains a non-finite value, when `q` is empty or has a non-finite value,
/// when OSQP finds `P` not positive semidefinite or the objective unbounded
/// below on `x ≥ 0`, or when OSQP fails; [`Error::Param`] or
/// [`Error::Config`] for unusable `opts` (see [`OsqpOptions::validate`]).
/// On some of these paths (a `P` that is not positive semidefinite, an
/// internal failure) OSQP's C code also writes a diagnostic to standard
/// output, which this module cannot suppress; a successful solve prints
/// nothing.
///
/// Source: B. Stellato, G. Banjac, P. Goulart, A. Bemporad, S. Boyd (2020),
/// "OSQP: an operator splitting solver for quadratic programs", Mathematical
/// Programming Computation 12, 637–672, doi:10.1007/s12532-020-00179-2
/// (the QP form `l ≤ A x ≤ u` is their eq. (2); polishing is the paper's
/// "solution polishing" step).
pub fn solve_nonneg_qp(p_row_major: &[f64], q: &[f64], opts: &OsqpOptions) -> Result<OsqpSolution> {
    opts.validate()?;
    let n = q.len();
    check_data(p_row_major, q)?;

    let scale = cost_scale(p_row_major, q);
    let p_upper = upper_triangle_csc(p_row_major, n, 1.0 / scale);
    let q_scaled: Vec<f64> = q.iter().map(|&v| v / scale).collect();
    // Constraint rows: the identity for x >= 0, then one empty row with
    // bounds 0 <= 0 <= 0. OSQP's polishing writes a line to standard output
    // when it finds no active constraint (an interior solution); it always
    // counts an equality row as active, so the empty row keeps it silent
    // without changing the problem. In the reduced KKT system of the polish
    // step the row only adds a `-delta` diagonal entry and gets multiplier 0.
    let constraints = CscMatrix {
        nrows: n + 1,
        ncols: n,
        indptr: Cow::Owned((0..=n).collect()),
        indices: Cow::Owned((0..n).collect()),
        data: Cow::Owned(vec![1.0; n]),
    };
    let lower = vec![0.0; n + 1];
    let mut upper = vec![OSQP_INFTY; n + 1];
    upper[n] = 0.0;

    let settings = Settings::default()
        .verbose(false)
        .eps_abs(opts.eps_abs)
        .eps_rel(opts.eps_rel)
        .max_iter(opts.max_iter)
        .polishing(opts.polish);

    let mut problem = Problem::new(&p_upper, &q_scaled, &constraints, &lower, &upper, &settings)
        .map_err(|e| match e {
            osqp::SetupError::NonConvex => not_psd(),
            other => Error::Config(format!("osqp: setup failed: {other}")),
        })?;

    // The osqp crate turns a non-zero return code of the C solver (a failed
    // factorisation during a rho update or polishing) into a panic. Catch it
    // so that the caller gets an error value; the solver is dropped normally
    // afterwards.
    let outcome = catch_unwind(AssertUnwindSafe(|| read_status(&problem.solve())))
        .map_err(|_| Error::Config("osqp: the solver stopped with an internal error".to_owned()))?;
    let (x, iterations, status) = outcome?;

    let objective = objective(p_row_major, q, &x);
    Ok(OsqpSolution {
        x,
        objective,
        iterations,
        status: status.to_owned(),
    })
}

/// Copies what the caller needs out of OSQP's status, or maps a failure
/// status to an error.
fn read_status(status: &Status<'_>) -> Result<(Vec<f64>, u32, &'static str)> {
    let (solution, name) = match status {
        Status::Solved(s) => (s, "solved"),
        Status::SolvedInaccurate(s) => (s, "solved inaccurate"),
        Status::MaxIterationsReached(s) => (s, "maximum iterations reached"),
        Status::TimeLimitReached(s) => (s, "time limit reached"),
        Status::PrimalInfeasible(_) | Status::PrimalInfeasibleInaccurate(_) => {
            // x = 0 is always feasible, so this only happens on badly scaled data.
            return Err(Error::Config(
                "osqp: reported x >= 0 as infeasible, which it is not (the data are \
                 probably badly scaled)"
                    .to_owned(),
            ));
        }
        Status::DualInfeasible(_) | Status::DualInfeasibleInaccurate(_) => {
            return Err(Error::Config(
                "osqp: the objective is unbounded below on x >= 0 (P is singular along a \
                 non-negative direction in which q decreases the objective)"
                    .to_owned(),
            ));
        }
        Status::NonConvex(_) => return Err(not_psd()),
        _ => {
            return Err(Error::Config(
                "osqp: the solver returned a status this program does not know".to_owned(),
            ));
        }
    };
    Ok((solution.x().to_vec(), status.iter(), name))
}

fn not_psd() -> Error {
    Error::Config("osqp: P is not positive semidefinite".to_owned())
}

/// Checks sizes, finiteness and symmetry of the caller's data.
fn check_data(p_row_major: &[f64], q: &[f64]) -> Result<()> {
    let n = q.len();
    if n == 0 {
        return Err(Error::Config(
            "osqp: the problem has no variables (q is empty)".to_owned(),
        ));
    }
    if n.checked_mul(n) != Some(p_row_major.len()) {
        return Err(Error::Config(format!(
            "osqp: q has {n} entries, so P must be {n} x {n} ({} entries), but it has {} entries",
            n.saturating_mul(n),
            p_row_major.len()
        )));
    }
    if let Some(i) = q.iter().position(|v| !v.is_finite()) {
        return Err(Error::Config(format!("osqp: q[{i}] is {}", q[i])));
    }
    if let Some(k) = p_row_major.iter().position(|v| !v.is_finite()) {
        return Err(Error::Config(format!(
            "osqp: P[{}][{}] is {}",
            k / n,
            k % n,
            p_row_major[k]
        )));
    }
    let p_max = p_row_major.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    for i in 0..n {
        for j in (i + 1)..n {
            let (upper, lower) = (p_row_major[i * n + j], p_row_major[j * n + i]);
            if (upper - lower).abs() > SYMMETRY_REL_TOL * p_max {
                return Err(Error::Config(format!(
                    "osqp: P is not symmetric: P[{i}][{j}] = {upper} but P[{j}][{i}] = {lower}"
                )));
            }
        }
    }
    Ok(())
}

/// The cost scale `c = max(max |P_ij|, max |q_i|)`, or 1 for all-zero data.
fn cost_scale(p_row_major: &[f64], q: &[f64]) -> f64 {
    let c = p_row_major
        .iter()
        .chain(q)
        .fold(0.0_f64, |m, v| m.max(v.abs()));
    if c.is_normal() { c } else { 1.0 }
}

/// Upper triangle of the dense row-major `P`, times `factor`, in compressed
/// sparse column form, leaving out exact zeros.
fn upper_triangle_csc(p_row_major: &[f64], n: usize, factor: f64) -> CscMatrix<'static> {
    let mut indptr = Vec::with_capacity(n + 1);
    let mut indices = Vec::new();
    let mut data = Vec::new();
    indptr.push(0);
    for col in 0..n {
        for row in 0..=col {
            let value = p_row_major[row * n + col];
            if value != 0.0 {
                indices.push(row);
                data.push(value * factor);
            }
        }
        indptr.push(data.len());
    }
    CscMatrix {
        nrows: n,
        ncols: n,
        indptr: Cow::Owned(indptr),
        indices: Cow::Owned(indices),
        data: Cow::Owned(data),
    }
}

/// `½ xᵀ P x + qᵀ x` for a dense row-major `P`.
fn objective(p_row_major: &[f64], q: &[f64], x: &[f64]) -> f64 {
    let quadratic: f64 = p_row_major
        .chunks_exact(x.len())
        .zip(x)
        .map(|(row, &xi)| xi * row.iter().zip(x).map(|(p, xj)| p * xj).sum::<f64>())
        .sum();
    0.5 * quadratic + q.iter().zip(x).map(|(qi, xi)| qi * xi).sum::<f64>()
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::rngs::StdRng;
    use rand::{RngExt, SeedableRng};

    /// `y = P x` for a dense row-major `P`.
    fn mat_vec(p: &[f64], x: &[f64]) -> Vec<f64> {
        p.chunks_exact(x.len())
            .map(|row| row.iter().zip(x).map(|(a, b)| a * b).sum())
            .collect()
    }

    /// Solves the dense system `M y = r` by Gaussian elimination with partial
    /// pivoting; `None` if `M` is numerically singular.
    fn solve_dense(mut m: Vec<f64>, mut r: Vec<f64>) -> Option<Vec<f64>> {
        let k = r.len();
        for c in 0..k {
            let piv = (c..k).max_by(|&a, &b| m[a * k + c].abs().total_cmp(&m[b * k + c].abs()))?;
            if m[piv * k + c].abs() < 1e-300 {
                return None;
            }
            for j in 0..k {
                m.swap(c * k + j, piv * k + j);
            }
            r.swap(c, piv);
            for i in (c + 1)..k {
                let f = m[i * k + c] / m[c * k + c];
                for j in c..k {
                    m[i * k + j] -= f * m[c * k + j];
                }
                r[i] -= f * r[c];
            }
        }
        let mut y = vec![0.0; k];
        for i in (0..k).rev() {
            let s: f64 = ((i + 1)..k).map(|j| m[i * k + j] * y[j]).sum();
            y[i] = (r[i] - s) / m[i * k + i];
        }
        Some(y)
    }

    /// Exact minimiser by enumerating every free set `F`: solve
    /// `P_FF x_F = −q_F`, keep the candidates with `x_F ≥ 0`, return the one
    /// with the lowest objective. The minimiser's own free set is among them,
    /// and every candidate is feasible, so this is the global minimum.
    /// Only for small `n` (2ⁿ solves).
    fn brute_force(p: &[f64], q: &[f64]) -> (Vec<f64>, f64) {
        let n = q.len();
        let mut best = (vec![0.0; n], 0.0);
        for mask in 1_u32..(1 << n) {
            let free: Vec<usize> = (0..n).filter(|&i| mask & (1 << i) != 0).collect();
            let m: Vec<f64> = free
                .iter()
                .flat_map(|&i| free.iter().map(move |&j| p[i * n + j]))
                .collect();
            let r: Vec<f64> = free.iter().map(|&i| -q[i]).collect();
            let Some(y) = solve_dense(m, r) else { continue };
            if y.iter().any(|&v| v < 0.0) {
                continue;
            }
            let mut x = vec![0.0; n];
            for (idx, &i) in free.iter().enumerate() {
                x[i] = y[idx];
            }
            let f = objective(p, q, &x);
            if f < best.1 {
                best = (x, f);
            }
        }
        best
    }

    /// `P = AᵀA`, `q = −Aᵀb` for a seeded random `m × n` matrix `A` and a
    /// right-hand side `b = A x_true + noise` where `x_true` has negative
    /// entries, so that some bounds are active at the solution.
    fn random_nnls(seed: u64, m: usize, n: usize) -> (Vec<f64>, Vec<f64>) {
        let mut rng = StdRng::seed_from_u64(seed);
        let a: Vec<f64> = (0..m * n).map(|_| rng.random_range(-1.0..1.0)).collect();
        let x_true: Vec<f64> = (0..n).map(|_| rng.random_range(-1.0..2.0)).collect();
        let b: Vec<f64> = (0..m)
            .map(|i| {
                let ax: f64 = (0..n).map(|j| a[i * n + j] * x_true[j]).sum();
                ax + 0.1 * rng.random_range(-1.0..1.0)
            })
            .collect();
        let mut p = vec![0.0; n * n];
        let mut q = vec![0.0; n];
        for i in 0..n {
            for j in 0..n {
                p[i * n + j] = (0..m).map(|k| a[k * n + i] * a[k * n + j]).sum();
            }
            q[i] = -(0..m).map(|k| a[k * n + i] * b[k]).sum::<f64>();
        }
        (p, q)
    }

    /// Largest violation of the KKT conditions of `min ½xᵀPx + qᵀx, x ≥ 0`
    /// at `x`: `max_i max(−x_i, −g_i, |x_i g_i|)` with `g = P x + q`.
    fn kkt_violation(p: &[f64], q: &[f64], x: &[f64]) -> f64 {
        mat_vec(p, x)
            .iter()
            .zip(q)
            .zip(x)
            .map(|((px, qi), xi)| {
                let g = px + qi;
                (-xi).max(-g).max((xi * g).abs())
            })
            .fold(0.0, f64::max)
    }

    #[test]
    fn two_by_two_with_active_bound() {
        // Diagonal: x = max(0, −q_i / P_ii) = [1, 0], objective ½·2·1 − 2 = −1.
        let sol =
            solve_nonneg_qp(&[2.0, 0.0, 0.0, 2.0], &[-2.0, 4.0], &OsqpOptions::default()).unwrap();
        assert_eq!(sol.status, "solved");
        assert!((sol.x[0] - 1.0).abs() < 1e-9, "{:?}", sol.x);
        assert!(sol.x[1].abs() < 1e-9, "{:?}", sol.x);
        assert!((sol.objective + 1.0).abs() < 1e-9, "{}", sol.objective);

        // Coupled: P = [[2, 1], [1, 2]], q = [−2, 1]. The unconstrained
        // minimiser P⁻¹(−q) = [5/3, −4/3] violates x₁ ≥ 0, so x₁ = 0 and
        // x₀ = 2/2 = 1; the gradient g₁ = 1·1 + 1 = 2 > 0 confirms the bound.
        // Objective ½·2·1 − 2 = −1. Tolerance: polishing solves the
        // active-set system directly, so only round-off remains.
        let sol =
            solve_nonneg_qp(&[2.0, 1.0, 1.0, 2.0], &[-2.0, 1.0], &OsqpOptions::default()).unwrap();
        assert_eq!(sol.status, "solved");
        assert!((sol.x[0] - 1.0).abs() < 1e-9, "{:?}", sol.x);
        assert!(sol.x[1].abs() < 1e-9, "{:?}", sol.x);
        assert!((sol.objective + 1.0).abs() < 1e-9, "{}", sol.objective);
    }

    #[test]
    fn interior_solution_equals_unconstrained_minimiser() {
        // q = −P x* with x* = [1, 2, 3] > 0, so the minimiser is P⁻¹(−q) = x*
        // and the objective is −½ x*ᵀ P x* = −½ (1·6 + 2·10 + 3·8) = −25.
        let p = [4.0, 1.0, 0.0, 1.0, 3.0, 1.0, 0.0, 1.0, 2.0];
        let q = [-6.0, -10.0, -8.0];
        let sol = solve_nonneg_qp(&p, &q, &OsqpOptions::default()).unwrap();
        assert_eq!(sol.status, "solved");
        for (xi, want) in sol.x.iter().zip([1.0, 2.0, 3.0]) {
            assert!((xi - want).abs() < 1e-9, "{:?}", sol.x);
        }
        assert!((sol.objective + 25.0).abs() < 1e-8, "{}", sol.objective);
        // Without polishing the ADMM iterate alone meets the tolerances.
        let opts = OsqpOptions {
            polish: false,
            ..OsqpOptions::default()
        };
        let sol = solve_nonneg_qp(&p, &q, &opts).unwrap();
        for (xi, want) in sol.x.iter().zip([1.0, 2.0, 3.0]) {
            assert!((xi - want).abs() < 1e-7, "{:?}", sol.x);
        }
    }

    #[test]
    fn random_nnls_meets_kkt_and_matches_brute_force() {
        let mut active_seen = false;
        for seed in 0..20 {
            let (p, q) = random_nnls(seed, 30, 8);
            let scale = cost_scale(&p, &q);
            let (x_ref, f_ref) = brute_force(&p, &q);
            active_seen |= x_ref.iter().any(|&v| v <= 0.0);

            // Defaults (eps 1e-10, polishing on). Measured on these seeds:
            // objective relative difference ≤ 4e-16 and KKT violation
            // ≤ 1e-15 of the data scale; the tolerances leave room for other
            // compilers and CPUs.
            let sol = solve_nonneg_qp(&p, &q, &OsqpOptions::default()).unwrap();
            assert_eq!(sol.status, "solved", "seed {seed}");
            assert!(
                sol.x.iter().all(|&v| v >= -1e-8),
                "seed {seed}: {:?}",
                sol.x
            );
            let g: Vec<f64> = mat_vec(&p, &sol.x)
                .iter()
                .zip(&q)
                .map(|(a, b)| a + b)
                .collect();
            let tol = 1e-9 * scale;
            for (xi, gi) in sol.x.iter().zip(&g) {
                assert!(*gi >= -tol, "seed {seed}: gradient {gi} < 0");
                assert!((xi * gi).abs() <= tol, "seed {seed}: x g = {}", xi * gi);
            }
            let rel = (sol.objective - f_ref).abs() / f_ref.abs();
            assert!(
                rel < 1e-12,
                "seed {seed}: objective relative difference {rel:e}"
            );

            // Without polishing the ADMM iterate alone still agrees closely
            // at the default tolerances (measured: objective ≤ 2e-12, KKT
            // violation ≤ 3e-11 of the data scale).
            let plain = OsqpOptions {
                polish: false,
                ..OsqpOptions::default()
            };
            let sol = solve_nonneg_qp(&p, &q, &plain).unwrap();
            let rel = (sol.objective - f_ref).abs() / f_ref.abs();
            assert!(
                rel < 1e-9,
                "seed {seed}: unpolished relative difference {rel:e}"
            );
            assert!(kkt_violation(&p, &q, &sol.x) < 1e-8 * scale, "seed {seed}");
        }
        assert!(active_seen, "the random problems should have active bounds");
    }

    #[test]
    fn ill_conditioned_kernel_problem_meets_kkt() {
        // Relaxation kernel of 40 log-spaced time constants at 30 angular
        // frequencies (real and imaginary parts stacked) plus a ridge term
        // 1e-4 on the diagonal: nearly singular, like a real inversion.
        // Measured at the defaults: 40 050 iterations, KKT violation 4e-10
        // of the data scale, polishing rejected (no change); tolerance 1e-6.
        let (n_omega, n_tau, lambda) = (30, 40, 1e-2);
        let omega_rad_s: Vec<f64> = (0..n_omega)
            .map(|i| 10f64.powf(-2.0 + 8.0 * i as f64 / (n_omega - 1) as f64))
            .collect();
        let tau_s: Vec<f64> = (0..n_tau)
            .map(|j| 10f64.powf(-7.0 + 10.0 * j as f64 / (n_tau - 1) as f64))
            .collect();
        let rows = 2 * n_omega;
        let mut a = vec![0.0; rows * n_tau];
        for (i, w) in omega_rad_s.iter().enumerate() {
            for (j, t) in tau_s.iter().enumerate() {
                let wt = w * t;
                a[i * n_tau + j] = 1.0 / (1.0 + wt * wt);
                a[(n_omega + i) * n_tau + j] = wt / (1.0 + wt * wt);
            }
        }
        // Two processes; the second has a negative weight somewhere below so
        // that many bounds are active.
        let gamma: Vec<f64> = tau_s
            .iter()
            .map(|t| {
                let l = t.log10();
                3.0 * (-(l + 3.0).powi(2) / 0.5).exp() - 0.2 * (-(l - 0.5).powi(2) / 0.3).exp()
            })
            .collect();
        let b: Vec<f64> = (0..rows)
            .map(|i| (0..n_tau).map(|j| a[i * n_tau + j] * gamma[j]).sum())
            .collect();
        let mut p = vec![0.0; n_tau * n_tau];
        let mut q = vec![0.0; n_tau];
        for i in 0..n_tau {
            for j in 0..n_tau {
                p[i * n_tau + j] = (0..rows).map(|k| a[k * n_tau + i] * a[k * n_tau + j]).sum();
            }
            p[i * n_tau + i] += lambda * lambda;
            q[i] = -(0..rows).map(|k| a[k * n_tau + i] * b[k]).sum::<f64>();
        }
        let sol = solve_nonneg_qp(&p, &q, &OsqpOptions::default()).unwrap();
        assert_eq!(sol.status, "solved");
        let violation = kkt_violation(&p, &q, &sol.x) / cost_scale(&p, &q);
        assert!(violation < 1e-6, "relative KKT violation {violation:e}");
        assert!(
            sol.x.iter().any(|&v| v.abs() < 1e-6),
            "expected active bounds"
        );
    }

    #[test]
    fn iteration_limit_returns_the_iterate_with_its_status() {
        let (p, q) = random_nnls(7, 30, 8);
        let opts = OsqpOptions {
            max_iter: 1,
            ..OsqpOptions::default()
        };
        let sol = solve_nonneg_qp(&p, &q, &opts).unwrap();
        assert_eq!(sol.status, "maximum iterations reached");
        assert_eq!(sol.iterations, 1);
        assert_eq!(sol.x.len(), 8);
    }

    #[test]
    fn rejects_bad_data() {
        let opts = OsqpOptions::default();
        let msg = |r: Result<OsqpSolution>| r.unwrap_err().to_string();
        assert_eq!(
            msg(solve_nonneg_qp(&[1.0, 0.0, 0.0], &[1.0, 1.0], &opts)),
            "osqp: q has 2 entries, so P must be 2 x 2 (4 entries), but it has 3 entries"
        );
        assert_eq!(
            msg(solve_nonneg_qp(&[], &[], &opts)),
            "osqp: the problem has no variables (q is empty)"
        );
        assert_eq!(
            msg(solve_nonneg_qp(
                &[1.0, 0.0, 0.0, f64::NAN],
                &[1.0, 1.0],
                &opts
            )),
            "osqp: P[1][1] is NaN"
        );
        assert_eq!(
            msg(solve_nonneg_qp(
                &[1.0, 0.0, 0.0, 1.0],
                &[1.0, f64::INFINITY],
                &opts
            )),
            "osqp: q[1] is inf"
        );
        assert_eq!(
            msg(solve_nonneg_qp(&[1.0, 0.5, 0.0, 1.0], &[1.0, 1.0], &opts)),
            "osqp: P is not symmetric: P[0][1] = 0.5 but P[1][0] = 0"
        );
        // P = 0 and q < 0: the objective −x decreases without bound.
        assert!(
            msg(solve_nonneg_qp(&[0.0], &[-1.0], &opts))
                .starts_with("osqp: the objective is unbounded below")
        );
    }

    #[test]
    fn rejects_bad_options() {
        let p = [1.0];
        let q = [-1.0];
        let bad = |opts: OsqpOptions| solve_nonneg_qp(&p, &q, &opts).unwrap_err().to_string();
        assert_eq!(
            bad(OsqpOptions {
                eps_abs: -1.0,
                ..OsqpOptions::default()
            }),
            "parameter `eps_abs` must be a finite number >= 0, got -1"
        );
        assert_eq!(
            bad(OsqpOptions {
                eps_rel: f64::NAN,
                ..OsqpOptions::default()
            }),
            "parameter `eps_rel` must be a finite number >= 0, got NaN"
        );
        assert!(
            bad(OsqpOptions {
                eps_abs: 0.0,
                eps_rel: 0.0,
                ..OsqpOptions::default()
            })
            .contains("cannot both be 0")
        );
        assert_eq!(
            bad(OsqpOptions {
                max_iter: 0,
                ..OsqpOptions::default()
            }),
            "parameter `max_iter` must be between 1 and 2147483647, got 0"
        );
    }

    #[test]
    fn zero_problem_and_scaling_invariance() {
        // P = 0, q ≥ 0: x = 0 is optimal (cost scale falls back to 1).
        let sol =
            solve_nonneg_qp(&[0.0, 0.0, 0.0, 0.0], &[0.0, 1.0], &OsqpOptions::default()).unwrap();
        assert!(sol.x.iter().all(|v| v.abs() < 1e-9), "{:?}", sol.x);
        // Scaling P and q by k leaves x unchanged and scales the objective by k.
        let (p, q) = random_nnls(3, 30, 8);
        let base = solve_nonneg_qp(&p, &q, &OsqpOptions::default()).unwrap();
        let k = 1e6;
        let p_k: Vec<f64> = p.iter().map(|v| v * k).collect();
        let q_k: Vec<f64> = q.iter().map(|v| v * k).collect();
        let scaled = solve_nonneg_qp(&p_k, &q_k, &OsqpOptions::default()).unwrap();
        for (a, b) in base.x.iter().zip(&scaled.x) {
            assert!((a - b).abs() < 1e-9, "{a} vs {b}");
        }
        let rel = (scaled.objective / k - base.objective).abs() / base.objective.abs();
        assert!(rel < 1e-12, "{rel:e}");
    }
}
