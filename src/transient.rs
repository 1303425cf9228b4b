//! Step transients to a distribution of time constants: the same regularised,
//! non-negative inversion as for spectra, on time-domain kernels.
//!
//! # Models
//! With `y = ln tau` and `t > 0` the time since the step:
//!
//! - **Current step** of amplitude `I` (galvanostatic):
//!   $$ v(t) - v(0^-) = I \Bigl[R_\infty + \int \gamma(y)\,(1 - e^{-t/\tau})\,dy \;\bigl(+\, t / C\bigr)\Bigr] $$
//!   `gamma` in ohm is the impedance DRT of the same system: a Voigt element
//!   R || C has impedance R/(1 + j w tau) and step response R (1 - e^{-t/tau})
//!   (Laplace transform of the impedance times I/s; textbook first-order
//!   network). The optional `t/C` is a blocking series capacitance.
//! - **Relaxation** after a long constant current `I` is interrupted at t = 0:
//!   $$ v(t) = v_\infty + I \int \gamma(y)\, e^{-t/\tau}\,dy $$
//!   with the final value `v_inf` an unknown of the fit. When the pre-step
//!   voltage `v(0-)` is known, the series resistance follows from the
//!   instantaneous jump: `R_inf = (v(0-) - v_inf)/I - R_pol`.
//! - **Voltage step** of amplitude `U` (potentiostatic):
//!   $$ i(t) - i(0^-) = U \Bigl[G_\infty + \int g(y)\, e^{-t/\tau}\,dy\Bigr] $$
//!   with `g >= 0` in siemens: the distribution of the admittance, not the
//!   impedance DRT. The admittance of a network of resistors and capacitors
//!   has non-negative residues in its partial-fraction (Foster) form
//!   (E. A. Guillemin (1957), *Synthesis of Passive Networks*, Wiley, ch. 4;
//!   recalled from memory), so its step current is a non-negative mixture of
//!   decaying exponentials. A series R-C gives `i = (U/R) e^{-t/(RC)}`: one
//!   line of weight 1/R at tau = RC.
//!
//! The baseline `v(0-)` (or `i(0-)`) comes from the samples at t < 0, or is
//! given; without either the values are taken as changes from the pre-step
//! state. From post-step samples alone the series resistance and the
//! baseline cannot both be found: both add a constant to every sample.
//!
//! # Discretisation
//! The distribution is expanded on the same basis as for spectra, the kernel
//! columns are those of [`crate::kernel::step`] evaluated at the binned
//! times of [`crate::io::transient`], each row is weighted by the square
//! root of its sample count (normalised to a mean weight of 1), and the
//! unknowns are scaled by the largest response `max |y|` so that `lambda` is
//! dimensionless and comparable with the spectrum case. The tau grid spans
//! the first bin's time to the last, extended as for spectra.
//!
//! # Example
//! ```
//! use taumap::io::transient::{BinOptions, BinnedTransient};
//! use taumap::transient::{StepKind, TransientParams, invert_transient};
//!
//! // 2 ohm + Voigt(10 ohm, 1 ms) under a 0.1 A step, 10 us sampling for 50 ms.
//! let t: Vec<f64> = (1..=5000).map(|k| k as f64 * 1e-5).collect();
//! let v: Vec<f64> = t.iter().map(|t| 0.1 * (2.0 + 10.0 * (1.0 - (-t / 1e-3).exp()))).collect();
//! let record = BinnedTransient::from_samples(&t, &v, &BinOptions::default())?;
//! let inv = invert_transient(&record, &TransientParams::new(StepKind::CurrentStep { current_a: 0.1 }))?;
//! assert_eq!(inv.peaks.len(), 1);
//! assert!((inv.peaks[0].tau_s.log10() + 3.0).abs() < 0.05);
//! assert!((inv.total - 10.0).abs() < 0.1);
//! assert!((inv.instantaneous.unwrap() - 2.0).abs() < 0.05);
//! # Ok::<(), taumap::Error>(())
//! ```

use crate::grid::TauGrid;
use crate::io::transient::{Bin, BinnedTransient, MIN_BINS, Quantity};
use crate::kernel::{Basis, StepShape, step_kernel};
use crate::lambda::{LambdaCurves, LambdaRule};
use crate::peaks::{Peak, find_peaks};
use crate::regularise::{
    DrtOptions, SolveInfo, regularise, sample_distribution, with_extension_prior,
};
use crate::solve::Tikhonov;
use crate::{Error, Result};
use nalgebra::{DMatrix, DVector};

