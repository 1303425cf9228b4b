//! `taumap model`: a spectrum in; candidate equivalent circuits proposed
//! from its DRT peaks, fitted by CNLS and ranked by BIC; the chosen
//! circuit, every candidate's parameters, fits and figures out.

use super::args::{ModelArgs, OnOff};
use super::invert::{band, drt_options_from, in_file, out_dir_named, report_layout};
use super::output::{FORMATS, output_set, report_run};
use anyhow::{Result, bail};
use std::path::{Path, PathBuf};
use taumap::circuit::fit::{FitData, FitOptions, fit_circuit};
use taumap::circuit::propose::{
    Candidate, ProposeOptions, Selection, continuous_area, peak_shapes, propose,
};
use taumap::circuit::{Model, Series};
use taumap::io::Spectrum;
use taumap::io::spectrum::read_spectrum_with;
use taumap::pipeline::{Distribution, InvertParams, Weighting, invert};
use taumap::plot;
use taumap::report;
use taumap::report::model::{ModelSummary, model_fit_csv, model_txt, parameters_csv};

/// The largest `--max-processes`: beyond it the candidates outnumber what
/// any spectrum resolves and the fits only take time.
pub const MAX_PROCESSES: usize = 8;

/// Runs the subcommand.
pub fn run(a: &ModelArgs) -> Result<()> {
    if a.max_processes == 0 || a.max_processes > MAX_PROCESSES {
        bail!(
            "parameter `max-processes` must be from 1 to {MAX_PROCESSES}, got {}",
            a.max_processes
        );
    }
    let params = InvertParams {
        drt: drt_options_from(
            &a.solve,
            taumap::pipeline::DrtOptions::default().per_decade,
            OnOff::Off,
        )?,
        inductance: a.series.modes().0,
        // The circuit fit weights by the modulus; its seeds come from an
        // inversion weighted alike.
        weighting: Weighting::Modulus,
        series_capacitance: a.series.modes().1,
    };
    let out = match a.out.as_deref() {
        Some(_) => super::invert::out_dir(&a.input, a.out.as_deref())?,
        None if a.input == Path::new("-") => super::invert::out_dir(&a.input, None)?,
        None => out_dir_named(&a.input, "model"),
    };
    // The model file first: a typo in it is said before any computing.
    let start = a.start.as_deref().map(Model::read).transpose()?;
    let (spectrum, layout) = read_spectrum_with(&a.input, &a.columns.map()?)?;
    report_layout(&a.input, &layout);
    let spectrum = band(&a.input, spectrum, a.band.f_min, a.band.f_max)?;
    let name = a.input.display().to_string();
    let inv = in_file(invert(&spectrum, &params), &a.input)?;
    let data = in_file(
        FitData::new(
            &spectrum.frequency_hz,
            &spectrum.z_re_ohm,
            &spectrum.z_im_ohm,
        ),
        &a.input,
    )?;
    let sel = match &start {
        Some(m) => fit_start(&data, m, &inv.drt).map_err(|e| {
            let path = a.start.as_deref().unwrap_or(Path::new("-"));
            e.context(format!(
                "fitting {} to {}",
                path.display(),
                a.input.display()
            ))
        })?,
        None => in_file(
            propose(
                &data,
                &inv.drt,
                &ProposeOptions {
                    max_processes: a.max_processes,
                    ..ProposeOptions::default()
                },
            ),
            &a.input,
        )?,
    };
    // The reader's doubts and the inversion's warnings first (the circuit
    // fit inherits any fault of the data), then the fit's own.
    let mut warnings: Vec<String> = layout
        .imag_mostly_positive
        .then(|| {
            "the imaginary part is positive at most frequencies; taumap expects Z'' with its physical sign (negative when capacitive)".to_string()
        })
        .into_iter()
        .collect();
    warnings.extend(inv.drt.warnings.iter().map(|w| format!("inversion: {w}")));
    warnings.extend(plausibility(&sel, &inv.drt));
    for w in &warnings {
        eprintln!("warning: {name}: {w}");
    }
    let start_arg = start
        .as_ref()
        .zip(a.start.as_ref())
        .map(|(m, p)| (m, p.display().to_string()));
    let summary = ModelSummary::new(
        &name,
        &sel,
        &inv.drt,
        start_arg.as_ref().map(|(m, p)| (*m, p.as_str())),
        warnings,
    );
    let mut set = output_set(&out);
    set.add("summary.json", summary.to_json())?;
    set.add("model.txt", model_txt(&name, &sel, start.as_ref()))?;
    set.add("parameters.csv", parameters_csv(&summary))?;
    set.add("fit.csv", model_fit_csv(&spectrum, &sel.chosen().fit))?;
    set.add("drt.csv", report::drt_csv(&inv.drt))?;
    if !a.solve.no_plots {
        add_figures(&mut set, &spectrum, &sel, &inv.drt)?;
    }
    let written: Vec<PathBuf> = set.commit()?;
    report_run(
        a.solve.json.then(|| summary.to_json()),
        &out,
        &written,
        |w| {
            for (i, c) in sel.candidates.iter().enumerate() {
                writeln!(
                    w,
                    "{} {} process{}{}: BIC {:.2} (delta {:+.2}), chi2 {:.4e}, noise {:.3} %{}",
                    if i == sel.chosen { "*" } else { " " },
                    c.processes,
                    if c.processes == 1 { "" } else { "es" },
                    match c.splits {
                        0 => String::new(),
                        1 => " (one split)".to_string(),
                        n => format!(" ({n} splits)"),
                    },
                    c.fit.bic,
                    c.fit.bic - sel.chosen().fit.bic,
                    c.fit.chi2,
                    100.0 * c.fit.noise_rel,
                    if c.fit.converged {
                        ""
                    } else {
                        " (not converged)"
                    }
                )?;
            }
            if !summary.indistinguishable.is_empty() {
                writeln!(
                    w,
                    "not distinguishable from the chosen one (within 2 BIC units): {} processes",
                    summary
                        .indistinguishable
                        .iter()
                        .map(usize::to_string)
                        .collect::<Vec<_>>()
                        .join(", ")
                )?;
            }
            writeln!(w, "chosen circuit (value +- standard error):")?;
            for e in &summary.candidates[sel.chosen].elements {
                let ps: Vec<String> = e
                    .params
                    .iter()
                    .map(|p| {
                        let se = match (p.fixed, p.se) {
                            (true, _) => " (fixed)".to_string(),
                            (false, Some(se)) => format!(" +- {se:.3e}"),
                            (false, None) => " (not determined)".to_string(),
                        };
                        format!(
                            "{} = {:.6e}{}{se}",
                            p.name,
                            p.value,
                            if p.unit.is_empty() {
                                String::new()
                            } else {
                                format!(" {}", p.unit)
                            }
                        )
                    })
                    .collect();
                writeln!(w, "  {:<22} {:<10} {}", e.kind, e.label, ps.join(", "))?;
            }
            Ok(())
        },
    )
}

