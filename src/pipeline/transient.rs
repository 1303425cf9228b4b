//! The transient front end: a step transient to a distribution of time
//! constants, by the same regularised, non-negative inversion as for
//! spectra, on time-domain kernels.
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
//! times of [`crate::pipeline::binning`], each row is weighted by the square
//! root of its sample count (normalised to a mean weight of 1), and the
//! unknowns are scaled by the largest response `max |y|` so that `lambda` is
//! dimensionless and comparable with the spectrum case. The tau grid spans
//! the first bin's time to the last, extended as for spectra.
//!
//! # Example
//! ```
//! use taumap::pipeline::binning::{BinOptions, BinnedTransient};
//! use taumap::pipeline::{StepKind, TransientParams, invert_transient};
//!
//! // 2 ohm + Voigt(10 ohm, 1 ms) under a 0.1 A step, 10 us sampling for 50 ms.
//! let t: Vec<f64> = (1..=5000).map(|k| k as f64 * 1e-5).collect();
//! let v: Vec<f64> = t.iter().map(|t| 0.1 * (2.0 + 10.0 * (1.0 - (-t / 1e-3).exp()))).collect();
//! let record = BinnedTransient::from_samples(&t, &v, &BinOptions::default())?;
//! let inv = invert_transient(&record, &TransientParams::new(StepKind::CurrentStep { current_a: 0.1 }))?;
//! assert_eq!(inv.drt.peaks.len(), 1);
//! assert!((inv.drt.peaks[0].tau_s.log10() + 3.0).abs() < 0.05);
//! assert!((inv.drt.total - 10.0).abs() < 0.1);
//! assert!((inv.drt.series.instantaneous.unwrap() - 2.0).abs() < 0.05);
//! # Ok::<(), taumap::Error>(())
//! ```

use super::binning::{BinnedTransient, MIN_BINS};
use super::options::DrtOptions;
use super::plan::{EdgeHints, Plan};
use super::result::{DistributionUnit, Inversion, SeriesTerms, WarmStart};
use crate::io::transient::Quantity;
use crate::kernel::{Basis, StepShape, step::step_kernel_dense};
use crate::solve::Tikhonov;
use crate::{Error, Result};

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

/// Changes below this many units of double-precision rounding of the
/// signal's level are refused.
///
/// Rule: a value of size `level` is stored to within `level * EPSILON / 2`
/// (IEEE 754 binary64 rounding), so a change of `k * EPSILON * level` is
/// resolved in about `k` steps and carries a rounding noise near
/// `1/(k sqrt 12)` of itself (uniform quantisation). Below `k = 1000` that
/// noise exceeds 0.03 % of the change, the order of the noise of a good
/// instrument channel, and the export's decimal digits are usually coarser
/// still: the distribution would be fitted to rounding (common practice).
pub const PRECISION_ULPS: f64 = 1e3;

/// The signal level at which a record with no pre-step reference is taken
/// for absolute values.
///
/// Rule: without samples at t < 0 and without `--baseline`, the values of a
/// step are taken as changes from the pre-step state, so the largest |value|
/// is `|amplitude| (R_inf + part of R_pol)`. More than 10 times the change
/// over the record would make `R_inf` more than 9 times the polarisation
/// the record shows, while in a cell `R_inf` and `R_pol` are usually within a
/// decade of each other; absolute values (a 3.7 V cell moving by tens of
/// mV) give ratios of 50 and more (common practice).
pub const ABSOLUTE_LEVEL_RATIO: f64 = 10.0;

/// The unit of the recorded quantity.
fn unit_of(step: StepKind) -> &'static str {
    match step.quantity() {
        Quantity::Voltage => "V",
        Quantity::Current => "A",
    }
}