/// The kind of step and its amplitude.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
#[serde(rename_all = "snake_case", tag = "kind")]
pub enum StepKind {
    /// Current step of `current_a` at t = 0; the voltage is measured.
    CurrentStep {
        /// Step amplitude (A); negative for a discharge step.
        current_a: f64,
    },
    /// A constant `current_a` flowed until t = 0, then was interrupted; the
    /// voltage is measured.
    Relaxation {
        /// The current before the interruption (A).
        current_a: f64,
    },
    /// Voltage step of `voltage_v` at t = 0; the current is measured.
    VoltageStep {
        /// Step amplitude (V).
        voltage_v: f64,
    },
}

impl StepKind {
    /// The step amplitude (A or V).
    pub fn amplitude(self) -> f64 {
        match self {
            StepKind::CurrentStep { current_a } | StepKind::Relaxation { current_a } => current_a,
            StepKind::VoltageStep { voltage_v } => voltage_v,
        }
    }

    /// The quantity the record holds: voltage for current steps and
    /// relaxations, current for voltage steps.
    pub fn quantity(self) -> Quantity {
        match self {
            StepKind::VoltageStep { .. } => Quantity::Current,
            _ => Quantity::Voltage,
        }
    }

    /// The unit of the distribution this step yields.
    pub fn unit(self) -> DistributionUnit {
        match self {
            StepKind::VoltageStep { .. } => DistributionUnit::Siemens,
            _ => DistributionUnit::Ohm,
        }
    }

    fn shape(self) -> StepShape {
        match self {
            StepKind::CurrentStep { .. } => StepShape::Rise,
            _ => StepShape::Decay,
        }
    }
}

/// What a distribution is measured in.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum DistributionUnit {
    /// Ohm per unit ln tau: the impedance DRT (current steps, relaxations).
    Ohm,
    /// Siemens per unit ln tau: the admittance distribution (voltage steps).
    Siemens,
}

/// Where the pre-step value came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum BaselineSource {
    /// The mean of the samples at t < 0.
    PreStepSamples,
    /// Given by the user.
    Given,
    /// Neither: the values are taken as changes from the pre-step state.
    None,
}

/// Parameters of a transient inversion.
#[derive(Clone, Debug, PartialEq)]
pub struct TransientParams {
    /// Grid, basis, penalty, lambda and peak options (shared with spectra).
    pub drt: DrtOptions,
    /// The step and its amplitude.
    pub step: StepKind,
    /// Pre-step value `v(0-)` (V) or `i(0-)` (A); overrides t < 0 samples.
    pub baseline: Option<f64>,
    /// Fit a blocking series capacitance (current steps only).
    pub series_capacitance: bool,
}

/// Default grid density for transients (points per decade of tau).
///
/// Twice the spectrum default: a step response carries no phase, so a sharp
/// process is drawn as one basis function, whose width then shows in the fit.
/// A single R || C line drawn by one Gaussian of FWHM 1.5 steps misfits its
/// own exponential by 0.27 % of the step (rms) at 10 per decade and by
/// 0.075 % at 20 (measured on the series R-C case of tests/transient.rs),
/// below the 0.1 % noise of a good potentiostat channel (our choice).
pub const TRANSIENT_PER_DECADE: f64 = 20.0;

impl TransientParams {
    /// Parameters for `step` with the default [`DrtOptions`] at
    /// [`TRANSIENT_PER_DECADE`] grid points per decade.
    pub fn new(step: StepKind) -> Self {
        Self {
            drt: DrtOptions {
                per_decade: TRANSIENT_PER_DECADE,
                ..DrtOptions::default()
            },
            step,
            baseline: None,
            series_capacitance: false,
        }
    }

    /// Checks every parameter, naming the offending one.
    pub fn validate(&self) -> Result<()> {
        self.drt.validate()?;
        let a = self.step.amplitude();
        if !(a.is_finite() && a != 0.0) {
            let name = match self.step {
                StepKind::CurrentStep { .. } => "current-step-a",
                StepKind::Relaxation { .. } => "relaxation-current-a",
                StepKind::VoltageStep { .. } => "voltage-step-v",
            };
            return Err(Error::Param {
                name,
                expected: "a finite, non-zero amplitude",
                value: a,
            });
        }
        if let Some(b) = self.baseline
            && !b.is_finite()
        {
            return Err(Error::Param {
                name: "baseline",
                expected: "a finite value",
                value: b,
            });
        }
        if self.series_capacitance && !matches!(self.step, StepKind::CurrentStep { .. }) {
            return Err(Error::Config(
                "a series capacitance can only be fitted to a current step".into(),
            ));
        }
        Ok(())
    }
}

