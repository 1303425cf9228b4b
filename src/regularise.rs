//! The back end shared by every inversion (spectra, step transients):
//! discretisation and regularisation options, the extension prior, the choice
//! of `lambda`, the final solve and the sampled distribution.
//!
//! A front end (see [`crate::invert`], [`crate::transient`]) turns its data
//! into a scaled [`Tikhonov`] problem whose first `basis.len()` columns are
//! the basis coefficients of the distribution; everything after that is the
//! same for every kind of measurement and lives here.

use crate::grid::TauGrid;
use crate::kernel::{Basis, BasisKind};
use crate::lambda::{self, LambdaChoice, LambdaCurves, LambdaGrid, LambdaPath, LambdaRule};
use crate::peaks::PeakOptions;
use crate::solve::{SolveStatus, Tikhonov, TikhonovSolution};
use crate::{Error, Result};
use nalgebra::DMatrix;
use std::f64::consts::LN_10;

/// The default rule, chosen by the accuracy benchmark in `docs/lambda-rules.md`.
pub const DEFAULT_RULE: LambdaRule = LambdaRule::Discrepancy;

/// Discretisation and regularisation options common to every inversion.
/// See [`DrtOptions::default`] for the defaults.
#[derive(Clone, Debug, PartialEq)]
pub struct DrtOptions {
    /// Grid points per decade of tau.
    pub per_decade: f64,
    /// Decades by which the grid extends past the measured band on each side.
    pub extend_decades: f64,
    /// Override of the smallest tau (s).
    pub tau_min_s: Option<f64>,
    /// Override of the largest tau (s).
    pub tau_max_s: Option<f64>,
    /// Basis family.
    pub basis: BasisKind,
    /// Derivative order k of the penalty (0, 1 or 2).
    pub penalty_order: usize,
    /// How lambda is chosen.
    pub lambda: LambdaChoice,
    /// The grid searched by the rules (dimensionless lambda).
    pub lambda_grid: LambdaGrid,
    /// Lower bound on the chosen lambda (see docs/lambda-rules.md).
    pub lambda_floor: f64,
    /// Compute every rule's curve, not only the one that decides.
    pub all_curves: bool,
    /// Peak reporting thresholds (`min_area` is set from the fit when 0).
    pub peaks: PeakOptions,
    /// Output samples of gamma per grid step.
    pub oversample: usize,
    /// Weight of the prior against distribution mass beyond the measured
    /// band, relative to the data's scale (0 switches it off).
    pub extension_prior: f64,
}

impl Default for DrtOptions {
    /// 10 points per decade, one decade of extension, Gaussian basis, ridge
    /// penalty (k = 0), lambda by [`DEFAULT_RULE`] over 1e-8..1e1 at 3 per
    /// decade with a floor of 1e-6, 5 output samples per grid step and an
    /// extension prior of 1e-2.
    fn default() -> Self {
        Self {
            per_decade: 10.0,
            extend_decades: 1.0,
            tau_min_s: None,
            tau_max_s: None,
            basis: BasisKind::Gaussian,
            penalty_order: 0,
            lambda: LambdaChoice::Rule(DEFAULT_RULE),
            lambda_grid: LambdaGrid {
                min: 1e-8,
                max: 1e1,
                per_decade: 3.0,
            },
            lambda_floor: 1e-6,
            all_curves: false,
            peaks: PeakOptions::default(),
            oversample: 5,
            extension_prior: 1e-2,
        }
    }
}

