//! The prepared problem: everything that depends only on the measurement
//! axis and the options, built once and shared by every response.
//!
//! A [`Plan`] holds the tau grid and basis, the kernel (one row per equation,
//! one column per unknown: the basis coefficients first, then the series
//! terms), the penalty Gram matrix, the extension prior and, when the row
//! weights do not depend on the response, the weighted design matrix and its
//! cross product `A'A`. Solving a response then costs the right-hand side,
//! the lambda choice and the solves; with response-dependent weights (|Z|
//! weighting of a spectrum) it adds one cross product.
//!
//! The front ends ([`crate::pipeline::SpectrumPlan`],
//! [`crate::pipeline::TransientPlan`]) build a plan from their axis and turn
//! responses into scaled right-hand sides; the lambda choice, the final
//! solve, the sampled distribution and its peaks are here, once.

use super::options::DrtOptions;
use super::result::{
    Distribution, DistributionUnit, LambdaSelection, SeriesTerms, SolveInfo, WarmStart,
};
use super::select::{Selected, refine, select};
use crate::grid::TauGrid;
use crate::kernel::Basis;
use crate::peaks::find_peaks;
use crate::solve::Tikhonov;
use crate::{Error, Result};
use nalgebra::{DMatrix, DVector};
use std::f64::consts::LN_10;
use std::sync::Arc;

/// A prepared inversion on one measurement axis. `Send + Sync`: one plan
/// can serve many threads.
#[derive(Clone, Debug)]
pub struct Plan {
    opts: DrtOptions,
    grid: TauGrid,
    basis: Basis,
    /// `(ln tau_lo, ln tau_hi)` of the band the data resolve.
    band_ln_tau: (f64, f64),
    /// Unweighted kernel, `rows x (n_gamma + series)`.
    kernel: DMatrix<f64>,
    n_gamma: usize,
    penalty: Arc<DMatrix<f64>>,
    /// The extension prior's Gram matrix before its data scale (basis
    /// block, padded with zeros to `ncols`); `None` when switched off.
    extension: Option<Arc<DMatrix<f64>>>,
    /// Weighted design, cross product and prior, when the row weights are
    /// fixed by the axis.
    fixed: Option<Prepared>,
    cv_split: (Vec<usize>, Vec<usize>),
    sampler: Sampler,
}

/// The basis functions at the output samples of the distribution, computed
/// once: sampling a response is then a banded product, not one exponential
/// per basis function and sample.
#[derive(Clone, Debug)]
struct Sampler {
    ln_tau: Vec<f64>,
    tau_s: Vec<f64>,
    /// For each sample: the first basis function within reach and the
    /// values of those within reach.
    rows: Vec<(usize, Vec<f64>)>,
}

impl Sampler {
    fn new(basis: &Basis, oversample: usize) -> Self {
        let ln_tau = sample_points(basis, oversample);
        let reach = basis.half_support();
        let c = basis.centers();
        let rows = ln_tau
            .iter()
            .map(|&y| match basis.reach(y, reach) {
                Some((lo, hi)) => (lo, (lo..=hi).map(|j| basis.shape(y - c[j])).collect()),
                None => (0, Vec::new()),
            })
            .collect();
        Self {
            tau_s: ln_tau.iter().map(|y| y.exp()).collect(),
            ln_tau,
            rows,
        }
    }

    /// `sum_j c_j phi_j` at every sample, in the order and with the rounding
    /// of [`Basis::evaluate`].
    fn evaluate(&self, coeffs: &[f64]) -> Vec<f64> {
        self.rows
            .iter()
            .map(|(lo, phi)| coeffs[*lo..].iter().zip(phi).map(|(c, p)| c * p).sum())
            .collect()
    }
}

#[derive(Clone, Debug)]
struct Prepared {
    a: Arc<DMatrix<f64>>,
    ata: Arc<DMatrix<f64>>,
    prior: Option<(Arc<DMatrix<f64>>, f64)>,
}