/// Result of [`invert_transient`], in physical units.
#[derive(Clone, Debug)]
pub struct TransientInversion {
    /// The step that was inverted.
    pub step: StepKind,
    /// The unit of [`Self::distribution`] and of peak areas.
    pub unit: DistributionUnit,
    /// The discretisation grid (basis centres).
    pub grid: TauGrid,
    /// Basis coefficients (ohm or siemens).
    pub coeffs: Vec<f64>,
    /// Output tau samples (s), ascending.
    pub tau_s: Vec<f64>,
    /// The distribution at `tau_s` (ohm or siemens per unit ln tau).
    pub distribution: Vec<f64>,
    /// Integral of the distribution: R_pol (ohm) or the total decaying
    /// conductance (siemens).
    pub total: f64,
    /// Series resistance `R_inf` (ohm) for current steps, and for relaxations
    /// with a known baseline; the steady conductance `G_inf` (siemens) for
    /// voltage steps.
    pub instantaneous: Option<f64>,
    /// Series capacitance (F) when modelled; infinite when the fit found none.
    pub series_capacitance_f: Option<f64>,
    /// Final value `v_inf` (V) of a relaxation.
    pub final_value: Option<f64>,
    /// Pre-step value used (V or A), if any.
    pub baseline: Option<f64>,
    /// Where it came from.
    pub baseline_source: BaselineSource,
    /// The lambda used.
    pub lambda: f64,
    /// The rule that chose it, or `None` when fixed.
    pub lambda_rule: Option<LambdaRule>,
    /// Whether the rule's choice was raised to the floor.
    pub lambda_floored: bool,
    /// Mean time of each bin (s).
    pub time_s: Vec<f64>,
    /// Samples in each bin.
    pub counts: Vec<usize>,
    /// Mean measured value of each bin (V or A).
    pub measured: Vec<f64>,
    /// Fitted value at each bin (V or A).
    pub fitted: Vec<f64>,
    /// Size of the step response in the measured unit (V or A):
    /// `|amplitude| * max |y|`, the largest change the fit explains.
    pub response_span: f64,
    /// (fitted - measured) / `response_span` per bin.
    pub residual_rel: Vec<f64>,
    /// RMS over the bins of `residual_rel`, as a fraction.
    pub residual_rms_rel: f64,
    /// Reported peaks, ascending tau; areas in [`Self::unit`].
    pub peaks: Vec<Peak>,
    /// Rule curves, when a rule was used.
    pub curves: Option<LambdaCurves>,
    /// Solver diagnostics.
    pub info: SolveInfo,
    /// Doubts about the input worth showing the user (e.g. a response moving
    /// against the step's sign); empty when none.
    pub warnings: Vec<String>,
}

/// The assembled, scaled problem for one transient.
struct Design {
    problem: Tikhonov,
    basis: Basis,
    grid: TauGrid,
    n_gamma: usize,
    col_c: Option<usize>,
    /// Row weights `w_i` (b_i = w_i * d_i).
    weight: Vec<f64>,
    /// Largest |d_i|, the unit of the unknowns.
    y_scale: f64,
    /// Offset subtracted from y before the fit (relaxation reference).
    y_ref: f64,
    baseline: Option<f64>,
    baseline_source: BaselineSource,
    t_max: f64,
    warnings: Vec<String>,
}