/// The `--start` model fitted as the only candidate.
fn fit_start(data: &FitData, model: &Model, drt: &Distribution) -> Result<Selection> {
    let elements: Vec<_> = model.elements.iter().map(|e| e.element).collect();
    let fixed: Vec<Vec<bool>> = model.elements.iter().map(|e| e.fixed.clone()).collect();
    let fit = fit_circuit(data, &elements, &fixed, &FitOptions::default())?;
    let warnings = fit.warnings.clone();
    Ok(Selection {
        candidates: vec![Candidate {
            processes: fit.processes(),
            peak_of: vec![None; elements.len()],
            variants: Vec::new(),
            splits: 0,
            fit,
        }],
        chosen: 0,
        close: Vec::new(),
        peaks: peak_shapes(drt),
        warnings,
    })
}

/// Residual rms (relative to |Z|, per real residual) above which a fit
/// is implausible whatever the DRT did: ten times the noise of a careful
/// measurement (0.5 %, common practice).
const CIRCUIT_RMS_WARN: f64 = 0.05;

/// The proposal's and the chosen fit's warnings, and checks of the
/// result: a circuit that fits much worse than the DRT (a process it
/// lacks), parameters the data do not determine (standard error above the
/// value).
fn plausibility(sel: &Selection, drt: &Distribution) -> Vec<String> {
    let mut w = sel.warnings.clone();
    let c = sel.chosen();
    for fw in &c.fit.warnings {
        if !w.contains(fw) {
            w.push(format!("chosen circuit: {fw}"));
        }
    }
    // The DRT's residual rms against the circuit's (both relative to |Z|,
    // per real residual).
    let circuit_rms = (c.fit.chi2 / c.fit.residuals as f64).sqrt();
    if drt.residual_rms_rel > 0.0 && circuit_rms > 3.0 * drt.residual_rms_rel {
        w.push(format!(
            "the chosen circuit leaves residuals {:.1} times those of the DRT ({:.3} % against {:.3} %): the data hold a feature no candidate has (try --max-processes or --start with another element)",
            circuit_rms / drt.residual_rms_rel,
            100.0 * circuit_rms,
            100.0 * drt.residual_rms_rel
        ));
    }
    if circuit_rms > CIRCUIT_RMS_WARN {
        w.push(format!(
            "the chosen circuit misses the data by {:.2} % rms (relative to |Z|): no candidate describes this spectrum; check the data (sign of Z'', units, Kramers-Kronig validity) before reading its values",
            100.0 * circuit_rms
        ));
    }
    for (i, e) in c.fit.elements.iter().enumerate() {
        for p in &e.params {
            if let Some(se) = p.se
                && se > p.value
            {
                w.push(format!(
                    "element {} ({}): parameter {} = {:.3e} has a standard error of {:.3e}: the data do not determine it",
                    i + 1,
                    e.element.kind().name(),
                    p.name,
                    p.value,
                    se
                ));
            }
        }
    }
    w
}

