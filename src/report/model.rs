//! Output files of the equivalent-circuit fit (`taumap model`):
//! - `summary.json`: see [`ModelSummary`];
//! - `model.txt`: the chosen circuit in the model text format
//!   ([`crate::circuit::text`]), with its standard errors as comments;
//! - `parameters.csv`: every candidate's parameters,
//!   `processes,chosen,element,label,kind,param,unit,value,se,fixed`;
//! - `fit.csv`: the chosen circuit at the measured frequencies, the same
//!   columns as the inversion's `fit.csv`.

use super::num;
use crate::circuit::fit::{CircuitFit, ParamEstimate};
use crate::circuit::propose::{PeakShape, Selection, Variant};
use crate::circuit::{Model, ModelElement, Series};
use crate::io::Spectrum;
use crate::pipeline::Distribution;
use serde::Serialize;
use std::fmt::Write as _;

/// One element of a candidate in the summary.
#[derive(Clone, Debug, Serialize)]
pub struct ElementSummary {
    /// Label (as in `model.txt`).
    pub label: String,
    /// Kind keyword (`zarc`, `voigt`, ...).
    pub kind: &'static str,
    /// Parameters with their standard errors.
    pub params: Vec<ParamEstimate>,
}

/// The correlation matrix of a candidate's free parameters.
#[derive(Clone, Debug, Serialize)]
pub struct Correlation {
    /// `label.param` of each row and column.
    pub names: Vec<String>,
    /// The matrix, row major (null where undefined).
    pub matrix: Vec<Vec<f64>>,
}

/// One candidate in the summary.
#[derive(Clone, Debug, Serialize)]
pub struct CandidateSummary {
    /// Number of processes (relaxing elements).
    pub processes: usize,
    /// Bayesian information criterion.
    pub bic: f64,
    /// BIC minus the chosen candidate's.
    pub delta_bic: f64,
    /// Akaike information criterion.
    pub aic: f64,
    /// Chi-square: the sum of squared modulus-weighted residuals.
    pub chi2: f64,
    /// Relative noise the residuals imply, sqrt(chi2 / (n - p)).
    pub noise_rel: f64,
    /// Number of real residuals (two per frequency).
    pub residuals: usize,
    /// Number of free parameters.
    pub free_params: usize,
    /// The minimiser converged.
    pub converged: bool,
    /// The elements in series.
    pub elements: Vec<ElementSummary>,
    /// Correlations of the free parameters.
    pub correlation: Correlation,
    /// Element kinds tried for this count and their BIC.
    pub variants: Vec<Variant>,
    /// How many processes were added by splitting one the DRT shows as a
    /// single peak (each must lower the BIC by 6 or more to count).
    pub splits: usize,
    /// Warnings of this fit.
    pub warnings: Vec<String>,
}

/// What the inversion that seeded the candidates found.
#[derive(Clone, Debug, Serialize)]
pub struct DrtBrief {
    /// Regularisation parameter used.
    pub lambda: f64,
    /// Residual rms of the DRT fit, relative to |Z|.
    pub residual_rms_rel: f64,
    /// Series resistance of the DRT model (ohm).
    pub r_inf_ohm: Option<f64>,
    /// Series inductance, when kept (H).
    pub inductance_h: Option<f64>,
    /// Series capacitance, when kept (F).
    pub series_capacitance_f: Option<f64>,
}

/// `summary.json` of `taumap model`.
#[derive(Clone, Debug, Serialize)]
pub struct ModelSummary {
    /// The input file.
    pub input: String,
    /// Number of processes of the chosen candidate.
    pub processes: usize,
    /// The chosen circuit as model text (what `model.txt` holds, without
    /// its comments).
    pub chosen: String,
    /// Index of the chosen candidate in `candidates`.
    pub chosen_index: usize,
    /// Process counts of the other candidates within 2 BIC units of the
    /// chosen one: the data do not tell them apart.
    pub indistinguishable: Vec<usize>,
    /// The candidates, by process count.
    pub candidates: Vec<CandidateSummary>,
    /// The DRT peaks the candidates were built from.
    pub peaks: Vec<PeakShape>,
    /// The inversion behind the peaks.
    pub drt: DrtBrief,
    /// The starting model file (`--start`), if one was given.
    pub start: Option<String>,
    /// Doubts about the result, also printed on stderr.
    pub warnings: Vec<String>,
}

/// The labelled model of a fitted circuit: the labels of `labels` when it
/// has the same element kinds in the same order (a `--start` model), else
/// the reader's automatic labels; parameters fixed as in the fit.
pub fn labelled_model(fit: &CircuitFit, labels: Option<&Model>) -> Model {
    let circuit = Series(fit.circuit());
    let mut model = Model::from_series(&circuit);
    if let Some(given) = labels
        && given.elements.len() == model.elements.len()
        && given
            .elements
            .iter()
            .zip(&model.elements)
            .all(|(a, b)| a.element.kind() == b.element.kind())
    {
        for (m, g) in model.elements.iter_mut().zip(&given.elements) {
            m.label.clone_from(&g.label);
        }
    }
    for (m, f) in model.elements.iter_mut().zip(&fit.elements) {
        m.fixed = f.params.iter().map(|p| p.fixed).collect();
    }
    model
}

/// The standard errors of a fit, per element and parameter, for
/// [`Model::to_text_annotated`].
pub fn standard_errors(fit: &CircuitFit) -> Vec<Vec<Option<f64>>> {
    fit.elements
        .iter()
        .map(|e| e.params.iter().map(|p| p.se).collect())
        .collect()
}