/// The solved, scaled problem of one response, before the front end turns
/// it into physical units.
pub(crate) struct Solved {
    /// The unknowns in plan column order (dropped columns are 0).
    pub x: Vec<f64>,
    /// `A x` of the solved problem (weighted, scaled units).
    pub prediction: Vec<f64>,
    pub selection: LambdaSelection,
    pub info: SolveInfo,
    pub warm_start: WarmStart,
    /// `sqrt(||A x - b||^2 / m)` of the final solve (scaled units).
    pub residual_rms: f64,
    /// The noise level the discrepancy rule estimates, in the same units,
    /// when a rule chose lambda (see [`super::select`]).
    pub noise_rms: Option<f64>,
    /// What the uncertainty bands sample from.
    pub posterior: PosteriorSource,
}

/// The final regularised problem and its solution, in the problem's
/// columns, for [`super::bands`].
#[derive(Clone)]
pub(crate) struct PosteriorSource {
    pub problem: Tikhonov,
    pub lambda: f64,
    /// The solution in the problem's columns.
    pub x: Vec<f64>,
    pub residual_sq: f64,
    /// Effective number of parameters of the solution.
    pub dof: f64,
}

/// What to tell the user when the distribution sits beyond the band the
/// data resolve; each front end words it for its measurement.
pub(crate) struct EdgeHints {
    /// The fastest time constant the data resolve, named for the user
    /// (e.g. "1/(2 pi f_max)").
    pub short_name: &'static str,
    /// What to do about mass below it.
    pub short_hint: String,
    /// The slowest time constant the data resolve, named for the user.
    pub long_name: &'static str,
    /// What to do about mass above it.
    pub long_hint: String,
}

impl Plan {
    /// Builds a plan from the kernel of the distribution (`rows x n`, `n` the
    /// number of basis functions of `basis`), the columns of the series
    /// terms (each `rows` long), and `row_scale`, the factor of each row of
    /// the design matrix when it is the same for every response (`None`
    /// when it depends on the response).
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn new(
        opts: &DrtOptions,
        grid: TauGrid,
        basis: Basis,
        band_ln_tau: (f64, f64),
        gamma_kernel: DMatrix<f64>,
        series_columns: &[Vec<f64>],
        row_scale: Option<&[f64]>,
        cv_split: (Vec<usize>, Vec<usize>),
    ) -> Result<Self> {
        let rows = gamma_kernel.nrows();
        let n_gamma = basis.len();
        debug_assert_eq!(gamma_kernel.ncols(), n_gamma);
        let ncols = n_gamma + series_columns.len();
        let mut kernel = gamma_kernel.resize_horizontally(ncols, 0.0);
        for (k, col) in series_columns.iter().enumerate() {
            debug_assert_eq!(col.len(), rows);
            kernel.set_column(n_gamma + k, &DVector::from_column_slice(col));
        }
        let gram = basis.gram_dense(opts.penalty_order)?;
        let mut penalty = DMatrix::zeros(ncols, ncols);
        penalty
            .view_mut((0, 0), (n_gamma, n_gamma))
            .copy_from(&gram);
        let extension = (opts.extension_prior > 0.0)
            .then(|| Arc::new(extension_gram(&basis, band_ln_tau).resize(ncols, ncols, 0.0)));
        let sampler = Sampler::new(&basis, opts.oversample);
        let mut plan = Self {
            opts: opts.clone(),
            grid,
            basis,
            band_ln_tau,
            kernel,
            n_gamma,
            penalty: Arc::new(penalty),
            extension,
            fixed: None,
            cv_split,
            sampler,
        };
        if let Some(scale) = row_scale {
            let a = plan.weighted(scale, &plan.kept(&[]));
            // Once per plan: the column-by-column product (its rounding
            // is the one the outputs were first published with).
            let ata = a.tr_mul(&a);
            let prior = plan.prior_for(&a);
            plan.fixed = Some(Prepared {
                a: Arc::new(a),
                ata: Arc::new(ata),
                prior,
            });
        }
        Ok(plan)
    }

    /// The options the plan was built with.
    pub fn options(&self) -> &DrtOptions {
        &self.opts
    }

    /// The tau grid (basis centres).
    pub fn grid(&self) -> &TauGrid {
        &self.grid
    }

    /// The basis on the grid.
    pub fn basis(&self) -> &Basis {
        &self.basis
    }