/// The three figures: Nyquist and Bode plots of the data with every
/// candidate's fit, and the measured DRT with the chosen circuit's
/// analytical one.
fn add_figures(
    set: &mut taumap::io::write::OutputSet,
    spectrum: &Spectrum,
    sel: &Selection,
    drt: &Distribution,
) -> Result<()> {
    let f = &spectrum.frequency_hz;
    let (lo, hi) = f
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(a, b), &x| (a.min(x), b.max(x)));
    let dense = taumap::synth::log_frequencies(lo, hi, 20.0);
    let curves_data: Vec<(String, bool, Vec<f64>, Vec<f64>)> = sel
        .candidates
        .iter()
        .enumerate()
        .map(|(i, c)| {
            let (re, im) = Series(c.fit.circuit()).sample(&dense);
            (
                format!(
                    "{} process{} (BIC {:.1})",
                    c.processes,
                    if c.processes == 1 { "" } else { "es" },
                    c.fit.bic
                ),
                i == sel.chosen,
                re,
                im,
            )
        })
        .collect();
    let curves: Vec<plot::ModelCurve> = curves_data
        .iter()
        .map(|(label, chosen, re, im)| plot::ModelCurve {
            label,
            chosen: *chosen,
            frequency_hz: &dense,
            z_re_ohm: re,
            z_im_ohm: im,
        })
        .collect();
    let fig = plot::ModelFitFigure {
        frequency_hz: f,
        z_re_ohm: &spectrum.z_re_ohm,
        z_im_ohm: &spectrum.z_im_ohm,
        curves: &curves,
        title: "Equivalent-circuit candidates",
    };
    // The chosen circuit's analytical DRT on a grid five times denser than
    // the inversion's.
    let chosen = Series(sel.chosen().fit.circuit());
    let (t0, t1) = (drt.tau_s[0].ln(), drt.tau_s[drt.tau_s.len() - 1].ln());
    let n = 5 * drt.tau_s.len();
    let model_tau: Vec<f64> = (0..n)
        .map(|i| (t0 + (t1 - t0) * i as f64 / (n - 1) as f64).exp())
        .collect();
    // The mean over each cell of the dense grid: finite where gamma is not
    // (a Gerischer element at tau0), equal to gamma where it is smooth.
    let cell = (t1 - t0) / (n - 1) as f64;
    let model_gamma: Vec<f64> = model_tau
        .iter()
        .map(|&t| {
            continuous_area(&chosen.0, t * (-0.5 * cell).exp(), t * (0.5 * cell).exp()) / cell
        })
        .collect();
    let lines = chosen.lines(20);
    let step_ln = (t1 - t0) / (drt.tau_s.len() - 1).max(1) as f64;
    let drt_fig = plot::ModelDrtFigure {
        tau_s: &drt.tau_s,
        gamma_ohm: &drt.gamma,
        model_tau_s: &model_tau,
        model_gamma_ohm: &model_gamma,
        model_lines: &lines,
        line_height_per_ohm: 1.0 / step_ln,
        title: "Measured DRT and the chosen circuit's",
    };
    for (ext, fmt) in FORMATS {
        set.add(
            format!("model-nyquist.{ext}"),
            plot::render_model_nyquist(&fig, fmt)?,
        )?;
        set.add(
            format!("model-bode.{ext}"),
            plot::render_model_bode(&fig, fmt)?,
        )?;
        set.add(
            format!("model-drt.{ext}"),
            plot::render_model_drt(&drt_fig, fmt)?,
        )?;
    }
    Ok(())
}