fn build(record: &BinnedTransient, p: &TransientParams) -> Result<Design> {
    let bins: &[Bin] = &record.bins;
    let m = bins.len();
    if m < MIN_BINS {
        return Err(Error::Config(format!(
            "need samples after the step in at least {MIN_BINS} time bins, found {m}"
        )));
    }
    let (baseline, baseline_source) = match (p.baseline, record.pre_step_mean) {
        (Some(b), _) => (Some(b), BaselineSource::Given),
        (None, Some(b)) => (Some(b), BaselineSource::PreStepSamples),
        (None, None) => (None, BaselineSource::None),
    };
    let amp = p.step.amplitude();
    let relaxation = matches!(p.step, StepKind::Relaxation { .. });
    let y: Vec<f64> = bins
        .iter()
        .map(|b| {
            if relaxation {
                b.value / amp
            } else {
                (b.value - baseline.unwrap_or(0.0)) / amp
            }
        })
        .collect();
    // A relaxation decays towards an unknown v_inf/I <= every sample (the
    // unrelaxed part is non-negative), so y - max(y) = -s + decay with s >= 0.
    let y_ref = if relaxation {
        y.iter().copied().fold(f64::NEG_INFINITY, f64::max)
    } else {
        0.0
    };
    let d: Vec<f64> = y.iter().map(|v| v - y_ref).collect();
    let warnings = direction_warning(p.step, &y).into_iter().collect();
    let y_scale = d.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    if !(y_scale > 0.0 && y_scale.is_finite()) {
        return Err(Error::Config(
            "the response does not change over the record (every bin holds the same value)".into(),
        ));
    }
    let t: Vec<f64> = bins.iter().map(|b| b.time_s).collect();
    let var: Vec<f64> = bins.iter().map(|b| b.time_var_s2).collect();
    let t_max = t[m - 1];
    // The band the record resolves: first fitted sample to record length.
    let (band_lo, band_hi) =
        if record.first_time_s > 0.0 && record.last_time_s > record.first_time_s {
            (record.first_time_s, record.last_time_s)
        } else {
            (t[0], t_max)
        };
    let grid = p.drt.grid(band_lo, band_hi)?;
    let basis = Basis::new(p.drt.basis, &grid);
    let gram = basis.gram(p.drt.penalty_order)?;
    let kernel = step_kernel(&basis, p.step.shape(), &t, &var);
    let mean_count = bins.iter().map(|b| b.count as f64).sum::<f64>() / m as f64;
    let weight: Vec<f64> = bins
        .iter()
        .map(|b| (b.count as f64 / mean_count).sqrt() / y_scale)
        .collect();
    let n_gamma = basis.len();
    let mut ncols = n_gamma + 1;
    let col_c = p.series_capacitance.then(|| {
        ncols += 1;
        ncols - 1
    });
    let const_sign = if relaxation { -1.0 } else { 1.0 };
    let mut a = DMatrix::zeros(m, ncols);
    let mut b = DVector::zeros(m);
    for i in 0..m {
        let w = weight[i] * y_scale;
        for j in 0..n_gamma {
            a[(i, j)] = w * kernel[(i, j)];
        }
        a[(i, n_gamma)] = w * const_sign;
        if let Some(c) = col_c {
            a[(i, c)] = w * t[i] / t_max;
        }
        b[i] = weight[i] * d[i];
    }
    let mut penalty = DMatrix::zeros(ncols, ncols);
    penalty
        .view_mut((0, 0), (n_gamma, n_gamma))
        .copy_from(&gram);
    let problem = with_extension_prior(
        Tikhonov::new(a, b, penalty),
        &basis,
        (band_lo.ln(), band_hi.ln()),
        p.drt.extension_prior,
    );
    Ok(Design {
        problem,
        basis,
        grid,
        n_gamma,
        col_c,
        weight,
        y_scale,
        y_ref,
        baseline,
        baseline_source,
        t_max,
        warnings,
    })
}

/// A passive cell's response moves one way: `y = response / amplitude`
/// rises after a current step and falls during a relaxation or after a
/// voltage step (every kernel column is monotone that way). A clear move the
/// other way (the mean of the last three bins beyond the first three by more
/// than a quarter of the response's range) almost always means the sign of
/// the amplitude is wrong.
fn direction_warning(step: StepKind, y: &[f64]) -> Option<String> {
    let k = 3.min(y.len());
    let mean = |s: &[f64]| s.iter().sum::<f64>() / s.len() as f64;
    let change = mean(&y[y.len() - k..]) - mean(&y[..k]);
    let (lo, hi) = y
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(*v), b.max(*v))
        });
    let against = match step {
        StepKind::CurrentStep { .. } => -change,
        _ => change,
    };
    if against <= 0.25 * (hi - lo) {
        return None;
    }
    Some(match step {
        StepKind::CurrentStep { current_a } => format!(
            "the voltage moves against the current step of {current_a} A (a passive cell's voltage \
             follows the current: up for a positive step into the positive terminal); check the sign"
        ),
        StepKind::Relaxation { current_a } => format!(
            "the voltage moves the way the interrupted current of {current_a} A would drive it, \
             not back towards rest; check the sign of the current"
        ),
        StepKind::VoltageStep { voltage_v } => format!(
            "the current grows in the direction of the voltage step of {voltage_v} V instead of \
             decaying; check the sign of the step"
        ),
    })
}

