//! Output files of a step-transient inversion.
//!
//! Same names as for spectra, with the columns of the time domain. The
//! distribution's unit is in every column name: ohm for current steps and
//! relaxations (the impedance DRT), siemens for voltage steps (the
//! admittance distribution).
//!
//! - `drt.csv`: `tau_s,gamma_ohm` or `tau_s,gamma_siemens`
//! - `fit.csv`: `time_s,measured_v,fitted_v,residual_v,samples` (voltage) or
//!   `time_s,measured_a,fitted_a,residual_a,samples` (current), one row per
//!   time bin (`samples` = raw samples averaged into it)
//! - `lambda.csv`: as for spectra
//! - `summary.json`: see [`TransientSummary`]

use super::{
    DrtSettings, FitSummary, LambdaSummary, PeakInterval, ProcessSummary, SolverSummary, num,
    split_peaks,
};
use crate::io::transient::Quantity;
use crate::peaks::Peak;
use crate::pipeline::bands::PeakBand;
use crate::pipeline::binning::{BinOptions, BinnedTransient};
use crate::pipeline::{
    BaselineSource, DistributionUnit, StepKind, TransientFit, TransientInversion, TransientParams,
};
use serde::Serialize;
use std::fmt::Write as _;

/// Unit suffix of the measured quantity: `v` or `a`.
fn measured_suffix(step: StepKind) -> &'static str {
    match step.quantity() {
        Quantity::Current => "a",
        Quantity::Voltage => "v",
    }
}

/// `fit.csv` of a transient.
pub fn fit_csv(inv: &TransientFit) -> String {
    let u = measured_suffix(inv.step);
    let mut s = format!("time_s,measured_{u},fitted_{u},residual_{u},samples\n");
    for i in 0..inv.time_s.len() {
        let _ = writeln!(
            s,
            "{},{},{},{},{}",
            num(inv.time_s[i]),
            num(inv.measured[i]),
            num(inv.fitted[i]),
            num(inv.fitted[i] - inv.measured[i]),
            inv.counts[i]
        );
    }
    s
}

/// One peak of an impedance DRT from a transient.
#[derive(Clone, Debug, Serialize)]
pub struct OhmPeak {
    /// Time constant at the maximum (s).
    pub tau_s: f64,
    /// Area between the neighbouring minima (ohm).
    pub r_ohm: f64,
    /// gamma at the maximum (ohm).
    pub gamma_ohm: f64,
    /// Interval of tau and confidence (null without bands).
    #[serde(flatten)]
    pub interval: PeakInterval,
    /// Lower end of the interval of `r_ohm` (null without bands).
    pub r_lo_ohm: Option<f64>,
    /// Upper end of the interval of `r_ohm`.
    pub r_hi_ohm: Option<f64>,
}

/// One peak of an admittance distribution from a voltage step.
#[derive(Clone, Debug, Serialize)]
pub struct SiemensPeak {
    /// Time constant at the maximum (s).
    pub tau_s: f64,
    /// Area between the neighbouring minima (siemens).
    pub g_siemens: f64,
    /// g at the maximum (siemens).
    pub gamma_siemens: f64,
    /// Interval of tau and confidence (null without bands).
    #[serde(flatten)]
    pub interval: PeakInterval,
    /// Lower end of the interval of `g_siemens` (null without bands).
    pub g_lo_siemens: Option<f64>,
    /// Upper end of the interval of `g_siemens`.
    pub g_hi_siemens: Option<f64>,
}

fn ohm_peak(p: &Peak, band: Option<&PeakBand>) -> OhmPeak {
    let (interval, r_lo_ohm, r_hi_ohm) = PeakInterval::new(band);
    OhmPeak {
        tau_s: p.tau_s,
        r_ohm: p.area,
        gamma_ohm: p.height,
        interval,
        r_lo_ohm,
        r_hi_ohm,
    }
}

fn siemens_peak(p: &Peak, band: Option<&PeakBand>) -> SiemensPeak {
    let (interval, g_lo_siemens, g_hi_siemens) = PeakInterval::new(band);
    SiemensPeak {
        tau_s: p.tau_s,
        g_siemens: p.area,
        gamma_siemens: p.height,
        interval,
        g_lo_siemens,
        g_hi_siemens,
    }
}

/// The quantities of the fit, named by their unit.
#[derive(Clone, Debug, Serialize)]
#[serde(untagged)]
pub enum Quantities {
    /// Current step or relaxation.
    Ohm {
        /// Series resistance (ohm); null for a relaxation without baseline.
        r_inf_ohm: Option<f64>,
        /// Integral of gamma (ohm).
        r_pol_ohm: f64,
        /// Series capacitance (F), or null when not modelled or not found.
        series_capacitance_f: Option<f64>,
        /// Final voltage of a relaxation (V), or null.
        v_inf_v: Option<f64>,
        /// Peaks in ascending tau: those the data support.
        peaks: Vec<OhmPeak>,
        /// Peaks below the bands' support level.
        weak_peaks: Vec<OhmPeak>,
    },
    /// Voltage step.
    Siemens {
        /// Steady conductance after the transient (S).
        g_inf_siemens: f64,
        /// Integral of g (S).
        g_pol_siemens: f64,
        /// Peaks in ascending tau: those the data support.
        peaks: Vec<SiemensPeak>,
        /// Peaks below the bands' support level.
        weak_peaks: Vec<SiemensPeak>,
    },
}

