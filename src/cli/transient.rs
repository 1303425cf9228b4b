//! `taumap transient`: step transient in, distribution, fit, summary and plots out.

use super::args::TransientArgs;
use super::invert::{drt_options_from, in_file, out_dir};
use super::output::{
    FORMATS, add_distribution, fixed6, interval_phrase, labelled, lambda_phrase, output_set,
    print_warnings,
};
use anyhow::Result;
use std::path::{Path, PathBuf};
use taumap::io::transient::read_transient_with;
use taumap::pipeline::binning::{BinOptions, BinnedTransient};
use taumap::pipeline::{
    DistributionUnit, StepKind, TRANSIENT_PER_DECADE, TransientParams, invert_transient,
};
use taumap::plot;
use taumap::report::transient::{self as report, Quantities, TransientSummary};

/// The step given on the command line (clap guarantees exactly one).
fn step_from(a: &TransientArgs) -> StepKind {
    match (a.current_step_a, a.relaxation_current_a, a.voltage_step_v) {
        (Some(current_a), _, _) => StepKind::CurrentStep { current_a },
        (_, Some(current_a), _) => StepKind::Relaxation { current_a },
        (_, _, Some(voltage_v)) => StepKind::VoltageStep { voltage_v },
        (None, None, None) => unreachable!("clap requires one step option"),
    }
}

/// Runs the subcommand.
pub fn run(a: &TransientArgs) -> Result<()> {
    let params = TransientParams {
        drt: drt_options_from(&a.solve, TRANSIENT_PER_DECADE, super::args::OnOff::On)?,
        step: step_from(a),
        baseline: a.baseline,
        series_capacitance: a.series_capacitance,
    };
    params.validate()?;
    let bins = BinOptions {
        bins_per_decade: a.bins_per_decade,
        fit_start_s: a.fit_start,
        fit_end_s: a.fit_end.unwrap_or(f64::INFINITY),
        step_time_s: a.step_time,
    };
    let out = out_dir(&a.input, a.out.as_deref())?;
    let record = read_transient_with(&a.input, params.step.quantity(), &bins, &a.columns.map()?)?;
    let (summary, written) =
        transient_into(&a.input, &record, &bins, &params, &out, !a.solve.no_plots)?;
    report_run(&summary, &out, &written, a.solve.json)
}

/// Inverts `record` (read from `input`) and commits every output to `out`
/// together; returns the summary and the files written.
pub fn transient_into(
    input: &Path,
    record: &BinnedTransient,
    bins: &BinOptions,
    params: &TransientParams,
    out: &Path,
    plots: bool,
) -> Result<(TransientSummary, Vec<PathBuf>)> {
    // Whole-record problems name the file they came from.
    let inv = in_file(invert_transient(record, params), input)?;
    print_warnings(input, &inv.drt);
    let summary = TransientSummary::new(&input.display().to_string(), record, bins, params, &inv);
    let mut set = output_set(out);
    let drt_title = match inv.drt.unit {
        DistributionUnit::Ohm => "Distribution of relaxation times (from the transient)",
        DistributionUnit::Siemens => {
            "Admittance distribution of time constants (not the impedance DRT)"
        }
    };
    add_distribution(&mut set, &inv.drt, drt_title, plots)?;
    set.add("fit.csv", report::fit_csv(&inv.fit))?;
    set.add("summary.json", summary.to_json())?;
    if plots {
        let fit = &inv.fit;
        let (y_label, title) = match fit.step {
            StepKind::CurrentStep { .. } => ("voltage (V)", "Current step: voltage and fit"),
            StepKind::Relaxation { .. } => (
                "voltage (V)",
                "Relaxation after current interruption: voltage and fit",
            ),
            StepKind::VoltageStep { .. } => ("current (A)", "Voltage step: current and fit"),
        };
        for (ext, fmt) in FORMATS {
            set.add(
                format!("transient.{ext}"),
                plot::render_transient(
                    &plot::TransientFigure {
                        time_s: &fit.time_s,
                        measured: &fit.measured,
                        fitted: &fit.fitted,
                        residual_scale: fit.response_span,
                        y_label,
                        title,
                    },
                    fmt,
                )?,
            )?;
        }
    }
    Ok((summary, set.commit()?))
}

/// Prints either the JSON summary (with `--json`) or a short human report.
pub fn report_run(
    summary: &TransientSummary,
    out: &Path,
    written: &[PathBuf],
    json: bool,
) -> Result<()> {
    super::output::report_run(json.then(|| summary.to_json()), out, written, |w| {
        let tail = format!("{} of the step response", lambda_phrase(&summary.fit));
        match &summary.quantities {
            Quantities::Ohm {
                r_inf_ohm,
                r_pol_ohm,
                series_capacitance_f,
                v_inf_v,
                peaks,
                weak_peaks,
            } => {
                let r_inf = r_inf_ohm.map_or("unknown (no baseline)".to_string(), |r| {
                    format!("{} ohm", fixed6(r))
                });
                writeln!(
                    w,
                    "r_inf = {r_inf}, r_pol = {} ohm, {tail}",
                    fixed6(*r_pol_ohm)
                )?;
                if let Some(v) = v_inf_v {
                    writeln!(w, "final voltage v_inf = {} V", fixed6(*v))?;
                }
                if let Some(c) = series_capacitance_f {
                    writeln!(w, "series capacitance = {c:.4e} F")?;
                }
                for (label, p) in labelled(peaks, weak_peaks) {
                    writeln!(
                        w,
                        "{label}: tau = {:.4e} s, r = {} ohm{}",
                        p.tau_s,
                        fixed6(p.r_ohm),
                        interval_phrase(&p.interval, p.r_lo_ohm, p.r_hi_ohm, "ohm")
                    )?;
                }
            }
            Quantities::Siemens {
                g_inf_siemens,
                g_pol_siemens,
                peaks,
                weak_peaks,
            } => {
                writeln!(
                    w,
                    "g_inf = {g_inf_siemens:.6e} S, g_pol = {g_pol_siemens:.6e} S (admittance distribution), {tail}"
                )?;
                for (label, p) in labelled(peaks, weak_peaks) {
                    writeln!(
                        w,
                        "{label}: tau = {:.4e} s, g = {:.6e} S{}",
                        p.tau_s,
                        p.g_siemens,
                        interval_phrase(&p.interval, p.g_lo_siemens, p.g_hi_siemens, "S")
                    )?;
                }
            }
        }
        Ok(())
    })
}