/// Refuses a record whose response cannot be told from double-precision
/// rounding of its level (see [`PRECISION_ULPS`]).
///
/// The fit explains `response`, `max |d|` in the measured unit: the largest
/// departure from the pre-step value `reference` after a step, or the
/// change of a relaxation from its first to its last value. When it is
/// computed by subtracting two values of size `level` (the largest |value|
/// of the bins and of the reference), it is refused below
/// `PRECISION_ULPS * EPSILON * level`. A step without a reference subtracts
/// nothing (its values are the changes; a constant record is a pure
/// resistance, and absolute values there are the business of
/// [`absolute_level_warning`]), so it is not checked here. A response of
/// exactly 0 is left to the caller's own message.
fn check_precision(
    step: StepKind,
    values: &[f64],
    reference: Option<f64>,
    response: f64,
) -> Result<()> {
    let relaxation = matches!(step, StepKind::Relaxation { .. });
    if response == 0.0 || !(relaxation || reference.is_some()) {
        return Ok(());
    }
    let level = values
        .iter()
        .chain(reference.as_ref())
        .fold(0.0f64, |a, v| a.max(v.abs()));
    let resolution = PRECISION_ULPS * f64::EPSILON * level;
    if response >= resolution {
        return Ok(());
    }
    let u = unit_of(step);
    let from = match reference {
        Some(r) => format!(" from the pre-step value {r:.4e} {u}"),
        None => " over the record".to_string(),
    };
    Err(Error::Data(format!(
        "the response does not change beyond double-precision rounding: by {response:.3e} {u}\
         {from}, against a level of {level:.4e} {u} (less than {PRECISION_ULPS:.0} times the \
         rounding there, {resolution:.1e} {u}); too small to invert; check the unit of the \
         values and the number of digits of the export"
    )))
}

/// A warning when a step record with no pre-step reference looks like
/// absolute values (see [`ABSOLUTE_LEVEL_RATIO`]).
fn absolute_level_warning(step: StepKind, values: &[f64]) -> Option<String> {
    if matches!(step, StepKind::Relaxation { .. }) {
        return None;
    }
    let (lo, hi) = values
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(*v), b.max(*v))
        });
    let change = hi - lo;
    let level = values.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    if level <= ABSOLUTE_LEVEL_RATIO * change {
        return None;
    }
    let u = unit_of(step);
    let ratio = if change > 0.0 {
        format!("{:.0} times", level / change)
    } else {
        "infinitely many times".to_string()
    };
    Some(format!(
        "the record has no samples before the step and no --baseline, so its values are taken as \
         changes from the pre-step state; their level ({level:.4e} {u}) is {ratio} their change \
         over the record ({change:.3e} {u}; more than {ABSOLUTE_LEVEL_RATIO:.0} times): if these \
         are absolute values, give the pre-step value with --baseline or include samples before \
         the step (t < 0)"
    ))
}

/// The fit of a transient, one entry per time bin.
#[derive(Clone, Debug)]
pub struct TransientFit {
    /// The step that was inverted.
    pub step: StepKind,
    /// Pre-step value used (V or A), if any.
    pub baseline: Option<f64>,
    /// Where it came from.
    pub baseline_source: BaselineSource,
    /// Final value `v_inf` (V) of a relaxation.
    pub final_value: Option<f64>,
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
}

/// The result of inverting a transient.
pub type TransientInversion = Inversion<TransientFit>;

/// A prepared inversion for every transient binned onto one time axis (the
/// same bin times, spreads and counts) with one kind of step: grid, basis,
/// step kernel with its bin correction, penalty, extension prior and cross
/// products. `Send + Sync`.
#[derive(Clone, Debug)]
pub struct TransientPlan {
    plan: Plan,
    params: TransientParams,
    time_s: Vec<f64>,
    counts: Vec<usize>,
    /// Spread of the times in each bin (s^2): part of the kernel.
    time_var_s2: Vec<f64>,
    /// First and last sample times (s): they set the grid.
    span_s: (f64, f64),
    /// Square root of each bin's count over the mean count.
    row_scale: Vec<f64>,
    col_c: Option<usize>,
    t_max: f64,
}

/// A response turned into the plan's scaled problem.
struct Scaled {
    problem: Tikhonov,
    baseline: Option<f64>,
    baseline_source: BaselineSource,
    /// Offset subtracted from `y` before the fit (relaxation reference).
    y_ref: f64,
    /// Largest |d_i|, the unit of the unknowns.
    y_scale: f64,
    warnings: Vec<String>,
    /// Whether the response moves against the step (then a sign, not a
    /// missing baseline, is the likely fault).
    against_step: bool,
}

