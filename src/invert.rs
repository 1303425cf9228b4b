//! Impedance spectrum to distribution of relaxation times: the full pipeline.
//!
//! Model (a Fredholm integral equation of the first kind):
//!
//! $$ Z(\omega) = R_\infty + j\omega L + \frac{1}{j\omega C_s}
//!    + \int_{-\infty}^{\infty} \frac{\gamma(\ln\tau)}{1 + j\omega\tau}\, d\ln\tau $$
//!
//! with `gamma >= 0` (ohm per unit ln tau), `R_inf >= 0`, an optional series
//! inductance `L >= 0` and an optional series capacitance `C_s` for blocking
//! electrodes. Discretised on a basis (see [`crate::kernel`]) and solved as
//!
//! $$ \min_{x \ge 0} \lVert W (K x - z) \rVert^2 + \lambda \int (\gamma^{(k)})^2 d\ln\tau $$
//!
//! where `W` weights each frequency by `1/|Z|` (default) or uniformly, and the
//! penalty is the exact Gram matrix of the k-th derivative of the basis.
//!
//! Scaling: the unknowns are solved in units of `z_scale = max |Z|` (and the
//! inductance and capacitance columns in units of `1/omega_max` and
//! `omega_min`), so `lambda` is dimensionless and a spectrum multiplied by any
//! factor gives the same `lambda` and a DRT multiplied by that factor. All
//! values returned are in physical units.

use crate::grid::TauGrid;
use crate::io::Spectrum;
use crate::kernel::{Basis, BasisKind, ImpedanceKernel};
use crate::lambda::{self, LambdaGrid, LambdaPath, LambdaRule, RuleCurve};
use crate::peaks::{Peak, PeakOptions, find_peaks};
use crate::solve::{SolveStatus, Tikhonov, TikhonovSolution};
use crate::{Error, Result};
use nalgebra::{DMatrix, DVector};
use std::f64::consts::PI;

/// How residuals are weighted.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Weighting {
    /// Each point divided by its modulus |Z_i| (relative errors; default).
    Modulus,
    /// All points weighted equally.
    Unit,
}

/// Whether a series inductance is part of the model.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum InductanceMode {
    /// On when the highest two frequencies both show Z'' > 0.
    Auto,
    /// Always fitted.
    On,
    /// Never fitted.
    Off,
}

/// How `lambda` is set.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum LambdaChoice {
    /// Chosen by a rule over the lambda grid.
    Rule(LambdaRule),
    /// Fixed by the user.
    Fixed(f64),
}

/// The default rule, chosen by the accuracy benchmark in `docs/lambda-rules.md`.
pub const DEFAULT_RULE: LambdaRule = LambdaRule::Discrepancy;

/// Parameters of an inversion. See [`InvertParams::default`] for the defaults.
#[derive(Clone, Debug, PartialEq)]
pub struct InvertParams {
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
    /// Residual weighting.
    pub weighting: Weighting,
    /// Series inductance.
    pub inductance: InductanceMode,
    /// Fit a series capacitance (blocking electrodes).
    pub series_capacitance: bool,
    /// How lambda is chosen.
    pub lambda: LambdaChoice,
    /// The grid searched by the rules (dimensionless lambda).
    pub lambda_grid: LambdaGrid,
    /// Lower bound on the chosen lambda (see docs/lambda-rules.md).
    pub lambda_floor: f64,
    /// Compute every rule's curve, not only the one that decides.
    pub all_curves: bool,
    /// Peak reporting thresholds (`min_r_ohm` is set from the fit when 0).
    pub peaks: PeakOptions,
    /// Output samples of gamma per grid step.
    pub oversample: usize,
    /// Weight of the prior against DRT mass beyond the measured band,
    /// relative to the data's scale (0 switches it off).
    pub extension_prior: f64,
}

