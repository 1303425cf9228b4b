//! Output files of an inversion: the CSV tables and the JSON summary.
//!
//! These names and columns are a contract that scripts rely on:
//! - `drt.csv`: `tau_s,gamma_ohm`
//! - `fit.csv`: `frequency_hz,z_re_ohm,z_im_ohm,fit_re_ohm,fit_im_ohm,residual_re_rel,residual_im_rel`
//! - `lambda.csv`: one row per grid value of lambda, one column per computed rule
//! - `summary.json`: see [`Summary`]
//!
//! The outputs of a step transient are in [`transient`], those of the
//! Kramers-Kronig test in [`kk`], those of a series run in [`series`]. Both take the one
//! result type [`Distribution`]: `drt.csv`, `lambda.csv` and the shared
//! parts of `summary.json` are written by the same code for both.

pub mod kk;
pub mod model;
pub mod series;
pub mod transient;

use crate::grid::TauGrid;
use crate::io::Spectrum;
use crate::lambda::{LambdaCurves, LambdaRule};
use crate::peaks::Peak;
use crate::pipeline::bands::PeakBand;
use crate::pipeline::{
    CapacitanceMode, Distribution, DrtOptions, GridEdge, InductanceMode, InvertParams,
    LambdaSelection, SolveInfo, SpectrumFit, SpectrumInversion,
};
use crate::solve::SolveStatus;
use serde::Serialize;
use std::fmt::Write as _;

/// Number format used in every CSV: 10 significant digits, exponent form.
pub fn num(v: f64) -> String {
    if v.is_finite() {
        format!("{v:.9e}")
    } else {
        String::new()
    }
}

/// `drt.csv`: `tau_s,gamma_ohm` (or `gamma_siemens` for the admittance
/// distribution of a voltage step).
///
/// With uncertainty bands, two more columns: `gamma_lo_ohm,gamma_hi_ohm`
/// (or `_siemens`), the band's lower and upper ends.
pub fn drt_csv(drt: &Distribution) -> String {
    let unit = drt.unit.name();
    match &drt.bands {
        None => {
            let mut s = format!("tau_s,gamma_{unit}\n");
            for (t, g) in drt.tau_s.iter().zip(&drt.gamma) {
                let _ = writeln!(s, "{},{}", num(*t), num(*g));
            }
            s
        }
        Some(b) => {
            let mut s = format!("tau_s,gamma_{unit},gamma_lo_{unit},gamma_hi_{unit}\n");
            for i in 0..drt.tau_s.len() {
                let _ = writeln!(
                    s,
                    "{},{},{},{}",
                    num(drt.tau_s[i]),
                    num(drt.gamma[i]),
                    num(b.gamma_lo[i]),
                    num(b.gamma_hi[i])
                );
            }
            s
        }
    }
}

/// The peaks of `drt` as `make` turns them into summary entries, split into
/// those the data support (confidence at least the bands' support level)
/// and the weak ones; without bands every peak is supported.
pub fn split_peaks<T>(
    drt: &Distribution,
    make: impl Fn(&Peak, Option<&PeakBand>) -> T,
) -> (Vec<T>, Vec<T>) {
    let (mut strong, mut weak) = (Vec::new(), Vec::new());
    for (i, p) in drt.peaks.iter().enumerate() {
        let band = drt.bands.as_ref().and_then(|b| b.peaks.get(i));
        let supported = match (band, &drt.bands) {
            (Some(pb), Some(b)) => pb.confidence >= b.support,
            _ => true,
        };
        if supported {
            strong.push(make(p, band));
        } else {
            weak.push(make(p, band));
        }
    }
    (strong, weak)
}

/// The intervals of a peak, in `summary.json` (null without bands).
#[derive(Clone, Copy, Debug, Default, Serialize)]
pub struct PeakInterval {
    /// Lower end of the interval of tau (s).
    pub tau_lo_s: Option<f64>,
    /// Upper end of the interval of tau (s).
    pub tau_hi_s: Option<f64>,
    /// Fraction of posterior draws with a peak in this peak's region.
    pub confidence: Option<f64>,
}

impl PeakInterval {
    /// The interval of a peak, with the band's limits of its area.
    pub fn new(b: Option<&PeakBand>) -> (Self, Option<f64>, Option<f64>) {
        match b {
            None => (Self::default(), None, None),
            Some(b) => (
                Self {
                    tau_lo_s: b.tau_lo_s.is_finite().then_some(b.tau_lo_s),
                    tau_hi_s: b.tau_hi_s.is_finite().then_some(b.tau_hi_s),
                    confidence: Some(b.confidence),
                },
                Some(b.r_lo),
                Some(b.r_hi),
            ),
        }
    }
}