impl DrtOptions {
    /// Checks every option, naming the offending one.
    pub fn validate(&self) -> Result<()> {
        if self.penalty_order > 2 {
            return Err(Error::Param {
                name: "penalty-order",
                expected: "0, 1 or 2",
                value: self.penalty_order as f64,
            });
        }
        if let LambdaChoice::Fixed(v) = self.lambda
            && !(v.is_finite() && v > 0.0)
        {
            return Err(Error::Param {
                name: "lambda",
                expected: "a positive number or a rule name (gcv, lcurve, discrepancy, recv)",
                value: v,
            });
        }
        self.lambda_grid.validate()?;
        if !(self.lambda_floor.is_finite() && self.lambda_floor >= 0.0) {
            return Err(Error::Param {
                name: "lambda-floor",
                expected: "a non-negative number",
                value: self.lambda_floor,
            });
        }
        if !(self.extension_prior.is_finite() && self.extension_prior >= 0.0) {
            return Err(Error::Param {
                name: "extension-prior",
                expected: "a non-negative number",
                value: self.extension_prior,
            });
        }
        if !(1..=50).contains(&self.oversample) {
            return Err(Error::Param {
                name: "oversample",
                expected: "between 1 and 50",
                value: self.oversample as f64,
            });
        }
        Ok(())
    }

    /// The tau grid for a measured band of time constants
    /// `[tau_lo_s, tau_hi_s]`: extended by `extend_decades` on each side,
    /// then overridden at either end by `tau_min_s` / `tau_max_s`.
    pub fn grid(&self, tau_lo_s: f64, tau_hi_s: f64) -> Result<TauGrid> {
        let default =
            TauGrid::for_tau_band(tau_lo_s, tau_hi_s, self.per_decade, self.extend_decades)?;
        match (self.tau_min_s, self.tau_max_s) {
            (None, None) => Ok(default),
            (lo, hi) => {
                let d = default.tau_s();
                TauGrid::new(
                    lo.unwrap_or(d[0]),
                    hi.unwrap_or(d[d.len() - 1]),
                    self.per_decade,
                )
            }
        }
    }
}

/// Adds the extension prior to `problem`, whose first `basis.len()` columns
/// are the basis coefficients; `band = (ln tau_lo, ln tau_hi)` is the band
/// the data resolve and `weight` the option [`DrtOptions::extension_prior`].
///
/// The prior is `weight * s * x' P x` with the Gram matrix
/// `P_ij = integral w(y) phi_i(y) phi_j(y) dy`, `w(y)` the squared distance in
/// decades from `y = ln tau` to the band (zero inside), and
/// `s = sum_j |A_j|^2 / (n integral phi^2)` the data's scale per unit of
/// basis overlap. Mass beyond the band is allowed but costs more the further
/// out it sits, so the extension reduces truncation error without absorbing
/// noise as resistance (our choice; see docs/lambda-rules.md).
pub fn with_extension_prior(
    problem: Tikhonov,
    basis: &Basis,
    band: (f64, f64),
    weight: f64,
) -> Tikhonov {
    if weight <= 0.0 {
        return problem;
    }
    let n = basis.len();
    let ncols = problem.ncols();
    let ext = extension_gram(basis, band);
    // Diagonal of A'A from the column norms: no second cross product.
    let data_scale = (0..n)
        .map(|j| problem.design().column(j).norm_squared())
        .sum::<f64>()
        / (n as f64 * basis.self_overlap());
    let mut prior = DMatrix::zeros(ncols, ncols);
    prior
        .view_mut((0, 0), (n, n))
        .copy_from(&(ext * (weight * data_scale)));
    problem.with_prior(prior)
}

fn extension_gram(basis: &Basis, band: (f64, f64)) -> DMatrix<f64> {
    let n = basis.len();
    let c = basis.centers();
    let h = basis.step() / 8.0;
    let reach = basis.half_support();
    let (y0, y1) = (c[0] - reach, c[n - 1] + reach);
    let steps = ((y1 - y0) / h).ceil() as usize;
    let mut m = DMatrix::zeros(n, n);
    for s in 0..=steps {
        let y = y0 + s as f64 * h;
        let d = if y < band.0 {
            (band.0 - y) / LN_10
        } else if y > band.1 {
            (y - band.1) / LN_10
        } else {
            continue;
        };
        let w = d * d * h;
        let lo = (((y - reach - c[0]) / basis.step()).floor().max(0.0)) as usize;
        let hi = ((((y + reach - c[0]) / basis.step()).ceil()) as usize).min(n - 1);
        for i in lo..=hi {
            let pi = basis.shape(y - c[i]);
            if pi == 0.0 {
                continue;
            }
            for j in lo..=hi {
                m[(i, j)] += w * pi * basis.shape(y - c[j]);
            }
        }
    }
    m
}