impl TransientPlan {
    /// Prepares the inversion of transients on the time axis of `record`
    /// (its bins' times, spreads and counts, and its first and last sample
    /// times); the bins' values are not used.
    ///
    /// Fails when the parameters are invalid, fewer than [`MIN_BINS`] bins
    /// hold the response, or the grid cannot be built.
    pub fn new(record: &BinnedTransient, params: &TransientParams) -> Result<Self> {
        params.validate()?;
        let bins = &record.bins;
        let m = bins.len();
        if m < MIN_BINS {
            return Err(Error::Data(format!(
                "need samples after the step in at least {MIN_BINS} time bins, found {m}"
            )));
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
        let grid = params.drt.grid(band_lo, band_hi)?;
        let basis = Basis::new(params.drt.basis, &grid);
        let kernel = step_kernel_dense(&basis, params.step.shape(), &t, &var);
        let mean_count = bins.iter().map(|b| b.count as f64).sum::<f64>() / m as f64;
        let row_scale: Vec<f64> = bins
            .iter()
            .map(|b| (b.count as f64 / mean_count).sqrt())
            .collect();
        // The constant: R_inf or G_inf after a step; during a relaxation the
        // (negated) offset of the final value from the reference.
        let const_sign = if matches!(params.step, StepKind::Relaxation { .. }) {
            -1.0
        } else {
            1.0
        };
        let mut series = vec![vec![const_sign; m]];
        let col_c = params.series_capacitance.then(|| {
            series.push(t.iter().map(|ti| ti / t_max).collect());
            basis.len() + 1
        });
        let even: Vec<usize> = (0..m).step_by(2).collect();
        let odd: Vec<usize> = (1..m).step_by(2).collect();
        let plan = Plan::new(
            &params.drt,
            grid,
            basis,
            (band_lo.ln(), band_hi.ln()),
            kernel,
            &series,
            Some(&row_scale),
            (even, odd),
        )?;
        Ok(Self {
            plan,
            params: params.clone(),
            time_s: t,
            counts: bins.iter().map(|b| b.count).collect(),
            time_var_s2: var,
            span_s: (record.first_time_s, record.last_time_s),
            row_scale,
            col_c,
            t_max,
        })
    }

    /// The shared prepared problem.
    pub fn plan(&self) -> &Plan {
        &self.plan
    }

    /// The parameters the plan was built with.
    pub fn params(&self) -> &TransientParams {
        &self.params
    }

    /// Mean time of each bin (s).
    pub fn time_s(&self) -> &[f64] {
        &self.time_s
    }

    fn scale(&self, values: &[f64], pre_step_mean: Option<f64>) -> Result<Scaled> {
        let m = self.time_s.len();
        if values.len() != m {
            return Err(Error::Data(format!(
                "the plan has {m} time bins but the response gives {} values",
                values.len()
            )));
        }
        if let Some(i) = values.iter().position(|v| !v.is_finite()) {
            return Err(Error::Data(format!(
                "values[{i}] must be finite, found {}",
                values[i]
            )));
        }
        if let Some(v) = pre_step_mean.filter(|v| !v.is_finite()) {
            return Err(Error::Data(format!(
                "the pre-step mean must be finite, found {v}"
            )));
        }
        let p = &self.params;
        let (baseline, baseline_source) = match (p.baseline, pre_step_mean) {
            (Some(b), _) => (Some(b), BaselineSource::Given),
            (None, Some(b)) => (Some(b), BaselineSource::PreStepSamples),
            (None, None) => (None, BaselineSource::None),
        };
        let amp = p.step.amplitude();
        let relaxation = matches!(p.step, StepKind::Relaxation { .. });
        let y: Vec<f64> = values
            .iter()
            .map(|v| {
                if relaxation {
                    v / amp
                } else {
                    (v - baseline.unwrap_or(0.0)) / amp
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
        let direction = direction_warning(p.step, &y);
        let against_step = direction.is_some();
        let mut warnings: Vec<String> = direction.into_iter().collect();
        if baseline.is_none() {
            warnings.extend(absolute_level_warning(p.step, values));
        }
        let y_scale = d.iter().fold(0.0f64, |a, v| a.max(v.abs()));
        let reference = if relaxation { None } else { baseline };
        check_precision(p.step, values, reference, y_scale * amp.abs())?;
        if !(y_scale > 0.0 && y_scale.is_finite()) {
            return Err(Error::Data(
                "the response does not change over the record (every bin holds the same value)"
                    .into(),
            ));
        }
        // Row weight sqrt(n_i / mean n) / y_scale: the unknowns come out in
        // units of y_scale, the design matrix is the plan's.
        let b: Vec<f64> = (0..m).map(|i| self.row_scale[i] / y_scale * d[i]).collect();
        let problem = self.plan.problem(b, None, &[])?;
        Ok(Scaled {
            problem,
            baseline,
            baseline_source,
            y_ref,
            y_scale,
            warnings,
            against_step,
        })
    }

    fn check_axis(&self, record: &BinnedTransient) -> Result<Vec<f64>> {
        let same_bits = |a: f64, b: f64| a.to_bits() == b.to_bits();
        let same = record.bins.len() == self.time_s.len()
            && same_bits(record.first_time_s, self.span_s.0)
            && same_bits(record.last_time_s, self.span_s.1)
            && record.bins.iter().enumerate().all(|(i, b)| {
                same_bits(b.time_s, self.time_s[i])
                    && same_bits(b.time_var_s2, self.time_var_s2[i])
                    && b.count == self.counts[i]
            });
        if !same {
            return Err(Error::Data(format!(
                "the record's {} time bins differ from the plan's {} (times, their spread, \
                 sample counts or record span): build a plan for this record's time axis",
                record.bins.len(),
                self.time_s.len()
            )));
        }
        Ok(record.bins.iter().map(|b| b.value).collect())
    }

    /// The scaled regularised problem with the global penalty that
    /// [`TransientPlan::invert`] solves for `record` (with the adaptive
    /// penalty, the default, where its refinement starts), for independent
    /// solvers and diagnostics. Columns:
    /// basis coefficients, the constant (R_inf, G_inf, or the relaxation
    /// offset), then the series capacitance column when modelled; all in
    /// units of the largest response.
    pub fn problem(&self, record: &BinnedTransient) -> Result<Tikhonov> {
        let values = self.check_axis(record)?;
        Ok(self.scale(&values, record.pre_step_mean)?.problem)
    }

    /// Inverts a record binned onto the plan's time axis.
    ///
    /// Fails when the record's bins differ from the plan's or the response
    /// is flat.
    pub fn invert(
        &self,
        record: &BinnedTransient,
        warm: Option<&WarmStart>,
    ) -> Result<TransientInversion> {
        let values = self.check_axis(record)?;
        self.invert_values(&values, record.pre_step_mean, warm)
    }

    /// Inverts the bin means `values` (V or A, one per bin of the plan's
    /// axis) with the pre-step mean `pre_step_mean`, if known.
    ///
    /// Fails when the number of values differs from the plan's bins, a
    /// value is not finite, or the response is flat.
    pub fn invert_values(
        &self,
        values: &[f64],
        pre_step_mean: Option<f64>,
        warm: Option<&WarmStart>,
    ) -> Result<TransientInversion> {
        let d = self.scale(values, pre_step_mean)?;
        let solved = self.plan.solve(&d.problem, &[], warm);
        let m = self.time_s.len();
        let n = self.plan.n_gamma();
        let s = d.y_scale;
        let x = &solved.x;
        let coeffs: Vec<f64> = x[..n].iter().map(|v| v * s).collect();
        let total = coeffs.iter().sum::<f64>() * self.plan.basis().integral();
        let constant = x[n] * s;
        let series_capacitance_f = self.col_c.map(|c| {
            let u = x[c] * s;
            if u > 0.0 {
                self.t_max / u
            } else {
                f64::INFINITY
            }
        });
        let step = self.params.step;
        let amp = step.amplitude();
        let pred = &solved.prediction;
        let fitted: Vec<f64> = (0..m)
            .map(|i| {
                let model = pred[i] / (self.row_scale[i] / s) + d.y_ref;
                match step {
                    StepKind::Relaxation { .. } => amp * model,
                    _ => d.baseline.unwrap_or(0.0) + amp * model,
                }
            })
            .collect();
        let span = amp.abs() * s;
        let residual_rel: Vec<f64> = (0..m).map(|i| (fitted[i] - values[i]) / span).collect();
        let residual_rms_rel = (residual_rel.iter().map(|r| r * r).sum::<f64>() / m as f64).sqrt();
        let (instantaneous, final_value) = match step {
            StepKind::CurrentStep { .. } | StepKind::VoltageStep { .. } => (Some(constant), None),
            StepKind::Relaxation { current_a } => {
                let v_inf = current_a * (d.y_ref - constant);
                let r_inf = d.baseline.map(|v0| (v0 - v_inf) / current_a - total);
                (r_inf, Some(v_inf))
            }
        };
        // A process smaller than ~3 times the fit's residual cannot be told
        // from noise (common practice).
        // (On exact data: nothing below a billionth of the response, the
        // rounding of the solve.)
        let min_area = (3.0 * residual_rms_rel * s).max(1e-9 * s);
        let mut warnings = d.warnings;
        if d.baseline.is_none()
            && !d.against_step
            && warnings.is_empty()
            && explains_nothing(&coeffs, constant, s, residual_rms_rel)
        {
            warnings.push(format!(
                "the fit explains nothing of the record (the instantaneous term and the \
                 distribution are both about 0, residual {:.1} % rms): the record has no samples \
                 before the step and no --baseline, so its values are taken as changes from the \
                 pre-step state; if these are absolute values, give the pre-step value with \
                 --baseline or include samples before the step (t < 0)",
                100.0 * residual_rms_rel
            ));
        }
        let hints = EdgeHints {
            short_name: "the first sample after the step",
            short_hint: "faster processes cannot be told from the instantaneous response; sample \
                         faster after the step (or lower --fit-start)"
                .into(),
            long_name: "the record length",
            long_hint: if matches!(step, StepKind::CurrentStep { .. }) && self.col_c.is_none() {
                "record longer, or, for a blocking electrode (a steady linear drift), fit a \
                 series capacitance with --series-capacitance"
                    .into()
            } else {
                "record longer".into()
            },
        };
        let drt = self.plan.distribution(
            step.unit(),
            coeffs,
            s,
            SeriesTerms {
                instantaneous,
                inductance_h: None,
                series_capacitance_f,
            },
            min_area,
            residual_rms_rel,
            solved,
            warnings,
            &hints,
        );
        Ok(Inversion {
            drt,
            fit: TransientFit {
                step,
                baseline: d.baseline,
                baseline_source: d.baseline_source,
                final_value,
                time_s: self.time_s.clone(),
                counts: self.counts.clone(),
                measured: values.to_vec(),
                fitted,
                response_span: span,
                residual_rel,
            },
        })
    }
}

/// Residual above which a fit with nothing in it has explained nothing.
const NOTHING_EXPLAINED_REL: f64 = 0.5;

/// Whether a fit explains nothing: every coefficient zero, the constant
/// below `1e-9` of the response scale `s`, and a residual above
/// [`NOTHING_EXPLAINED_REL`] of the response (half the record missed).
fn explains_nothing(coeffs: &[f64], constant: f64, s: f64, residual_rms_rel: f64) -> bool {
    coeffs.iter().all(|c| *c == 0.0)
        && constant.abs() <= 1e-9 * s
        && residual_rms_rel > NOTHING_EXPLAINED_REL
}

/// The scaled regularised problem that [`invert_transient`] solves (see
/// [`TransientPlan::problem`]).
pub fn transient_problem(record: &BinnedTransient, params: &TransientParams) -> Result<Tikhonov> {
    TransientPlan::new(record, params)?.problem(record)
}

/// Inverts a binned transient onto a distribution of time constants: a
/// [`TransientPlan`] used once.
///
/// Fails when the parameters are invalid, the grid cannot be built, fewer
/// than [`MIN_BINS`] bins hold the response, or the response is flat.
pub fn invert_transient(
    record: &BinnedTransient,
    params: &TransientParams,
) -> Result<TransientInversion> {
    TransientPlan::new(record, params)?.invert(record, None)
}

#[cfg(all(test, feature = "synth"))]
mod tests {
    use super::*;
    use crate::lambda::{LambdaChoice, LambdaRule};
    use crate::pipeline::binning::BinOptions;
    use crate::synth::{Element, Series, add_white_noise, cells, log_times};

    fn record(r_ohm: f64, seed: u64, t: &[f64]) -> BinnedTransient {
        let cell = Series(vec![
            Element::Resistor { r_ohm: 0.01 },
            Element::Voigt { r_ohm, tau_s: 1e-3 },
        ]);
        let mut v: Vec<f64> = t.iter().map(|&t| 0.5 * cell.current_step_ohm(t)).collect();
        add_white_noise(&mut v, 2e-5, seed);
        BinnedTransient::from_samples(t, &v, &BinOptions::default()).unwrap()
    }

    /// Pulses of a cycling test logged on one time base share one plan and
    /// get, bit for bit, what a one-off inversion gives; a record on another
    /// time base is refused, not silently misfitted.
    #[test]
    fn one_plan_serves_every_pulse_on_the_same_time_base() {
        let t = log_times(1e-5, 1.0, 50.0);
        let params = TransientParams::new(StepKind::CurrentStep { current_a: 0.5 });
        let first = record(0.02, 1, &t);
        let plan = TransientPlan::new(&first, &params).unwrap();
        for (k, r_ohm) in [0.02, 0.025, 0.03].into_iter().enumerate() {
            let rec = record(r_ohm, k as u64 + 1, &t);
            let alone = invert_transient(&rec, &params).unwrap();
            let planned = plan.invert(&rec, None).unwrap();
            assert_eq!(alone.drt.gamma, planned.drt.gamma);
            assert!(
                (planned.drt.total / r_ohm - 1.0).abs() < 0.02,
                "{}",
                planned.drt.total
            );
        }
        let other = record(0.02, 9, &log_times(2e-5, 1.0, 50.0));
        let e = plan.invert(&other, None).unwrap_err().to_string();
        assert!(e.contains("differ from the plan"), "{e}");
        // Same bin means and counts, other spread of times: refused too (the
        // kernel's bin correction depends on it).
        let mut jittered = first.clone();
        jittered.bins[20].time_var_s2 *= 1.5;
        let e = plan.invert(&jittered, None).unwrap_err().to_string();
        assert!(e.contains("differ from the plan"), "{e}");
        let mut bad = first.clone();
        bad.bins[3].value = f64::INFINITY;
        let e = plan.invert(&bad, None).unwrap_err().to_string();
        assert!(e.contains("values[3]"), "{e}");
    }

    /// `current_a` times the current-step response of `cell` at `t`, plus
    /// `offset`, with white noise of `sigma` (none when 0).
    fn step_values(cell: &Series, t: &[f64], current_a: f64, offset: f64, sigma: f64) -> Vec<f64> {
        let mut v: Vec<f64> = t
            .iter()
            .map(|&t| offset + current_a * cell.current_step_ohm(t))
            .collect();
        if sigma > 0.0 {
            add_white_noise(&mut v, sigma, 5);
        }
        v
    }

    fn binned(t: &[f64], v: &[f64]) -> BinnedTransient {
        BinnedTransient::from_samples(t, v, &BinOptions::default()).unwrap()
    }

    fn current_step(current_a: f64) -> TransientParams {
        TransientParams::new(StepKind::CurrentStep { current_a })
    }

    /// The plausibility checks stay quiet on clean synthetic current steps
    /// given as changes (no baseline) with 0.2 % noise, for every reference
    /// cell, default options.
    #[test]
    fn clean_transients_raise_no_plausibility_warning() {
        let t = log_times(1e-6, 10.0, 50.0);
        let all = [
            cells::voigt(),
            cells::zarc(),
            cells::two_zarcs(),
            cells::zarc_plus_voigt(),
            cells::two_voigts(),
            cells::finite_warburg(),
        ];
        for (k, cell) in all.iter().enumerate() {
            let clean = step_values(cell, &t, 0.1, 0.0, 0.0);
            let span = clean.iter().fold(0.0f64, |a, v| a.max(v.abs()));
            let v = step_values(cell, &t, 0.1, 0.0, 2e-3 * span);
            let inv = invert_transient(&binned(&t, &v), &current_step(0.1)).unwrap();
            assert!(
                inv.drt.warnings.is_empty(),
                "cell {k}: {:?}",
                inv.drt.warnings
            );
        }
    }

    /// Absolute voltages (a 3.7 V cell) without a baseline: the level is
    /// far above the change, and the warning gives both and the ratio;
    /// with pre-step samples the same values raise nothing.
    #[test]
    fn absolute_values_without_a_reference_are_reported() {
        let t = log_times(1e-5, 1.0, 50.0);
        let cell = cells::two_voigts();
        // 3.7 V + 0.5 A * (10 + 20 + 30 mohm at most): the change over the
        // record is 0.5 * 0.05 V at most (2.488e-2 V between the first and
        // the last bin), the level 3.73 V.
        let v = step_values(&cell, &t, 0.5, 3.7, 0.0);
        let inv = invert_transient(&binned(&t, &v), &current_step(0.5)).unwrap();
        let w = &inv.drt.warnings[0];
        assert!(
            w.starts_with(
                "the record has no samples before the step and no --baseline, so its values are \
                 taken as changes from the pre-step state; their level (3.7300e0 V) is 150 times \
                 their change over the record (2.488e-2 V; more than 10 times)"
            ),
            "{w}"
        );
        assert!(
            w.ends_with("include samples before the step (t < 0)"),
            "{w}"
        );
        let plan = TransientPlan::new(&binned(&t, &v), &current_step(0.5)).unwrap();
        let values: Vec<f64> = binned(&t, &v).bins.iter().map(|b| b.value).collect();
        let inv = plan.invert_values(&values, Some(3.7), None).unwrap();
        assert!(inv.drt.warnings.is_empty(), "{:?}", inv.drt.warnings);
        assert!(
            (inv.drt.total / 0.05 - 1.0).abs() < 0.02,
            "{}",
            inv.drt.total
        );
        // A level 9.9 times the change is not reported.
        let v = step_values(&cell, &t, 0.5, 0.0, 0.0);
        let change = v[v.len() - 1] - v[0];
        let shifted: Vec<f64> = v
            .iter()
            .map(|x| x + 9.9 * change - v[v.len() - 1])
            .collect();
        let w = absolute_level_warning(StepKind::CurrentStep { current_a: 0.5 }, &shifted);
        assert_eq!(w, None);
        let shifted: Vec<f64> = v
            .iter()
            .map(|x| x + 10.1 * change - v[v.len() - 1])
            .collect();
        let w = absolute_level_warning(StepKind::CurrentStep { current_a: 0.5 }, &shifted);
        assert!(w.is_some_and(|w| w.contains("is 10 times")));
    }

    /// Absolute voltages whose level is not far above their change, taken
    /// as changes against a discharge step: no non-negative model fits
    /// them, and the user is told why and what to do.
    #[test]
    fn a_fit_that_explains_nothing_suggests_a_baseline() {
        let t = log_times(1e-5, 1.0, 50.0);
        // 1.0 V falling by 0.3 V under a 0.1 A discharge: y = v / I runs from
        // -10 to -7 ohm, the right direction with the wrong sign.
        let v: Vec<f64> = t
            .iter()
            .map(|t| 1.0 - 0.3 * (1.0 - (-t / 1e-3).exp()))
            .collect();
        let inv = invert_transient(&binned(&t, &v), &current_step(-0.1)).unwrap();
        let w: Vec<&String> = inv
            .drt
            .warnings
            .iter()
            .filter(|w| w.starts_with("the fit explains nothing of the record"))
            .collect();
        assert_eq!(w.len(), 1, "{:?}", inv.drt.warnings);
        assert!(
            w[0].contains("--baseline or include samples before the step"),
            "{}",
            w[0]
        );
        assert!(explains_nothing(&[0.0, 0.0], 1e-10, 1.0, 0.51));
        assert!(!explains_nothing(&[0.0, 0.0], 1e-10, 1.0, 0.49));
        assert!(!explains_nothing(&[0.0, 0.0], 2e-9, 1.0, 0.9));
        assert!(!explains_nothing(&[0.0, 1e-3], 0.0, 1.0, 0.9));
    }

    /// Changes that double precision cannot tell from rounding of the level
    /// are refused (with a reference, or during a relaxation); a change of
    /// 2000 rounding units is inverted.
    #[test]
    fn changes_below_double_precision_are_refused() {
        let t = log_times(1e-5, 1.0, 50.0);
        let level = 3.7;
        let resolution = PRECISION_ULPS * f64::EPSILON * level;
        let shape: Vec<f64> = t.iter().map(|t| 1.0 - (-t / 1e-3).exp()).collect();
        let record = |size: f64| {
            let v: Vec<f64> = shape.iter().map(|s| level + size * (0.5 + s)).collect();
            binned(&t, &v)
        };
        let mut params = current_step(0.1);
        params.baseline = Some(level);
        let e = invert_transient(&record(0.5 * resolution), &params)
            .unwrap_err()
            .to_string();
        assert!(
            e.starts_with(
                "the response does not change beyond double-precision rounding: by 6.164e-13 V"
            ),
            "{e}"
        );
        assert!(
            e.contains("from the pre-step value 3.7000e0 V, against a level of 3.7000e0 V"),
            "{e}"
        );
        assert!(invert_transient(&record(2.0 * resolution), &params).is_ok());
        let relax = TransientParams::new(StepKind::Relaxation { current_a: 0.1 });
        let e = invert_transient(&record(0.5 * resolution), &relax)
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("over the record, against a level of 3.7000e0 V"),
            "{e}"
        );
        assert!(invert_transient(&record(2.0 * resolution), &relax).is_ok());
        // Without a reference, the values of a step are the changes.
        assert!(invert_transient(&record(0.5 * resolution), &current_step(0.1)).is_ok());
    }

    /// The L-curve over-smooths a noise-free record: its residual is far
    /// above the noise the data show around their best fit.
    #[test]
    fn a_residual_far_above_the_noise_is_reported() {
        let t = log_times(1e-6, 1.0, 100.0);
        let v = step_values(&cells::zarc_plus_voigt(), &t, 0.1, 0.0, 0.0);
        let mut params = current_step(0.1);
        params.drt.lambda = LambdaChoice::Rule(LambdaRule::Lcurve);
        let inv = invert_transient(&binned(&t, &v), &params).unwrap();
        assert_eq!(inv.drt.warnings.len(), 1, "{:?}", inv.drt.warnings);
        let w = &inv.drt.warnings[0];
        assert!(
            w.starts_with("the residual (0.49 % rms of the scaled data) is "),
            "{w}"
        );
        assert!(
            w.contains("times the noise level the data show around their best fit"),
            "{w}"
        );
        assert!(w.contains("(lcurve) smooths away signal"), "{w}");
        params.drt.lambda = LambdaChoice::Rule(LambdaRule::Discrepancy);
        let inv = invert_transient(&binned(&t, &v), &params).unwrap();
        assert!(inv.drt.warnings.is_empty(), "{:?}", inv.drt.warnings);
    }

    /// A current step into a blocking electrode drifts linearly to the end
    /// of the record: the distribution piles up beyond it, and the hint
    /// names the series capacitance, which removes it.
    #[test]
    fn a_distribution_beyond_the_record_is_reported_with_a_hint() {
        let t = log_times(1e-5, 1.0, 50.0);
        let blocking = Series(vec![
            Element::Resistor { r_ohm: 10.0 },
            Element::Voigt {
                r_ohm: 50.0,
                tau_s: 1e-3,
            },
            Element::Capacitor { c_f: 1e-2 },
        ]);
        let v = step_values(&blocking, &t, 0.1, 0.0, 0.0);
        let inv = invert_transient(&binned(&t, &v), &current_step(0.1)).unwrap();
        let w: Vec<&String> = inv
            .drt
            .warnings
            .iter()
            .filter(|w| w.contains("time constants above 1.000e0 s (the record length)"))
            .collect();
        assert_eq!(w.len(), 1, "{:?}", inv.drt.warnings);
        assert!(
            w[0].ends_with("fit a series capacitance with --series-capacitance"),
            "{}",
            w[0]
        );
        let mut params = current_step(0.1);
        params.series_capacitance = true;
        let inv = invert_transient(&binned(&t, &v), &params).unwrap();
        assert!(inv.drt.warnings.is_empty(), "{:?}", inv.drt.warnings);
    }
}