    /// Number of equations per response.
    pub fn nrows(&self) -> usize {
        self.kernel.nrows()
    }

    /// Number of unknowns: basis coefficients, then series terms.
    pub fn ncols(&self) -> usize {
        self.kernel.ncols()
    }

    /// Number of basis coefficients.
    pub fn n_gamma(&self) -> usize {
        self.n_gamma
    }

    /// `diag(scale) K` on the columns `keep`.
    fn weighted(&self, scale: &[f64], keep: &[usize]) -> DMatrix<f64> {
        let mut a = DMatrix::zeros(self.nrows(), keep.len());
        for (k, &j) in keep.iter().enumerate() {
            for ((o, kij), s) in a
                .column_mut(k)
                .iter_mut()
                .zip(self.kernel.column(j))
                .zip(scale)
            {
                *o = kij * s;
            }
        }
        a
    }

    /// The extension prior for the design `a` (basis columns first), as the
    /// plan's Gram matrix `E` (all plan columns) and its factor `weight * s`:
    /// `E_ij = integral w(y) phi_i(y) phi_j(y) dy`, `w(y)` the squared
    /// distance in decades from `y = ln tau` to the band the data resolve
    /// (zero inside), and `s = sum_j |A_j|^2 / (n integral phi^2)` the
    /// data's scale per unit of basis overlap. Mass beyond the band is
    /// allowed but costs more the further out it sits, so the extension
    /// reduces truncation error without absorbing noise as resistance (our
    /// choice; see docs/lambda-rules.md).
    fn prior_for(&self, a: &DMatrix<f64>) -> Option<(Arc<DMatrix<f64>>, f64)> {
        let ext = self.extension.as_ref()?;
        let n = self.n_gamma;
        let data_scale = (0..n).map(|j| a.column(j).norm_squared()).sum::<f64>()
            / (n as f64 * self.basis.self_overlap());
        Some((ext.clone(), self.opts.extension_prior * data_scale))
    }

    /// The scaled regularised problem of one response: right-hand side `b`
    /// (already weighted and scaled), row factors `row_scale` when the plan
    /// has none fixed, and the plan columns `dropped` (series terms that
    /// this response does not use).
    pub(crate) fn problem(
        &self,
        b: Vec<f64>,
        row_scale: Option<&[f64]>,
        dropped: &[usize],
    ) -> Result<Tikhonov> {
        Ok(self
            .assemble(b, row_scale, dropped)?
            .with_nnls_params(self.opts.nnls))
    }

    fn assemble(
        &self,
        b: Vec<f64>,
        row_scale: Option<&[f64]>,
        dropped: &[usize],
    ) -> Result<Tikhonov> {
        if b.len() != self.nrows() {
            return Err(Error::Data(format!(
                "the plan has {} equations but the response gives {}",
                self.nrows(),
                b.len()
            )));
        }
        if let Some(bad) = b.iter().position(|v| !v.is_finite()) {
            return Err(Error::Data(format!(
                "the response holds a non-finite value at equation {}",
                bad + 1
            )));
        }
        let b = DVector::from_vec(b);
        let keep = self.kept(dropped);
        let k = keep.len();
        let sub = |m: &DMatrix<f64>| DMatrix::from_fn(k, k, |r, c| m[(keep[r], keep[c])]);
        let penalty = if dropped.is_empty() {
            self.penalty.clone()
        } else {
            Arc::new(sub(&self.penalty))
        };
        match (&self.fixed, row_scale) {
            (Some(p), None) if dropped.is_empty() => Ok(Tikhonov::from_parts(
                p.a.clone(),
                b,
                p.ata.clone(),
                penalty,
                p.prior.clone(),
            )),
            (Some(p), None) => Ok(Tikhonov::from_parts(
                Arc::new(p.a.select_columns(&keep)),
                b,
                Arc::new(sub(&p.ata)),
                penalty,
                p.prior.as_ref().map(|(e, f)| (Arc::new(sub(e)), *f)),
            )),
            (_, Some(scale)) => {
                if scale.len() != self.nrows() {
                    return Err(Error::Data(format!(
                        "the plan has {} equations but {} row weights",
                        self.nrows(),
                        scale.len()
                    )));
                }
                let a = self.weighted(scale, &keep);
                let ata = crate::linalg::gram_dense(&a);
                let prior = self.prior_for(&a).map(|(e, f)| {
                    if dropped.is_empty() {
                        (e, f)
                    } else {
                        (Arc::new(sub(&e)), f)
                    }
                });
                Ok(Tikhonov::from_parts(
                    Arc::new(a),
                    b,
                    Arc::new(ata),
                    penalty,
                    prior,
                ))
            }
            (None, None) => Err(Error::Data(
                "this plan needs row weights for every response".into(),
            )),
        }
    }