/// The scaled regularised problem that [`invert_transient`] solves, for
/// independent solvers and diagnostics. Columns: basis coefficients, the
/// constant (R_inf, G_inf, or the relaxation offset), then the series
/// capacitance column when modelled; all in units of the largest response.
pub fn transient_problem(record: &BinnedTransient, params: &TransientParams) -> Result<Tikhonov> {
    params.validate()?;
    Ok(build(record, params)?.problem)
}

/// Inverts a binned transient onto a distribution of time constants.
///
/// Fails when the parameters are invalid, the grid cannot be built, fewer
/// than [`MIN_BINS`] bins hold the response, or the response is flat.
pub fn invert_transient(
    record: &BinnedTransient,
    params: &TransientParams,
) -> Result<TransientInversion> {
    params.validate()?;
    let d = build(record, params)?;
    let m = record.bins.len();
    let even: Vec<usize> = (0..m).step_by(2).collect();
    let odd: Vec<usize> = (1..m).step_by(2).collect();
    let reg = regularise(&d.problem, &params.drt, (&even, &odd));
    let sol = &reg.solution;
    let s = d.y_scale;
    let coeffs: Vec<f64> = sol.x[..d.n_gamma].iter().map(|v| v * s).collect();
    let constant = sol.x[d.n_gamma] * s;
    let total = coeffs.iter().sum::<f64>() * d.basis.integral();
    let series_capacitance_f = d.col_c.map(|c| {
        let u = sol.x[c] * s;
        if u > 0.0 { d.t_max / u } else { f64::INFINITY }
    });
    let amp = params.step.amplitude();
    let pred = d.problem.predict(&sol.x);
    let measured: Vec<f64> = record.bins.iter().map(|b| b.value).collect();
    let fitted: Vec<f64> = (0..m)
        .map(|i| {
            let model = pred[i] / d.weight[i] + d.y_ref;
            match params.step {
                StepKind::Relaxation { .. } => amp * model,
                _ => d.baseline.unwrap_or(0.0) + amp * model,
            }
        })
        .collect();
    let span = amp.abs() * s;
    let residual_rel: Vec<f64> = (0..m).map(|i| (fitted[i] - measured[i]) / span).collect();
    let residual_rms_rel = (residual_rel.iter().map(|r| r * r).sum::<f64>() / m as f64).sqrt();
    let (instantaneous, final_value) = match params.step {
        StepKind::CurrentStep { .. } | StepKind::VoltageStep { .. } => (Some(constant), None),
        StepKind::Relaxation { current_a } => {
            let v_inf = current_a * (d.y_ref - constant);
            let r_inf = d.baseline.map(|v0| (v0 - v_inf) / current_a - total);
            (r_inf, Some(v_inf))
        }
    };
    let (ln_tau, distribution) = sample_distribution(&d.basis, &coeffs, params.drt.oversample);
    let mut peak_opts = params.drt.peaks;
    if peak_opts.min_area <= 0.0 {
        // A process smaller than ~3 times the fit's residual cannot be told
        // from noise (common practice).
        peak_opts.min_area = 3.0 * residual_rms_rel * s;
    }
    let peaks = find_peaks(&ln_tau, &distribution, &peak_opts);
    Ok(TransientInversion {
        step: params.step,
        unit: params.step.unit(),
        tau_s: ln_tau.iter().map(|y| y.exp()).collect(),
        distribution,
        grid: d.grid,
        coeffs,
        total,
        instantaneous,
        series_capacitance_f,
        final_value,
        baseline: d.baseline,
        baseline_source: d.baseline_source,
        lambda: sol.lambda,
        lambda_rule: reg.rule,
        lambda_floored: reg.floored,
        time_s: record.bins.iter().map(|b| b.time_s).collect(),
        counts: record.bins.iter().map(|b| b.count).collect(),
        measured,
        fitted,
        response_span: span,
        residual_rel,
        residual_rms_rel,
        peaks,
        info: reg.info(&d.problem),
        curves: reg.curves,
        warnings: d.warnings,
    })
}
