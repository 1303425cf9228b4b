//! Output files of the Kramers-Kronig test (`taumap kk`):
//! - `residuals.csv`: `frequency_hz,residual_re_rel,residual_im_rel`
//! - `summary.json`: see [`KkSummary`]

use super::num;
use crate::kk::{self, KkOptions, KkTest, NoiseSource};
use crate::pipeline::{CapacitanceMode, InductanceMode};
use serde::Serialize;
use std::fmt::Write as _;

/// `residuals.csv`: `frequency_hz,residual_re_rel,residual_im_rel`, the
/// residuals `(Z - Z_fit) / |Z|` of the test's fit at each frequency.
pub fn residuals_csv(t: &KkTest) -> String {
    let mut s = String::from("frequency_hz,residual_re_rel,residual_im_rel\n");
    for ((f, re), im) in t
        .frequency_hz
        .iter()
        .zip(&t.residual_re_rel)
        .zip(&t.residual_im_rel)
    {
        let _ = writeln!(s, "{},{},{}", num(*f), num(*re), num(*im));
    }
    s
}

/// The settings of a test, as its summary reports them.
#[derive(Clone, Debug, Serialize)]
pub struct KkSettings {
    /// `c` of the element count rule.
    pub mu_threshold: f64,
    /// The residual rms limit in noise levels.
    pub rms_factor: f64,
    /// The single-point limit in noise levels.
    pub point_factor: f64,
    /// Residuals below this always pass.
    pub residual_floor_rel: f64,
    /// Inductance mode asked for.
    pub inductance: InductanceMode,
    /// Series-capacitance mode asked for.
    pub series_capacitance: CapacitanceMode,
}

/// `summary.json` of `taumap kk`.
#[derive(Clone, Debug, Serialize)]
pub struct KkSummary {
    /// Input file as given.
    pub input: String,
    /// Number of frequencies tested.
    pub n_points: usize,
    /// The verdict; null when the spectrum holds nothing to test.
    pub valid: Option<bool>,
    /// RMS of the relative residuals over real and imaginary parts.
    pub residual_rms_rel: f64,
    /// The residual rms above which the spectrum is invalid.
    pub threshold_rel: f64,
    /// The noise level the verdict used (relative to |Z|).
    pub noise_rel: f64,
    /// `estimated` or `given`.
    pub noise_source: NoiseSource,
    /// The single-point limit.
    pub point_limit_rel: f64,
    /// Frequencies whose residual exceeds the single-point limit.
    pub flagged_frequency_hz: Vec<f64>,
    /// Voigt elements of the fit.
    pub elements: usize,
    /// `mu` at that number of elements.
    pub mu: f64,
    /// Whether `mu` fell below the threshold once the fit had converged.
    pub mu_reached: bool,
    /// Series resistance of the fit (ohm).
    pub r0_ohm: f64,
    /// Series inductance of the fit (H), null when left out.
    pub inductance_h: Option<f64>,
    /// Series capacitance of the fit (F), null when left out.
    pub series_capacitance_f: Option<f64>,
    /// What the user should know about the test.
    pub warnings: Vec<String>,
    /// Settings used.
    pub settings: KkSettings,
}

impl KkSummary {
    /// Collects the summary of a test of `input`.
    pub fn new(input: &str, t: &KkTest, opts: &KkOptions) -> Self {
        Self {
            input: input.to_string(),
            n_points: t.frequency_hz.len(),
            valid: t.valid,
            residual_rms_rel: t.residual_rms_rel,
            threshold_rel: t.threshold_rel,
            noise_rel: t.noise_rel,
            noise_source: t.noise_source,
            point_limit_rel: t.point_limit_rel,
            flagged_frequency_hz: t.flagged_hz.clone(),
            elements: t.elements,
            mu: t.mu,
            mu_reached: t.mu_reached,
            r0_ohm: t.r0_ohm,
            inductance_h: t.inductance_h,
            series_capacitance_f: t.capacitance_f.filter(|c| c.is_finite()),
            warnings: t.warnings.clone(),
            settings: KkSettings {
                mu_threshold: opts.mu_threshold,
                rms_factor: kk::RMS_FACTOR,
                point_factor: kk::POINT_FACTOR,
                residual_floor_rel: kk::RESIDUAL_FLOOR_REL,
                inductance: opts.inductance,
                series_capacitance: opts.capacitance,
            },
        }
    }

    /// Pretty JSON text with a final newline.
    pub fn to_json(&self) -> String {
        super::to_json(self)
    }
}