    fn kept(&self, dropped: &[usize]) -> Vec<usize> {
        (0..self.ncols()).filter(|j| !dropped.contains(j)).collect()
    }

    /// Chooses lambda, solves, refines by the adaptive penalty when the
    /// options ask for it, and maps the unknowns back to plan columns.
    pub(crate) fn solve(
        &self,
        problem: &Tikhonov,
        dropped: &[usize],
        warm: Option<&WarmStart>,
    ) -> Solved {
        let global = self.select_global(problem, dropped, warm);
        self.finish(problem, dropped, global)
    }

    /// Chooses lambda and solves with the global penalty only (in the
    /// problem's columns): the first half of [`Self::solve`], for callers
    /// that decide something from the global solution (the series terms of
    /// a spectrum) before [`Self::finish`].
    pub(crate) fn select_global(
        &self,
        problem: &Tikhonov,
        dropped: &[usize],
        warm: Option<&WarmStart>,
    ) -> Selected {
        let keep = self.kept(dropped);
        // Warm starts and free sets are in plan columns; the problem may
        // have fewer.
        let to_problem: Vec<usize> = warm
            .map(|w| {
                w.free
                    .iter()
                    .filter_map(|j| keep.iter().position(|k| k == j))
                    .collect()
            })
            .unwrap_or_default();
        let split = (self.cv_split.0.as_slice(), self.cv_split.1.as_slice());
        select(problem, &self.opts, split, &to_problem)
    }

    /// The second half of [`Self::solve`]: the adaptive refinement (when
    /// asked for) of `global`, a selection on `problem`, and the unknowns
    /// mapped back to plan columns.
    pub(crate) fn finish(&self, problem: &Tikhonov, dropped: &[usize], global: Selected) -> Solved {
        let keep = self.kept(dropped);
        let Selected {
            solution,
            selection,
            info,
            noise_rms,
            problem: last,
        } = refine(problem, global, &self.opts, self.n_gamma);
        let mut x = vec![0.0; self.ncols()];
        for (k, &j) in keep.iter().enumerate() {
            x[j] = solution.x[k];
        }
        let prediction = problem.predict(&solution.x);
        let residual_rms = (solution.residual_sq / problem.nrows().max(1) as f64).sqrt();
        Solved {
            x,
            prediction,
            selection,
            residual_rms,
            noise_rms,
            warm_start: WarmStart {
                free: solution.free.iter().map(|&k| keep[k]).collect(),
            },
            posterior: PosteriorSource {
                problem: last,
                lambda: solution.lambda,
                x: solution.x,
                residual_sq: solution.residual_sq,
                dof: info.dof,
            },
            info,
        }
    }