/// Diagnostics of the final solve.
#[derive(Clone, Debug, serde::Serialize)]
pub struct SolveInfo {
    /// Active-set iterations of the final solve.
    pub iterations: usize,
    /// Whether every solve converged.
    pub status: SolveStatus,
    /// Number of equations (2 per frequency of a spectrum, 1 per time bin of
    /// a transient).
    pub equations: usize,
    /// Number of unknowns.
    pub unknowns: usize,
    /// Effective number of parameters at the final lambda.
    pub dof: f64,
}

impl Regularised {
    /// The diagnostics of this solution of `problem`.
    pub fn info(&self, problem: &Tikhonov) -> SolveInfo {
        SolveInfo {
            iterations: self.solution.iterations,
            status: self.status,
            equations: problem.nrows(),
            unknowns: problem.ncols(),
            dof: self.dof,
        }
    }
}

/// The regularised solution and how `lambda` was found.
#[derive(Clone, Debug)]
pub struct Regularised {
    /// The final solve.
    pub solution: TikhonovSolution,
    /// Effective number of parameters at the final `lambda`.
    pub dof: f64,
    /// The rule that chose `lambda`, or `None` when it was fixed.
    pub rule: Option<LambdaRule>,
    /// Whether the rule's choice was raised to the floor.
    pub floored: bool,
    /// Rule curves, when a rule was used.
    pub curves: Option<LambdaCurves>,
    /// Converged only when the final solve and every solve on the path did.
    pub status: SolveStatus,
}

/// Chooses `lambda` as `opts` asks and solves at it.
///
/// `cv_split` holds the two blocks of rows that the cross-validation rule
/// ([`LambdaRule::Recv`]) fits against each other: the real and imaginary
/// equations of a spectrum, alternate samples of a transient.
pub fn regularise(
    problem: &Tikhonov,
    opts: &DrtOptions,
    cv_split: (&[usize], &[usize]),
) -> Regularised {
    let mut warm: Vec<usize> = Vec::new();
    let (lambda_used, rule, floored, curves, path_converged) = match opts.lambda {
        LambdaChoice::Fixed(v) => (v, None, false, None, true),
        LambdaChoice::Rule(rule) => {
            let lambdas = opts.lambda_grid.values();
            let path = LambdaPath::trace(problem, &lambdas);
            let wanted: Vec<LambdaRule> = if opts.all_curves {
                LambdaRule::ALL.to_vec()
            } else {
                vec![rule]
            };
            let rules: Vec<_> = wanted
                .into_iter()
                .map(|r| match r {
                    LambdaRule::Gcv => lambda::gcv::curve(&path),
                    LambdaRule::Lcurve => lambda::lcurve::curve(&path),
                    LambdaRule::Discrepancy => lambda::discrepancy::curve(&path),
                    LambdaRule::Recv => {
                        lambda::recv::curve(problem, cv_split.0, cv_split.1, &lambdas)
                    }
                })
                .collect();
            let chosen = rules
                .iter()
                .find(|c| c.rule == rule)
                .and_then(|c| c.chosen)
                .unwrap_or(opts.lambda_floor.max(opts.lambda_grid.min));
            let floored = chosen < opts.lambda_floor;
            let used = chosen.max(opts.lambda_floor);
            // Warm-start the final solve from the nearest grid point.
            if let Some(p) = path.points.iter().min_by(|a, b| {
                (a.solution.lambda / used)
                    .ln()
                    .abs()
                    .total_cmp(&(b.solution.lambda / used).ln().abs())
            }) {
                warm.clone_from(&p.solution.free);
            }
            let curves = LambdaCurves {
                lambda: lambdas,
                residual_sq: path.points.iter().map(|p| p.solution.residual_sq).collect(),
                penalty_sq: path.points.iter().map(|p| p.solution.penalty_sq).collect(),
                dof: path.points.iter().map(|p| p.dof).collect(),
                rules,
            };
            (
                used,
                Some(rule),
                floored,
                Some(curves),
                path.all_converged(),
            )
        }
    };
    let solution = problem.solve(lambda_used, &warm);
    let dof = problem.influence_trace(lambda_used, &solution.free);
    let status = if path_converged && solution.status == SolveStatus::Converged {
        SolveStatus::Converged
    } else {
        SolveStatus::MaxIterations
    };
    Regularised {
        solution,
        dof,
        rule,
        floored,
        curves,
        status,
    }
}