/// A count of processes and how often the posterior draws show it.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct CountProbability {
    /// Number of peaks in a draw.
    pub processes: usize,
    /// Fraction of draws with that many.
    pub probability: f64,
}

/// How many processes the data support, in every `summary.json` (nulls and
/// empty lists without bands).
#[derive(Clone, Debug, Serialize)]
pub struct ProcessSummary {
    /// Peaks of `peaks` (those the data support); null without bands.
    pub processes_supported: Option<usize>,
    /// The distribution of the number of peaks over posterior draws.
    pub process_count_probability: Vec<CountProbability>,
    /// Smallest separation of two equal narrow processes the noise allows
    /// (decades); null without bands.
    pub resolution_decades: Option<f64>,
    /// How the bands were made; null without bands.
    pub bands: Option<BandSummary>,
}

/// The settings of the bands, for the record.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct BandSummary {
    /// Probability inside the band (0.9: the columns `gamma_lo_*`,
    /// `gamma_hi_*` of drt.csv and the peaks' intervals are 90 % intervals).
    pub level: f64,
    /// Confidence a peak needs to be listed in `peaks` (else `weak_peaks`).
    pub support: f64,
    /// Posterior draws.
    pub draws: usize,
    /// Seed of the draws.
    pub seed: u64,
}

impl ProcessSummary {
    /// The process summary of `drt` (`seed`: the draws' seed).
    pub fn new(drt: &Distribution, seed: Option<u64>) -> Self {
        match &drt.bands {
            None => Self {
                processes_supported: None,
                process_count_probability: Vec::new(),
                resolution_decades: None,
                bands: None,
            },
            Some(b) => Self {
                processes_supported: Some(b.supported),
                process_count_probability: b
                    .count_probability
                    .iter()
                    .map(|&(processes, probability)| CountProbability {
                        processes,
                        probability,
                    })
                    .collect(),
                resolution_decades: Some(b.resolution_decades),
                bands: Some(BandSummary {
                    level: b.level,
                    support: b.support,
                    draws: b.draws,
                    seed: seed.unwrap_or(0),
                }),
            },
        }
    }
}

/// `fit.csv` of a spectrum.
pub fn fit_csv(spectrum: &Spectrum, fit: &SpectrumFit) -> String {
    let mut s = String::from(
        "frequency_hz,z_re_ohm,z_im_ohm,fit_re_ohm,fit_im_ohm,residual_re_rel,residual_im_rel\n",
    );
    for i in 0..spectrum.len() {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{}",
            num(spectrum.frequency_hz[i]),
            num(spectrum.z_re_ohm[i]),
            num(spectrum.z_im_ohm[i]),
            num(fit.fit_re_ohm[i]),
            num(fit.fit_im_ohm[i]),
            num(fit.residual_re_rel[i]),
            num(fit.residual_im_rel[i]),
        );
    }
    s
}

/// Column name of a rule's score in `lambda.csv`.
pub fn rule_column(rule: LambdaRule) -> &'static str {
    match rule {
        LambdaRule::Gcv => "gcv_score",
        LambdaRule::Lcurve => "lcurve_curvature",
        LambdaRule::Discrepancy => "discrepancy_ratio",
        LambdaRule::Recv => "recv_score",
    }
}

/// `lambda.csv` of any inversion, or `None` when lambda was fixed.
pub fn lambda_csv(selection: &LambdaSelection) -> Option<String> {
    let c = selection.curves.as_ref()?;
    let mut s = String::from("lambda,residual_sq,penalty_sq,dof");
    for r in &c.rules {
        s.push(',');
        s.push_str(rule_column(r.rule));
    }
    s.push('\n');
    for i in 0..c.lambda.len() {
        let _ = write!(
            s,
            "{},{},{},{}",
            num(c.lambda[i]),
            num(c.residual_sq[i]),
            num(c.penalty_sq[i]),
            num(c.dof[i])
        );
        for r in &c.rules {
            let _ = write!(s, ",{}", num(r.score[i]));
        }
        s.push('\n');
    }
    Some(s)
}