    /// The distribution of the basis coefficients `coeffs` (physical
    /// units), sampled, integrated and split into peaks no smaller than
    /// `min_area` (0: no absolute limit). `warnings` (the front end's)
    /// lead the result's warnings; the plausibility checks of
    /// [`plausibility`] follow, worded with `hints`.
    ///
    /// `coeff_scale` turns the problem's basis coefficients into `coeffs`
    /// (physical units); with [`DrtOptions::bands`] the uncertainty bands
    /// are sampled here ([`super::bands`]), for every front end alike.
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn distribution(
        &self,
        unit: DistributionUnit,
        coeffs: Vec<f64>,
        coeff_scale: f64,
        series: SeriesTerms,
        min_area: f64,
        residual_rms_rel: f64,
        solved: Solved,
        mut warnings: Vec<String>,
        hints: &EdgeHints,
    ) -> Distribution {
        let total = coeffs.iter().sum::<f64>() * self.basis.integral();
        let gamma = self.sampler.evaluate(&coeffs);
        let mut peak_opts = self.opts.peaks;
        if peak_opts.min_area <= 0.0 {
            peak_opts.min_area = min_area;
        }
        let peaks = find_peaks(&self.sampler.ln_tau, &gamma, &peak_opts);
        if self.opts.bands.is_some() && self.opts.adaptive.is_none() {
            warnings.push(
                "no uncertainty bands: they are sampled from the posterior of the adaptive \
                 penalty, and the global penalty was asked for"
                    .into(),
            );
        }
        let bands = self
            .opts
            .bands
            .as_ref()
            .filter(|_| self.opts.adaptive.is_some())
            .and_then(|b| {
                super::bands::sample(
                    &solved.posterior,
                    self.n_gamma,
                    coeff_scale,
                    &|c| self.sampler.evaluate(c),
                    &self.sampler.ln_tau,
                    &peaks,
                    &peak_opts,
                    residual_rms_rel,
                    b,
                )
                .map_err(|e| warnings.push(format!("no uncertainty bands: {e}")))
                .ok()
            });
        warnings.extend(solved.selection.warning());
        warnings.extend(solved.info.warning());
        let edges = edge_shares(&self.sampler.ln_tau, &gamma, self.band_ln_tau);
        warnings.extend(plausibility(&Evidence {
            coeffs: &coeffs,
            residual_rms_rel,
            lambda: &solved.selection,
            residual_rms: solved.residual_rms,
            noise_rms: solved.noise_rms,
            edges,
            band_tau_s: (self.band_ln_tau.0.exp(), self.band_ln_tau.1.exp()),
            hints,
        }));
        Distribution {
            unit,
            grid: self.grid.clone(),
            coeffs,
            tau_s: self.sampler.tau_s.clone(),
            gamma,
            total,
            series,
            peaks,
            min_area: peak_opts.min_area,
            residual_rms_rel,
            lambda: solved.selection,
            info: solved.info,
            warnings,
            warm_start: solved.warm_start,
            bands,
        }
    }

    /// `(ln tau_lo, ln tau_hi)` of the band the data resolve.
    pub fn band_ln_tau(&self) -> (f64, f64) {
        self.band_ln_tau
    }
}

/// A residual above this fraction (rms, relative to the front end's scale)
/// is far above the noise of any usable measurement: good impedance spectra
/// and step records fit a DRT to 1 % or better (common practice).
pub const RESIDUAL_WARN_REL: f64 = 0.05;

/// A residual rms more than this many times the noise level the data show
/// is far above the noise.
///
/// Rule: the discrepancy rule's noise estimate `sigma` (Wahba's
/// `sigma^2 = ||A x - b||^2 / (m - tr H)` at the GCV minimum; see
/// [`crate::lambda::gcv::noise_variance`]) is what a fit that explains the
/// signal leaves; a residual of `3 sigma` rms is a residual sum of squares
/// of `9 m sigma^2`. For Gaussian noise that sum follows a chi-square
/// distribution with about `m - tr H` degrees of freedom, whose chance of
/// reaching 9 times its mean is below 1e-9 already at 10 degrees of freedom
/// (chi-square tail, e.g. M. Abramowitz, I. A. Stegun (1964), *Handbook of
/// Mathematical Functions*, ch. 26.4; the factor itself is common
/// practice). A residual that large means lambda smooths away signal, not
/// noise.
pub const NOISE_RATIO_WARN: f64 = 3.0;

/// Below this residual rms (a fraction of the front end's scale) no
/// measurement's noise is resolved, whatever its ratio to the estimate: a
/// noise-free synthetic spectrum has an estimate near rounding level
/// (common practice: 0.1 % is the accuracy of a good instrument channel).
pub const NOISE_CHECK_MIN_REL: f64 = 1e-3;