/// The distribution `sum_j c_j phi_j(ln tau)` sampled `oversample` times per
/// grid step, from `min(half support, 3 steps)` before the first centre to as
/// far past the last, so the whole area is sampled. Returns `(ln tau, values)`.
pub fn sample_distribution(
    basis: &Basis,
    coeffs: &[f64],
    oversample: usize,
) -> (Vec<f64>, Vec<f64>) {
    let n = basis.len();
    let step = basis.step() / oversample.max(1) as f64;
    let reach = basis.half_support().min(3.0 * basis.step());
    let y0 = basis.centers()[0] - reach;
    let y1 = basis.centers()[n - 1] + reach;
    let n_out = ((y1 - y0) / step).round() as usize + 1;
    let ln_tau: Vec<f64> = (0..n_out).map(|i| y0 + step * i as f64).collect();
    let values = basis.evaluate(coeffs, &ln_tau);
    (ln_tau, values)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn grid_extends_band_and_honours_overrides() {
        let o = DrtOptions::default();
        let g = o.grid(1e-4, 1.0).unwrap();
        let t = g.tau_s();
        assert!((t[0] / 1e-5 - 1.0).abs() < 1e-12);
        assert!((t[t.len() - 1] / 10.0 - 1.0).abs() < 1e-12);
        assert_eq!(g.len(), 61);
        let o = DrtOptions {
            tau_max_s: Some(100.0),
            ..DrtOptions::default()
        };
        let t = o.grid(1e-4, 1.0).unwrap().tau_s();
        assert!((t[0] / 1e-5 - 1.0).abs() < 1e-12);
        assert!((t[t.len() - 1] / 100.0 - 1.0).abs() < 1e-12);
    }

    /// The samples of a hat basis reproduce the coefficients at the centres
    /// and integrate (trapezoid) to sum(c) * dy, the exact area.
    #[test]
    fn sampling_covers_the_whole_area() {
        let g = TauGrid::new(1e-3, 1.0, 10.0).unwrap();
        let basis = Basis::new(BasisKind::Hat, &g);
        let c: Vec<f64> = (0..basis.len()).map(|j| 1.0 + (j % 3) as f64).collect();
        let (y, v) = sample_distribution(&basis, &c, 4);
        assert!(v[0].abs() < 1e-12);
        assert!(v[v.len() - 1].abs() < 1e-12);
        assert!((v[4] - c[0]).abs() < 1e-12);
        let h = y[1] - y[0];
        let area: f64 = v.iter().sum::<f64>() * h;
        let want: f64 = c.iter().sum::<f64>() * basis.step();
        assert!((area / want - 1.0).abs() < 1e-12);
    }

    #[test]
    fn extension_prior_is_zero_inside_the_band() {
        let g = TauGrid::new(1e-4, 1e2, 10.0).unwrap();
        let basis = Basis::new(BasisKind::Gaussian, &g);
        let m = extension_gram(&basis, (1e-4f64.ln(), 1e2f64.ln()));
        let mid = basis.len() / 2;
        assert!(m[(mid, mid)].abs() < 1e-30);
        // One decade outside on both sides: nothing there either.
        let m = extension_gram(&basis, (1e-6f64.ln(), 1e4f64.ln()));
        assert!(m.amax() < 1e-20);
        // Band shrunk to the middle: the end functions pay ~ (distance in decades)^2.
        let m = extension_gram(&basis, (1e-1f64.ln(), 1e-1f64.ln()));
        let end = m[(0, 0)] / basis.self_overlap();
        assert!((end / 9.0 - 1.0).abs() < 0.02, "{end}");
    }
}