impl ModelSummary {
    /// The summary of `sel` for `input`; `start`: the `--start` model and
    /// its file.
    pub fn new(
        input: &str,
        sel: &Selection,
        drt: &Distribution,
        start: Option<(&Model, &str)>,
        warnings: Vec<String>,
    ) -> Self {
        let best_bic = sel.chosen().fit.bic;
        let candidates = sel
            .candidates
            .iter()
            .map(|c| {
                let model = labelled_model(&c.fit, start.map(|s| s.0));
                CandidateSummary {
                    processes: c.processes,
                    bic: c.fit.bic,
                    delta_bic: c.fit.bic - best_bic,
                    aic: c.fit.aic,
                    chi2: c.fit.chi2,
                    noise_rel: c.fit.noise_rel,
                    residuals: c.fit.residuals,
                    free_params: c.fit.free_params,
                    converged: c.fit.converged,
                    elements: model
                        .elements
                        .iter()
                        .zip(&c.fit.elements)
                        .map(|(m, f)| ElementSummary {
                            label: m.label.clone(),
                            kind: m.element.kind().name(),
                            params: f.params.clone(),
                        })
                        .collect(),
                    correlation: Correlation {
                        names: c
                            .fit
                            .free_names
                            .iter()
                            .map(|n| relabel(n, &model.elements))
                            .collect(),
                        matrix: c.fit.correlation.clone(),
                    },
                    variants: c.variants.clone(),
                    splits: c.splits,
                    warnings: c.fit.warnings.clone(),
                }
            })
            .collect();
        let chosen_model = labelled_model(&sel.chosen().fit, start.map(|s| s.0));
        ModelSummary {
            input: input.to_string(),
            processes: sel.chosen().processes,
            chosen: chosen_model.to_text(),
            chosen_index: sel.chosen,
            indistinguishable: sel
                .close
                .iter()
                .map(|&i| sel.candidates[i].processes)
                .collect(),
            candidates,
            peaks: sel.peaks.clone(),
            drt: DrtBrief {
                lambda: drt.lambda.lambda,
                residual_rms_rel: drt.residual_rms_rel,
                r_inf_ohm: drt.series.instantaneous,
                inductance_h: drt.series.inductance_h,
                series_capacitance_f: drt.series.series_capacitance_f,
            },
            start: start.map(|s| s.1.to_string()),
            warnings,
        }
    }

    /// Pretty-printed JSON with a final newline.
    pub fn to_json(&self) -> String {
        super::to_json(self)
    }
}

/// `3.phi` (element numbered from 1) as `label.phi`.
fn relabel(name: &str, elements: &[ModelElement]) -> String {
    name.split_once('.')
        .and_then(|(i, p)| {
            let i: usize = i.parse().ok()?;
            Some(format!("{}.{p}", elements.get(i.checked_sub(1)?)?.label))
        })
        .unwrap_or_else(|| name.to_string())
}

/// `model.txt`: the chosen circuit with a header (input, fit statistics)
/// and its standard errors.
pub fn model_txt(input: &str, sel: &Selection, start: Option<&Model>) -> String {
    let c = sel.chosen();
    let model = labelled_model(&c.fit, start);
    let header = vec![
        format!("taumap model of {input}"),
        format!(
            "{} processes; chi2 {:.6e} over {} residuals, {} free parameters; noise {:.4} %; AIC {:.2}; BIC {:.2}",
            c.processes,
            c.fit.chi2,
            c.fit.residuals,
            c.fit.free_params,
            100.0 * c.fit.noise_rel,
            c.fit.aic,
            c.fit.bic
        ),
        "values in SI units with prefixes; '# se' gives each parameter's standard error"
            .to_string(),
    ];
    model.to_text_annotated(&header, Some(&standard_errors(&c.fit)))
}

/// `parameters.csv`: one row per parameter of every candidate.
pub fn parameters_csv(summary: &ModelSummary) -> String {
    let mut s = String::from("processes,chosen,element,label,kind,param,unit,value,se,fixed\n");
    for (ci, c) in summary.candidates.iter().enumerate() {
        for (ei, e) in c.elements.iter().enumerate() {
            for p in &e.params {
                let _ = writeln!(
                    s,
                    "{},{},{},{},{},{},{},{},{},{}",
                    c.processes,
                    ci == summary.chosen_index,
                    ei + 1,
                    e.label,
                    e.kind,
                    p.name,
                    p.unit,
                    num(p.value),
                    p.se.map_or(String::new(), num),
                    p.fixed
                );
            }
        }
    }
    s
}

/// `fit.csv` of the chosen circuit at the measured frequencies.
pub fn model_fit_csv(spectrum: &Spectrum, fit: &CircuitFit) -> String {
    let mut s = String::from(
        "frequency_hz,z_re_ohm,z_im_ohm,fit_re_ohm,fit_im_ohm,residual_re_rel,residual_im_rel\n",
    );
    for i in 0..spectrum.len() {
        let f = spectrum.frequency_hz[i];
        let (re, im) = (spectrum.z_re_ohm[i], spectrum.z_im_ohm[i]);
        let z = fit.impedance(f);
        let m = re.hypot(im);
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{}",
            num(f),
            num(re),
            num(im),
            num(z.re),
            num(z.im),
            num((z.re - re) / m),
            num((z.im - im) / m)
        );
    }
    s
}