/// A share of the distribution's area above this fraction beyond one end
/// of the band the data resolve is reported.
///
/// Rule: the data fix the distribution only inside the band
/// (`1/(2 pi f_max)` to `1/(2 pi f_min)` for a spectrum, the first sample
/// after the step to the record length for a transient). Beyond it the
/// kernel columns are nearly flat: at the short end a process looks like a
/// series resistance, at the long end like a capacitive branch or a
/// resistance that has not yet relaxed; the grid's extension is there to
/// take the tails of processes inside the band (P. C. Hansen et al. (2013),
/// arXiv:1309.4498), and the extension prior keeps it from absorbing
/// more. More than 5 % out there means a process the measurement did not
/// reach (common practice: measure until the arcs close). On the synthetic
/// cells of `synth::cells` and the demo the share stays below
/// 1 % (see the tests).
pub const EDGE_SHARE_WARN: f64 = 0.05;

/// What the plausibility checks look at.
struct Evidence<'a> {
    coeffs: &'a [f64],
    residual_rms_rel: f64,
    lambda: &'a LambdaSelection,
    /// Residual rms of the final solve and the noise estimate, in the same
    /// scaled units.
    residual_rms: f64,
    noise_rms: Option<f64>,
    /// Shares of the area below and above the band.
    edges: (f64, f64),
    band_tau_s: (f64, f64),
    hints: &'a EdgeHints,
}

/// The shares of the area of the sampled distribution `gamma` (at `ln_tau`,
/// uniform steps) below `band.0` and above `band.1`; zeros when the
/// distribution is empty.
fn edge_shares(ln_tau: &[f64], gamma: &[f64], band: (f64, f64)) -> (f64, f64) {
    let total: f64 = gamma.iter().sum();
    if total.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
        return (0.0, 0.0);
    }
    let part = |keep: &dyn Fn(f64) -> bool| -> f64 {
        ln_tau
            .iter()
            .zip(gamma)
            .filter(|(y, _)| keep(**y))
            .map(|(_, g)| g)
            .sum::<f64>()
            / total
    };
    (part(&|y| y < band.0), part(&|y| y > band.1))
}

