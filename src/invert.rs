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
use crate::kernel::{Basis, ImpedanceKernel};
use crate::lambda::LambdaRule;
pub use crate::lambda::{LambdaChoice, LambdaCurves};
use crate::peaks::{Peak, find_peaks};
pub use crate::regularise::{DEFAULT_RULE, DrtOptions, SolveInfo};
use crate::regularise::{Regularised, regularise, sample_distribution, with_extension_prior};
use crate::solve::Tikhonov;
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

/// Parameters of an inversion: the shared [`DrtOptions`] and the
/// spectrum's own model choices. See [`InvertParams::default`].
#[derive(Clone, Debug, PartialEq)]
pub struct InvertParams {
    /// Grid, basis, penalty, lambda and peak options.
    pub drt: DrtOptions,
    /// Residual weighting.
    pub weighting: Weighting,
    /// Series inductance.
    pub inductance: InductanceMode,
    /// Fit a series capacitance (blocking electrodes).
    pub series_capacitance: bool,
}

impl Default for InvertParams {
    /// [`DrtOptions::default`], modulus weighting, automatic inductance, no
    /// series capacitance.
    fn default() -> Self {
        Self {
            drt: DrtOptions::default(),
            weighting: Weighting::Modulus,
            inductance: InductanceMode::Auto,
            series_capacitance: false,
        }
    }
}

impl InvertParams {
    /// Checks every parameter, naming the offending one.
    pub fn validate(&self) -> Result<()> {
        self.drt.validate()
    }
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
    let band_tau_s = (1.0 / (2.0 * PI * f_max), 1.0 / (2.0 * PI * f_min));
    let grid = p.drt.grid(band_tau_s.0, band_tau_s.1)?;
    let basis = Basis::new(p.drt.basis, &grid);
    let gram = basis.gram(p.drt.penalty_order)?;
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
    let problem = with_extension_prior(
        Tikhonov::new(a, b, penalty),
        &basis,
        (band_tau_s.0.ln(), band_tau_s.1.ln()),
        p.drt.extension_prior,
    );
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

/// Inverts a spectrum onto a DRT.
///
/// Fails when the parameters are invalid, the grid cannot be built, or the
/// spectrum has fewer than 3 points or is zero everywhere.
pub fn invert(spectrum: &Spectrum, params: &InvertParams) -> Result<Inversion> {
    params.validate()?;
    let d = build(spectrum, params)?;
    let re: Vec<usize> = (0..d.m).collect();
    let im: Vec<usize> = (d.m..2 * d.m).collect();
    let reg = regularise(&d.problem, &params.drt, (&re, &im));
    finish(spectrum, params, d, reg)
}

fn finish(
    spectrum: &Spectrum,
    params: &InvertParams,
    d: Design,
    reg: Regularised,
) -> Result<Inversion> {
    let sol = &reg.solution;
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

    let (ln_tau, gamma_ohm) = sample_distribution(&d.basis, &coeffs_ohm, params.drt.oversample);
    let mut peak_opts = params.drt.peaks;
    if peak_opts.min_area <= 0.0 {
        // A process whose resistance is below ~3 times the absolute noise of
        // the fit cannot be told from the residual (common practice).
        let mut sorted = modulus.clone();
        sorted.sort_by(f64::total_cmp);
        peak_opts.min_area = 3.0 * residual_rms_rel * sorted[m / 2];
    }
    let peaks = find_peaks(&ln_tau, &gamma_ohm, &peak_opts);
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
        lambda_rule: reg.rule,
        lambda_floored: reg.floored,
        fit_re_ohm,
        fit_im_ohm,
        residual_re_rel,
        residual_im_rel,
        residual_rms_rel,
        peaks,
        info: reg.info(&d.problem),
        curves: reg.curves,
    })
}