/// One peak in `summary.json`.
#[derive(Clone, Debug, Serialize)]
pub struct PeakSummary {
    /// Time constant at the maximum (s).
    pub tau_s: f64,
    /// 1/(2 pi tau) (Hz).
    pub frequency_hz: f64,
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

impl PeakSummary {
    /// A peak and its band, if any.
    pub fn new(p: &Peak, band: Option<&PeakBand>) -> Self {
        let (interval, r_lo_ohm, r_hi_ohm) = PeakInterval::new(band);
        Self {
            tau_s: p.tau_s,
            frequency_hz: p.frequency_hz,
            r_ohm: p.area,
            gamma_ohm: p.height,
            interval,
            r_lo_ohm,
            r_hi_ohm,
        }
    }
}

impl From<&Peak> for PeakSummary {
    fn from(p: &Peak) -> Self {
        Self::new(p, None)
    }
}

/// What the rules chose, for the record.
#[derive(Clone, Debug, Serialize)]
pub struct RuleChoice {
    /// Rule name.
    pub rule: LambdaRule,
    /// Its choice, or null when it found none.
    pub lambda: Option<f64>,
}

/// Discretisation settings that shaped a distribution (every inversion).
#[derive(Clone, Debug, Serialize)]
pub struct DrtSettings {
    /// Basis family.
    pub basis: String,
    /// Penalty derivative order.
    pub penalty_order: usize,
    /// `"global"` (one lambda) or `"adaptive"` (the uniform penalty of
    /// [`crate::pipeline::adaptive`], refined from the global solution).
    pub penalty: &'static str,
    /// Grid points per decade.
    pub per_decade: f64,
    /// Grid ends (s).
    pub tau_min_s: f64,
    /// Grid ends (s).
    pub tau_max_s: f64,
    /// Number of basis functions.
    pub n_tau: usize,
    /// Lower bound applied to automatic lambda.
    pub lambda_floor: f64,
}

impl DrtSettings {
    /// The settings of `opts` on the grid actually used.
    pub fn new(opts: &DrtOptions, grid: &TauGrid) -> Self {
        let tau = grid.tau_s();
        Self {
            basis: opts.basis.to_string(),
            penalty_order: opts.penalty_order,
            penalty: if opts.adaptive.is_some() {
                "adaptive"
            } else {
                "global"
            },
            per_decade: opts.per_decade,
            tau_min_s: tau[0],
            tau_max_s: tau[tau.len() - 1],
            n_tau: tau.len(),
            lambda_floor: opts.lambda_floor,
        }
    }
}

/// Settings that shaped a spectrum's result.
#[derive(Clone, Debug, Serialize)]
pub struct Settings {
    /// Grid, basis and lambda settings.
    #[serde(flatten)]
    pub drt: DrtSettings,
    /// Residual weighting.
    pub weighting: String,
    /// Whether an inductance was modelled.
    pub inductance_modelled: bool,
    /// Whether a series capacitance was modelled.
    pub series_capacitance_modelled: bool,
    /// Inductance mode asked for: `auto`, `on` or `off`.
    pub inductance: InductanceMode,
    /// Series-capacitance mode asked for: `auto`, `on` or `off`.
    pub series_capacitance: CapacitanceMode,
}

/// How lambda was chosen, as every `summary.json` reports it.
#[derive(Clone, Debug, Serialize)]
pub struct LambdaSummary {
    /// The lambda used.
    pub lambda: f64,
    /// The rule that chose it, or "fixed".
    pub lambda_rule: String,
    /// Whether the rule's choice was raised to the floor.
    pub lambda_floored: bool,
    /// The end of the lambda grid the rule's choice sits on ("lower",
    /// "upper"), or null inside the grid and for a fixed lambda.
    pub lambda_grid_edge: Option<GridEdge>,
    /// Every computed rule's own choice.
    pub lambda_candidates: Vec<RuleChoice>,
}

impl LambdaSummary {
    /// The summary of a lambda selection.
    pub fn new(s: &LambdaSelection) -> Self {
        Self {
            lambda: s.lambda,
            lambda_rule: rule_label(s.rule),
            lambda_floored: s.floored,
            lambda_grid_edge: s.grid_edge,
            lambda_candidates: candidates(s.curves.as_ref()),
        }
    }
}

/// The fields every `summary.json` ends with, after its own quantities.
#[derive(Clone, Debug, Serialize)]
pub struct FitSummary {
    /// How lambda was chosen.
    #[serde(flatten)]
    pub lambda: LambdaSummary,
    /// RMS of the relative residuals (fraction).
    pub residual_rms_rel: f64,
}

/// Solver diagnostics, as every `summary.json` reports them.
#[derive(Clone, Debug, Serialize)]
pub struct SolverSummary {
    /// Whether the solver met its optimality conditions (`converged`), or
    /// how it failed.
    pub solver_status: SolveStatus,
    /// Iterations, path status, KKT residual, shift, problem size.
    pub solver: SolveInfo,
    /// Doubts about the input or the result; empty when none.
    pub warnings: Vec<String>,
}

impl SolverSummary {
    /// The diagnostics and warnings of a distribution.
    pub fn new(drt: &Distribution) -> Self {
        Self {
            solver_status: drt.info.status,
            solver: drt.info,
            warnings: drt.warnings.clone(),
        }
    }
}

/// `summary.json` of a spectrum.
#[derive(Clone, Debug, Serialize)]
pub struct Summary {
    /// Input file as given.
    pub input: String,
    /// Number of frequencies.
    pub n_points: usize,
    /// Series resistance (ohm).
    pub r_inf_ohm: f64,
    /// Integral of gamma (ohm).
    pub r_pol_ohm: f64,
    /// Series inductance (H), or null when not modelled.
    pub inductance_h: Option<f64>,
    /// Series capacitance (F), or null when not modelled.
    pub series_capacitance_f: Option<f64>,
    /// Lambda and residual.
    #[serde(flatten)]
    pub fit: FitSummary,
    /// Peaks in ascending tau: those the data support (all of them
    /// without bands).
    pub peaks: Vec<PeakSummary>,
    /// Peaks whose confidence is below the bands' support level.
    pub weak_peaks: Vec<PeakSummary>,
    /// How many processes the data support.
    #[serde(flatten)]
    pub processes: ProcessSummary,
    /// Solver status, diagnostics and warnings.
    #[serde(flatten)]
    pub solver: SolverSummary,
    /// Settings used.
    pub settings: Settings,
    /// The Kramers-Kronig verdict on the spectrum inverted (see
    /// [`crate::kk`]); null when the test could not judge it.
    pub kk_valid: Option<bool>,
    /// The residual rms of that test, null when it did not run.
    pub kk_residual_rms_rel: Option<f64>,
}

impl Summary {
    /// Collects the summary of an inversion.
    pub fn new(
        input: &str,
        spectrum: &Spectrum,
        params: &InvertParams,
        inv: &SpectrumInversion,
    ) -> Self {
        let drt = &inv.drt;
        let (peaks, weak_peaks) = split_peaks(drt, PeakSummary::new);
        Self {
            input: input.to_string(),
            n_points: spectrum.len(),
            r_inf_ohm: drt.series.instantaneous.unwrap_or(0.0),
            r_pol_ohm: drt.total,
            inductance_h: drt.series.inductance_h,
            series_capacitance_f: drt.series.series_capacitance_f.filter(|c| c.is_finite()),
            fit: FitSummary {
                lambda: LambdaSummary::new(&drt.lambda),
                residual_rms_rel: drt.residual_rms_rel,
            },
            peaks,
            weak_peaks,
            processes: ProcessSummary::new(drt, params.drt.bands.map(|b| b.seed)),
            solver: SolverSummary::new(drt),
            settings: Settings {
                drt: DrtSettings::new(&params.drt, &drt.grid),
                weighting: format!("{:?}", params.weighting).to_lowercase(),
                inductance_modelled: drt.series.inductance_h.is_some(),
                series_capacitance_modelled: drt.series.series_capacitance_f.is_some(),
                inductance: params.inductance,
                series_capacitance: params.series_capacitance,
            },
            kk_valid: None,
            kk_residual_rms_rel: None,
        }
    }

