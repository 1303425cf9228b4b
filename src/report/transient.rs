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

use super::{DrtSettings, RuleChoice, candidates, num, rule_label};
use crate::io::transient::{BinOptions, BinnedTransient, Quantity};
use crate::solve::SolveStatus;
use crate::transient::{
    BaselineSource, DistributionUnit, StepKind, TransientInversion, TransientParams,
};
use serde::Serialize;
use std::fmt::Write as _;

/// Column name of the distribution in `drt.csv`.
pub fn distribution_column(unit: DistributionUnit) -> &'static str {
    match unit {
        DistributionUnit::Ohm => "gamma_ohm",
        DistributionUnit::Siemens => "gamma_siemens",
    }
}

/// `drt.csv` of a transient.
pub fn drt_csv(inv: &TransientInversion) -> String {
    let mut s = format!("tau_s,{}\n", distribution_column(inv.unit));
    for (t, g) in inv.tau_s.iter().zip(&inv.distribution) {
        let _ = writeln!(s, "{},{}", num(*t), num(*g));
    }
    s
}

/// Unit suffix of the measured quantity: `v` or `a`.
fn measured_suffix(step: StepKind) -> &'static str {
    match step.quantity() {
        Quantity::Current => "a",
        Quantity::Voltage => "v",
    }
}

/// `fit.csv` of a transient.
pub fn fit_csv(inv: &TransientInversion) -> String {
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
    /// Pre-step value used (V or A), or null.
    pub baseline: Option<f64>,
    /// Where the baseline came from.
    pub baseline_source: BaselineSource,
    /// Fitted quantities and peaks.
    #[serde(flatten)]
    pub quantities: Quantities,
    /// The lambda used.
    pub lambda: f64,
    /// The rule that chose it, or "fixed".
    pub lambda_rule: String,
    /// Whether the rule's choice was raised to the floor.
    pub lambda_floored: bool,
    /// Every computed rule's own choice.
    pub lambda_candidates: Vec<RuleChoice>,
    /// RMS over the bins of the residual relative to the step response.
    pub residual_rms_rel: f64,
    /// Whether the solver met its optimality conditions.
    pub solver_status: SolveStatus,
    /// Doubts about the input (e.g. a sign that looks wrong); empty when none.
    pub warnings: Vec<String>,
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
        let quantities = match inv.unit {
            DistributionUnit::Ohm => Quantities::Ohm {
                r_inf_ohm: inv.instantaneous,
                r_pol_ohm: inv.total,
                series_capacitance_f: inv.series_capacitance_f.filter(|c| c.is_finite()),
                v_inf_v: inv.final_value,
                peaks: inv
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
                g_inf_siemens: inv.instantaneous.unwrap_or(0.0),
                g_pol_siemens: inv.total,
                peaks: inv
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
            step: inv.step,
            unit: inv.unit,
            n_samples: record.response_samples,
            n_bins: record.bins.len(),
            n_pre_step: record.pre_step_samples,
            n_skipped_early: record.early_samples,
            baseline: inv.baseline,
            baseline_source: inv.baseline_source,
            quantities,
            lambda: inv.lambda,
            lambda_rule: rule_label(inv.lambda_rule),
            lambda_floored: inv.lambda_floored,
            lambda_candidates: candidates(inv.curves.as_ref()),
            residual_rms_rel: inv.residual_rms_rel,
            solver_status: inv.info.status,
            warnings: inv.warnings.clone(),
            settings: TransientSettings {
                drt: DrtSettings::new(&params.drt, &inv.grid),
                bins_per_decade: bins.bins_per_decade,
                fit_start_s: bins.fit_start_s,
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
