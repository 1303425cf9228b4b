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

use super::{DrtSettings, FitSummary, LambdaSummary, SolverSummary, num};
use crate::io::transient::Quantity;
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
        /// Peaks in ascending tau.
        peaks: Vec<OhmPeak>,
    },
    /// Voltage step.
    Siemens {
        /// Steady conductance after the transient (S).
        g_inf_siemens: f64,
        /// Integral of g (S).
        g_pol_siemens: f64,
        /// Peaks in ascending tau.
        peaks: Vec<SiemensPeak>,
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
            DistributionUnit::Ohm => Quantities::Ohm {
                r_inf_ohm: drt.series.instantaneous,
                r_pol_ohm: drt.total,
                series_capacitance_f: drt.series.series_capacitance_f.filter(|c| c.is_finite()),
                v_inf_v: inv.fit.final_value,
                peaks: drt
                    .peaks
                    .iter()
                    .map(|p| OhmPeak {
                        tau_s: p.tau_s,
                        r_ohm: p.area,
                        gamma_ohm: p.height,
                    })
                    .collect(),
            },
            DistributionUnit::Siemens => Quantities::Siemens {
                g_inf_siemens: drt.series.instantaneous.unwrap_or(0.0),
                g_pol_siemens: drt.total,
                peaks: drt
                    .peaks
                    .iter()
                    .map(|p| SiemensPeak {
                        tau_s: p.tau_s,
                        g_siemens: p.area,
                        gamma_siemens: p.height,
                    })
                    .collect(),
            },
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