    /// The same summary with the verdict of the Kramers-Kronig test.
    pub fn with_kk(mut self, kk: Option<&crate::kk::KkTest>) -> Self {
        self.kk_valid = kk.and_then(|t| t.valid);
        self.kk_residual_rms_rel = kk.map(|t| t.residual_rms_rel);
        self
    }

    /// Pretty JSON text with a final newline.
    pub fn to_json(&self) -> String {
        to_json(self)
    }
}

/// Pretty JSON text of any summary, with a final newline.
pub fn to_json<T: Serialize>(value: &T) -> String {
    let mut s =
        serde_json::to_string_pretty(value).unwrap_or_else(|e| format!("{{\"error\":\"{e}\"}}"));
    s.push('\n');
    s
}

/// `"fixed"` or the name of the rule that chose lambda.
pub fn rule_label(rule: Option<LambdaRule>) -> String {
    rule.map_or_else(|| "fixed".into(), |r| r.name().into())
}

/// Every computed rule's own choice, for the record.
pub fn candidates(curves: Option<&LambdaCurves>) -> Vec<RuleChoice> {
    curves
        .map(|c| {
            c.rules
                .iter()
                .map(|r| RuleChoice {
                    rule: r.rule,
                    lambda: r.chosen,
                })
                .collect()
        })
        .unwrap_or_default()
}