/// Settings that shaped a transient's result.
#[derive(Clone, Debug, Serialize)]
pub struct TransientSettings {
    /// Grid, basis and lambda settings.
    #[serde(flatten)]
    pub drt: DrtSettings,
    /// Time bins per decade of the reduction.
    pub bins_per_decade: f64,
    /// Samples before this time after the step were skipped (s).
    pub fit_start_s: f64,
    /// Samples after this time were skipped (s), or null when none.
    pub fit_end_s: Option<f64>,
    /// Time of the step on the file's time axis (s).
    pub step_time_s: f64,
    /// Whether a series capacitance was modelled.
    pub series_capacitance_modelled: bool,
}

/// `summary.json` of a transient.
#[derive(Clone, Debug, Serialize)]
pub struct TransientSummary {
    /// Input file as given.
    pub input: String,
    /// The step and its amplitude.
    pub step: StepKind,
    /// Unit of the distribution: "ohm" or "siemens".
    pub unit: DistributionUnit,
    /// Samples after the step, before binning.
    pub n_samples: usize,
    /// Time bins fitted.
    pub n_bins: usize,
    /// Samples before the step (t < 0).
    pub n_pre_step: usize,
    /// Samples after the step skipped before `fit_start_s`.
    pub n_skipped_early: usize,
    /// Samples skipped after `fit_end_s`.
    pub n_skipped_late: usize,
    /// Pre-step value used (V or A), or null.
    pub baseline: Option<f64>,
    /// Where the baseline came from.
    pub baseline_source: BaselineSource,
    /// Fitted quantities and peaks.
    #[serde(flatten)]
    pub quantities: Quantities,
    /// How many processes the data support.
    #[serde(flatten)]
    pub processes: ProcessSummary,
    /// Lambda and residual (relative to the step response).
    #[serde(flatten)]
    pub fit: FitSummary,
    /// Solver status, diagnostics and warnings (e.g. a sign that looks
    /// wrong).
    #[serde(flatten)]
    pub solver: SolverSummary,
    /// Settings used.
    pub settings: TransientSettings,
}

impl TransientSummary {
    /// Collects the summary of a transient inversion.
    pub fn new(
        input: &str,
        record: &BinnedTransient,
        bins: &BinOptions,
        params: &TransientParams,
        inv: &TransientInversion,
    ) -> Self {
        let drt = &inv.drt;
        let quantities = match drt.unit {
            DistributionUnit::Ohm => {
                let (peaks, weak_peaks) = split_peaks(drt, ohm_peak);
                Quantities::Ohm {
                    r_inf_ohm: drt.series.instantaneous,
                    r_pol_ohm: drt.total,
                    series_capacitance_f: drt.series.series_capacitance_f.filter(|c| c.is_finite()),
                    v_inf_v: inv.fit.final_value,
                    peaks,
                    weak_peaks,
                }
            }
            DistributionUnit::Siemens => {
                let (peaks, weak_peaks) = split_peaks(drt, siemens_peak);
                Quantities::Siemens {
                    g_inf_siemens: drt.series.instantaneous.unwrap_or(0.0),
                    g_pol_siemens: drt.total,
                    peaks,
                    weak_peaks,
                }
            }
        };
        Self {
            input: input.to_string(),
            step: inv.fit.step,
            unit: drt.unit,
            n_samples: record.response_samples,
            n_bins: record.bins.len(),
            n_pre_step: record.pre_step_samples,
            n_skipped_early: record.early_samples,
            n_skipped_late: record.late_samples,
            baseline: inv.fit.baseline,
            baseline_source: inv.fit.baseline_source,
            quantities,
            processes: ProcessSummary::new(drt, params.drt.bands.map(|b| b.seed)),
            fit: FitSummary {
                lambda: LambdaSummary::new(&drt.lambda),
                residual_rms_rel: drt.residual_rms_rel,
            },
            solver: SolverSummary::new(drt),
            settings: TransientSettings {
                drt: DrtSettings::new(&params.drt, &drt.grid),
                bins_per_decade: bins.bins_per_decade,
                fit_start_s: bins.fit_start_s,
                fit_end_s: bins.fit_end_s.is_finite().then_some(bins.fit_end_s),
                step_time_s: bins.step_time_s,
                series_capacitance_modelled: params.series_capacitance,
            },
        }
    }

    /// Pretty JSON text with a final newline.
    pub fn to_json(&self) -> String {
        super::to_json(self)
    }
}