/// Doubts about a result, each with its rule:
/// - the distribution is empty (every coefficient zero: the series terms
///   alone explain the data);
/// - the residual exceeds [`RESIDUAL_WARN_REL`];
/// - the residual rms exceeds [`NOISE_RATIO_WARN`] times the noise level the
///   discrepancy rule estimates, when a rule chose lambda (so an estimate
///   exists), the choice was not raised to the floor (a designed minimum of
///   smoothing) and the residual is above [`NOISE_CHECK_MIN_REL`];
/// - more than [`EDGE_SHARE_WARN`] of the area lies beyond either end of the
///   band the data resolve.
fn plausibility(e: &Evidence) -> Vec<String> {
    let mut out = Vec::new();
    let lambda = e.lambda;
    if e.coeffs.iter().all(|c| *c == 0.0) {
        let why = if lambda.rule.is_none() {
            format!(
                "; the fixed lambda = {:.3e} may be too large",
                lambda.lambda
            )
        } else {
            String::new()
        };
        out.push(format!(
            "the distribution is empty (every coefficient is zero): the fit uses the series terms alone{why}"
        ));
    }
    if e.residual_rms_rel > RESIDUAL_WARN_REL {
        out.push(format!(
            "the fit misses the data by {:.1} % rms (more than {:.0} %): the distribution does \
             not describe this measurement; check the data, their signs and the model options",
            100.0 * e.residual_rms_rel,
            100.0 * RESIDUAL_WARN_REL
        ));
    }
    if let (Some(noise), Some(rule)) = (e.noise_rms, lambda.rule)
        && !lambda.floored
        && e.residual_rms > NOISE_CHECK_MIN_REL
        && e.residual_rms > NOISE_RATIO_WARN * noise
    {
        out.push(format!(
            "the residual ({:.2} % rms of the scaled data) is {:.1} times the noise level the \
             data show around their best fit ({:.2} %; more than {NOISE_RATIO_WARN:.0} times): \
             lambda = {:.3e} ({rule}) smooths away signal, not only noise; try another rule or \
             a smaller lambda",
            100.0 * e.residual_rms,
            e.residual_rms / noise,
            100.0 * noise,
            lambda.lambda
        ));
    }
    let (short, long) = e.edges;
    let h = e.hints;
    if short > EDGE_SHARE_WARN {
        out.push(format!(
            "{:.1} % of the distribution's area lies at time constants below {:.3e} s ({}), \
             the fastest the data resolve (more than {:.0} %): it is extrapolated, not \
             measured; {}",
            100.0 * short,
            e.band_tau_s.0,
            h.short_name,
            100.0 * EDGE_SHARE_WARN,
            h.short_hint
        ));
    }
    if long > EDGE_SHARE_WARN {
        out.push(format!(
            "{:.1} % of the distribution's area lies at time constants above {:.3e} s ({}), \
             the slowest the data resolve (more than {:.0} %): it is extrapolated, not \
             measured; {}",
            100.0 * long,
            e.band_tau_s.1,
            h.long_name,
            100.0 * EDGE_SHARE_WARN,
            h.long_hint
        ));
    }
    out
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
        let Some((lo, hi)) = basis.reach(y, reach) else {
            continue;
        };
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

/// The distribution `sum_j c_j phi_j(ln tau)` sampled `oversample` times per
/// grid step, from `min(half support, 3 steps)` before the first centre to as
/// far past the last, so the whole area is sampled. Returns `(ln tau, values)`.
///
/// # Panics
/// When `coeffs` does not hold one value per basis function.
pub fn sample_distribution(
    basis: &Basis,
    coeffs: &[f64],
    oversample: usize,
) -> (Vec<f64>, Vec<f64>) {
    assert_eq!(
        coeffs.len(),
        basis.len(),
        "one coefficient per basis function"
    );
    let ln_tau = sample_points(basis, oversample);
    let values = basis.evaluate(coeffs, &ln_tau);
    (ln_tau, values)
}

/// The `ln tau` of the output samples (see [`sample_distribution`]).
fn sample_points(basis: &Basis, oversample: usize) -> Vec<f64> {
    let n = basis.len();
    let step = basis.step() / oversample.max(1) as f64;
    let reach = basis.half_support().min(3.0 * basis.step());
    let y0 = basis.centers()[0] - reach;
    let y1 = basis.centers()[n - 1] + reach;
    let n_out = ((y1 - y0) / step).round() as usize + 1;
    (0..n_out).map(|i| y0 + step * i as f64).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::kernel::BasisKind;

    fn assert_send_sync<T: Send + Sync>() {}

    #[test]
    fn plans_are_shareable_across_threads() {
        assert_send_sync::<Plan>();
        assert_send_sync::<super::super::SpectrumPlan>();
        assert_send_sync::<super::super::TransientPlan>();
    }

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

    /// The plan's precomputed sampler gives exactly the values of the
    /// direct evaluation, for both bases.
    #[test]
    fn sampler_matches_direct_evaluation() {
        let g = TauGrid::new(1e-5, 1e1, 10.0).unwrap();
        for kind in [BasisKind::Gaussian, BasisKind::Hat] {
            let basis = Basis::new(kind, &g);
            let c: Vec<f64> = (0..basis.len())
                .map(|j| ((j * 7919) % 13) as f64 * 0.1)
                .collect();
            let (y, direct) = sample_distribution(&basis, &c, 5);
            let s = Sampler::new(&basis, 5);
            assert_eq!(s.ln_tau, y);
            let fast = s.evaluate(&c);
            for (a, b) in direct.iter().zip(&fast) {
                assert_eq!(a.to_bits(), b.to_bits(), "{a} vs {b}");
            }
        }
    }

    fn rule_selection(floored: bool) -> LambdaSelection {
        LambdaSelection {
            lambda: 1e-2,
            rule: Some(crate::lambda::LambdaRule::Discrepancy),
            rule_choice: Some(1e-2),
            floored,
            grid_edge: None,
            curves: None,
        }
    }

    fn hints() -> EdgeHints {
        EdgeHints {
            short_name: "SHORT",
            short_hint: "short hint".into(),
            long_name: "LONG",
            long_hint: "long hint".into(),
        }
    }

    /// Evidence of a clean fit: a non-empty distribution, 1 % residual at
    /// the noise level, nothing beyond the band.
    fn clean<'a>(lambda: &'a LambdaSelection, hints: &'a EdgeHints) -> Evidence<'a> {
        Evidence {
            coeffs: &[0.0, 1.0, 0.0],
            residual_rms_rel: 0.01,
            lambda,
            residual_rms: 0.01,
            noise_rms: Some(0.01),
            edges: (0.0, 0.0),
            band_tau_s: (1e-6, 1.0),
            hints,
        }
    }

    /// The residual-to-noise rule fires above 3 times the estimate, only
    /// when an estimate exists, the choice was not floored and the residual
    /// is above 0.1 %; its message gives both numbers.
    #[test]
    fn residual_far_above_the_noise_is_reported_at_its_threshold() {
        let (sel, h) = (rule_selection(false), hints());
        assert!(plausibility(&clean(&sel, &h)).is_empty());
        let over = Evidence {
            residual_rms: 0.031,
            ..clean(&sel, &h)
        };
        let w = plausibility(&over);
        assert_eq!(w.len(), 1, "{w:?}");
        assert!(
            w[0].starts_with(
                "the residual (3.10 % rms of the scaled data) is 3.1 times the noise level"
            ),
            "{}",
            w[0]
        );
        assert!(w[0].contains("(1.00 %; more than 3 times)"), "{}", w[0]);
        assert!(w[0].contains("(discrepancy)"), "{}", w[0]);
        let under = Evidence {
            residual_rms: 0.029,
            ..clean(&sel, &h)
        };
        assert!(plausibility(&under).is_empty());
        // No estimate (fixed lambda), a floored choice, or a residual under
        // 0.1 %: no verdict.
        let none = Evidence {
            noise_rms: None,
            ..over
        };
        assert!(plausibility(&none).is_empty());
        let floored = rule_selection(true);
        assert!(
            plausibility(&Evidence {
                lambda: &floored,
                ..over
            })
            .is_empty()
        );
        let tiny = Evidence {
            residual_rms: 9e-4,
            noise_rms: Some(1e-6),
            ..clean(&sel, &h)
        };
        assert!(plausibility(&tiny).is_empty());
    }

    /// More than 5 % of the area beyond either end of the band is reported
    /// with the front end's hint; 5 % or less is not.
    #[test]
    fn mass_beyond_the_band_is_reported_at_its_threshold() {
        let (sel, h) = (rule_selection(false), hints());
        let at = Evidence {
            edges: (0.05, 0.05),
            ..clean(&sel, &h)
        };
        assert!(plausibility(&at).is_empty());
        let short = Evidence {
            edges: (0.051, 0.0),
            ..clean(&sel, &h)
        };
        let w = plausibility(&short);
        assert_eq!(
            w,
            vec![
                "5.1 % of the distribution's area lies at time constants below 1.000e-6 s \
                 (SHORT), the fastest the data resolve (more than 5 %): it is extrapolated, not \
                 measured; short hint"
                    .to_string()
            ]
        );
        let long = Evidence {
            edges: (0.0, 0.2),
            ..clean(&sel, &h)
        };
        let w = plausibility(&long);
        assert_eq!(w.len(), 1, "{w:?}");
        assert!(
            w[0].starts_with(
                "20.0 % of the distribution's area lies at time constants above 1.000e0 s (LONG)"
            ),
            "{}",
            w[0]
        );
        assert!(w[0].ends_with("long hint"), "{}", w[0]);
    }

    /// The shares are the parts of the sampled area below and above the
    /// band; an empty distribution has none.
    #[test]
    fn edge_shares_split_the_sampled_area() {
        let y = [0.0, 1.0, 2.0, 3.0, 4.0];
        let g = [1.0, 2.0, 3.0, 0.0, 4.0];
        let (lo, hi) = edge_shares(&y, &g, (0.5, 3.5));
        assert!((lo - 0.1).abs() < 1e-15, "{lo}");
        assert!((hi - 0.4).abs() < 1e-15, "{hi}");
        assert_eq!(edge_shares(&y, &[0.0; 5], (0.5, 3.5)), (0.0, 0.0));
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