impl Default for InvertParams {
    fn default() -> Self {
        Self {
            per_decade: 10.0,
            extend_decades: 1.0,
            tau_min_s: None,
            tau_max_s: None,
            basis: BasisKind::Gaussian,
            penalty_order: 0,
            weighting: Weighting::Modulus,
            inductance: InductanceMode::Auto,
            series_capacitance: false,
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

impl InvertParams {
    /// Checks every parameter, naming the offending one.
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
}

/// Every rule's curve over the lambda grid.
#[derive(Clone, Debug, serde::Serialize)]
pub struct LambdaCurves {
    /// The grid.
    pub lambda: Vec<f64>,
    /// `||W(Kx - z)||^2` at each grid point.
    pub residual_sq: Vec<f64>,
    /// Penalty `x'Mx` at each grid point.
    pub penalty_sq: Vec<f64>,
    /// Effective number of parameters (influence-matrix trace).
    pub dof: Vec<f64>,
    /// One curve per rule that was computed.
    pub rules: Vec<RuleCurve>,
}

/// Diagnostics of the final solve.
#[derive(Clone, Debug, serde::Serialize)]
pub struct SolveInfo {
    /// Active-set iterations of the final solve.
    pub iterations: usize,
    /// Whether every solve converged.
    pub status: SolveStatus,
    /// Number of equations (2 per frequency).
    pub equations: usize,
    /// Number of unknowns.
    pub unknowns: usize,
    /// Effective number of parameters at the final lambda.
    pub dof: f64,
}

/// Result of [`invert`], in physical units.
#[derive(Clone, Debug)]
pub struct Inversion {
    /// The discretisation grid (basis centres).
    pub grid: TauGrid,
    /// Basis coefficients (ohm).
    pub coeffs_ohm: Vec<f64>,
    /// Output tau samples (s), ascending; `oversample` per grid step.
    pub tau_s: Vec<f64>,
    /// gamma(ln tau) at `tau_s` (ohm per unit ln tau).
    pub gamma_ohm: Vec<f64>,
    /// Series resistance (ohm).
    pub r_inf_ohm: f64,
    /// Series inductance (H), when modelled.
    pub inductance_h: Option<f64>,
    /// Series capacitance (F), when modelled; infinite when the fit found none.
    pub series_capacitance_f: Option<f64>,
    /// Polarisation resistance, the integral of gamma (ohm).
    pub r_pol_ohm: f64,
    /// The lambda used.
    pub lambda: f64,
    /// The rule that chose it, or `None` when fixed.
    pub lambda_rule: Option<LambdaRule>,
    /// Whether the rule's choice was raised to the floor.
    pub lambda_floored: bool,
    /// Fitted real part at each frequency (ohm).
    pub fit_re_ohm: Vec<f64>,
    /// Fitted imaginary part (ohm).
    pub fit_im_ohm: Vec<f64>,
    /// (fit - data)/|Z|, real part.
    pub residual_re_rel: Vec<f64>,
    /// (fit - data)/|Z|, imaginary part.
    pub residual_im_rel: Vec<f64>,
    /// RMS of both relative residuals, as a fraction.
    pub residual_rms_rel: f64,
    /// Reported peaks, ascending tau.
    pub peaks: Vec<Peak>,
    /// Rule curves, when a rule was used.
    pub curves: Option<LambdaCurves>,
    /// Solver diagnostics.
    pub info: SolveInfo,
}

/// The assembled, scaled problem for one spectrum.
struct Design {
    problem: Tikhonov,
    basis: Basis,
    grid: TauGrid,
    z_scale: f64,
    omega_max: f64,
    omega_min: f64,
    n_gamma: usize,
    col_l: Option<usize>,
    col_c: Option<usize>,
    weight: Vec<f64>,
    /// |Z_i| of the data (ohm).
    modulus: Vec<f64>,
    m: usize,
}

/// Whether the highest two frequencies both show an inductive (positive)
/// imaginary part.
pub fn looks_inductive(spectrum: &Spectrum) -> bool {
    let n = spectrum.len();
    n >= 2 && spectrum.z_im_ohm[n - 1] > 0.0 && spectrum.z_im_ohm[n - 2] > 0.0
}

fn build(spectrum: &Spectrum, p: &InvertParams) -> Result<Design> {
    let m = spectrum.len();
    if m < 3 {
        return Err(Error::Config(format!(
            "need at least 3 frequencies to invert, found {m}"
        )));
    }
    let f_min = spectrum.frequency_hz[0];
    let f_max = spectrum.frequency_hz[m - 1];
    let default = TauGrid::for_band(f_min, f_max, p.per_decade, p.extend_decades)?;
    let grid = match (p.tau_min_s, p.tau_max_s) {
        (None, None) => default,
        (lo, hi) => {
            let d = default.tau_s();
            TauGrid::new(
                lo.unwrap_or(d[0]),
                hi.unwrap_or(d[d.len() - 1]),
                p.per_decade,
            )?
        }
    };
    let basis = Basis::new(p.basis, &grid);
    let gram = basis.gram(p.penalty_order)?;
    let omega: Vec<f64> = spectrum.frequency_hz.iter().map(|f| 2.0 * PI * f).collect();
    let kernel = ImpedanceKernel::new(&basis, &omega);
    let modulus: Vec<f64> = spectrum
        .z_re_ohm
        .iter()
        .zip(&spectrum.z_im_ohm)
        .map(|(r, i)| r.hypot(*i))
        .collect();
    let z_scale = modulus.iter().copied().fold(0.0, f64::max);
    if z_scale.is_nan() || z_scale <= 0.0 {
        return Err(Error::Config(
            "the impedance is zero at every frequency".into(),
        ));
    }
    let weight: Vec<f64> = match p.weighting {
        Weighting::Modulus => modulus
            .iter()
            .map(|&z| 1.0 / z.max(1e-12 * z_scale))
            .collect(),
        Weighting::Unit => vec![1.0 / z_scale; m],
    };
    let with_l = match p.inductance {
        InductanceMode::On => true,
        InductanceMode::Off => false,
        InductanceMode::Auto => looks_inductive(spectrum),
    };
    let n_gamma = basis.len();
    let mut ncols = n_gamma + 1;
    let col_l = with_l.then(|| {
        ncols += 1;
        ncols - 1
    });
    let col_c = p.series_capacitance.then(|| {
        ncols += 1;
        ncols - 1
    });
    let omega_max = omega[m - 1];
    let omega_min = omega[0];
    let mut a = DMatrix::zeros(2 * m, ncols);
    let mut b = DVector::zeros(2 * m);
    for i in 0..m {
        let w = weight[i] * z_scale;
        for j in 0..n_gamma {
            a[(i, j)] = w * kernel.re[(i, j)];
            a[(m + i, j)] = w * kernel.im[(i, j)];
        }
        a[(i, n_gamma)] = w;
        if let Some(c) = col_l {
            a[(m + i, c)] = w * omega[i] / omega_max;
        }
        if let Some(c) = col_c {
            a[(m + i, c)] = -w * omega_min / omega[i];
        }
        b[i] = weight[i] * spectrum.z_re_ohm[i];
        b[m + i] = weight[i] * spectrum.z_im_ohm[i];
    }
    let mut penalty = DMatrix::zeros(ncols, ncols);
    penalty
        .view_mut((0, 0), (n_gamma, n_gamma))
        .copy_from(&gram);
    let mut problem = Tikhonov::new(a, b, penalty);
    if p.extension_prior > 0.0 {
        let band = (
            (2.0 * PI * f_max).recip().ln(),
            (2.0 * PI * f_min).recip().ln(),
        );
        let ext = extension_gram(&basis, band);
        // Diagonal of A'A from the column norms: no second cross product.
        let data_scale = (0..n_gamma)
            .map(|j| problem.design().column(j).norm_squared())
            .sum::<f64>()
            / (n_gamma as f64 * basis.self_overlap());
        let mut prior = DMatrix::zeros(ncols, ncols);
        prior
            .view_mut((0, 0), (n_gamma, n_gamma))
            .copy_from(&(ext * (p.extension_prior * data_scale)));
        problem = problem.with_prior(prior);
    }
    Ok(Design {
        problem,
        basis,
        grid,
        z_scale,
        omega_max,
        omega_min,
        n_gamma,
        col_l,
        col_c,
        weight,
        modulus,
        m,
    })
}

/// The scaled regularised problem `min ||A x - b||^2 + lambda x'Mx, x >= 0`
/// that [`invert`] solves for this spectrum, for independent solvers and
/// diagnostics. Columns: basis coefficients, then R_inf, then the inductance
/// and series-capacitance columns when modelled; all in units of `max |Z|`.
pub fn problem(spectrum: &Spectrum, params: &InvertParams) -> Result<Tikhonov> {
    params.validate()?;
    Ok(build(spectrum, params)?.problem)
}

/// Gram matrix of the extension prior,
/// `P_ij = integral w(y) phi_i(y) phi_j(y) dy` with `w(y)` the squared distance
/// in decades from `y = ln tau` to the measured band `[band.0, band.1]`
/// (zero inside). Mass beyond the band is allowed but costs more the further
/// out it sits, so the extension reduces truncation error without absorbing
/// noise as resistance (our choice; see docs/lambda-rules.md).
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
            (band.0 - y) / std::f64::consts::LN_10
        } else if y > band.1 {
            (y - band.1) / std::f64::consts::LN_10
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

/// Inverts a spectrum onto a DRT.
///
/// Fails when the parameters are invalid, the grid cannot be built, or the
/// spectrum has fewer than 3 points or is zero everywhere.
pub fn invert(spectrum: &Spectrum, params: &InvertParams) -> Result<Inversion> {
    params.validate()?;
    let d = build(spectrum, params)?;
    let mut warm: Vec<usize> = Vec::new();
    let (lambda_used, rule, floored, curves, all_converged) = match params.lambda {
        LambdaChoice::Fixed(v) => (v, None, false, None, true),
        LambdaChoice::Rule(rule) => {
            let lambdas = params.lambda_grid.values();
            let path = LambdaPath::trace(&d.problem, &lambdas);
            let mut rules = Vec::new();
            let wanted: Vec<LambdaRule> = if params.all_curves {
                LambdaRule::ALL.to_vec()
            } else {
                vec![rule]
            };
            for r in wanted {
                rules.push(match r {
                    LambdaRule::Gcv => lambda::gcv::curve(&path),
                    LambdaRule::Lcurve => lambda::lcurve::curve(&path),
                    LambdaRule::Discrepancy => lambda::discrepancy::curve(&path),
                    LambdaRule::Recv => {
                        let re: Vec<usize> = (0..d.m).collect();
                        let im: Vec<usize> = (d.m..2 * d.m).collect();
                        lambda::recv::curve(&d.problem, &re, &im, &lambdas)
                    }
                });
            }
            let chosen = rules
                .iter()
                .find(|c| c.rule == rule)
                .and_then(|c| c.chosen)
                .unwrap_or(params.lambda_floor.max(params.lambda_grid.min));
            let floored = chosen < params.lambda_floor;
            let used = chosen.max(params.lambda_floor);
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
                chosen.max(params.lambda_floor),
                Some(rule),
                floored,
                Some(curves),
                path.all_converged(),
            )
        }
    };
    let sol = d.problem.solve(lambda_used, &warm);
    let dof = d.problem.influence_trace(lambda_used, &sol.free);
    finish(
        spectrum,
        params,
        d,
        sol,
        dof,
        rule,
        floored,
        curves,
        all_converged,
    )
}

#[allow(clippy::too_many_arguments)]
fn finish(
    spectrum: &Spectrum,
    params: &InvertParams,
    d: Design,
    sol: TikhonovSolution,
    dof: f64,
    rule: Option<LambdaRule>,
    floored: bool,
    curves: Option<LambdaCurves>,
    all_converged: bool,
) -> Result<Inversion> {
    let m = d.m;
    let coeffs_ohm: Vec<f64> = sol.x[..d.n_gamma].iter().map(|v| v * d.z_scale).collect();
    let r_inf_ohm = sol.x[d.n_gamma] * d.z_scale;
    let inductance_h = d.col_l.map(|c| sol.x[c] * d.z_scale / d.omega_max);
    let series_capacitance_f = d.col_c.map(|c| {
        let inv_c = sol.x[c] * d.z_scale * d.omega_min;
        if inv_c > 0.0 {
            1.0 / inv_c
        } else {
            f64::INFINITY
        }
    });
    let pred = d.problem.predict(&sol.x);
    let fit_re_ohm: Vec<f64> = (0..m).map(|i| pred[i] / d.weight[i]).collect();
    let fit_im_ohm: Vec<f64> = (0..m).map(|i| pred[m + i] / d.weight[i]).collect();
    let modulus: Vec<f64> = d.modulus.iter().map(|z| z.max(1e-300)).collect();
    let residual_re_rel: Vec<f64> = (0..m)
        .map(|i| (fit_re_ohm[i] - spectrum.z_re_ohm[i]) / modulus[i])
        .collect();
    let residual_im_rel: Vec<f64> = (0..m)
        .map(|i| (fit_im_ohm[i] - spectrum.z_im_ohm[i]) / modulus[i])
        .collect();
    let residual_rms_rel = ((residual_re_rel.iter().map(|r| r * r).sum::<f64>()
        + residual_im_rel.iter().map(|r| r * r).sum::<f64>())
        / (2 * m) as f64)
        .sqrt();
    let r_pol_ohm = coeffs_ohm.iter().sum::<f64>() * d.basis.integral();

    // Output samples: the grid refined `oversample` times and extended by the
    // basis support so the whole area is sampled.
    let step = d.basis.step() / params.oversample as f64;
    let reach = d.basis.half_support().min(3.0 * d.basis.step());
    let y0 = d.basis.centers()[0] - reach;
    let y1 = d.basis.centers()[d.n_gamma - 1] + reach;
    let n_out = ((y1 - y0) / step).round() as usize + 1;
    let ln_tau: Vec<f64> = (0..n_out).map(|i| y0 + step * i as f64).collect();
    let gamma_ohm = d.basis.evaluate(&coeffs_ohm, &ln_tau);
    let mut peak_opts = params.peaks;
    if peak_opts.min_r_ohm <= 0.0 {
        // A process whose resistance is below ~3 times the absolute noise of
        // the fit cannot be told from the residual (common practice).
        let mut sorted = modulus.clone();
        sorted.sort_by(f64::total_cmp);
        peak_opts.min_r_ohm = 3.0 * residual_rms_rel * sorted[m / 2];
    }
    let peaks = find_peaks(&ln_tau, &gamma_ohm, &peak_opts);
    let status = if all_converged && sol.status == SolveStatus::Converged {
        SolveStatus::Converged
    } else {
        SolveStatus::MaxIterations
    };
    Ok(Inversion {
        tau_s: ln_tau.iter().map(|y| y.exp()).collect(),
        gamma_ohm,
        grid: d.grid,
        coeffs_ohm,
        r_inf_ohm,
        inductance_h,
        series_capacitance_f,
        r_pol_ohm,
        lambda: sol.lambda,
        lambda_rule: rule,
        lambda_floored: floored,
        fit_re_ohm,
        fit_im_ohm,
        residual_re_rel,
        residual_im_rel,
        residual_rms_rel,
        peaks,
        curves,
        info: SolveInfo {
            iterations: sol.iterations,
            status,
            equations: 2 * m,
            unknowns: d.problem.ncols(),
            dof,
        },
    })
}
