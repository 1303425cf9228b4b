//! `taumap transient`: step transient in, distribution, fit, summary and plots out.

use super::args::TransientArgs;
use super::invert::{default_out_dir, drt_options_from, lambda_figure};
use anyhow::{Context, Result};
use std::io::Write;
use std::path::{Path, PathBuf};
use taumap::io::transient::{BinOptions, BinnedTransient, read_transient};
use taumap::io::write::OutputSet;
use taumap::plot::{self, ImageFormat};
use taumap::report::transient::{self as report, Quantities, TransientSummary};
use taumap::transient::{
    DistributionUnit, StepKind, TRANSIENT_PER_DECADE, TransientInversion, TransientParams,
    invert_transient,
};

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
        drt: drt_options_from(&a.solve, TRANSIENT_PER_DECADE)?,
        step: step_from(a),
        baseline: a.baseline,
        series_capacitance: a.series_capacitance,
    };
    params.validate()?;
    let bins = BinOptions {
        bins_per_decade: a.bins_per_decade,
        fit_start_s: a.fit_start,
        step_time_s: a.step_time,
    };
    let record = read_transient(&a.input, params.step.quantity(), &bins)?;
    let out = a.out.clone().unwrap_or_else(|| default_out_dir(&a.input));
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
    let inv = invert_transient(record, params).with_context(|| input.display().to_string())?;
    for w in &inv.warnings {
        eprintln!("warning: {}: {w}", input.display());
    }
    let summary = TransientSummary::new(&input.display().to_string(), record, bins, params, &inv);
    let mut set = OutputSet::new(out);
    set.add("drt.csv", report::drt_csv(&inv))?;
    set.add("fit.csv", report::fit_csv(&inv))?;
    if let Some(l) = taumap::report::lambda_table(inv.curves.as_ref()) {
        set.add("lambda.csv", l)?;
    }
    set.add("summary.json", summary.to_json())?;
    if plots {
        for (name, bytes) in figures(&inv)? {
            set.add(name, bytes)?;
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
    let mut stdout = std::io::stdout().lock();
    if json {
        stdout.write_all(summary.to_json().as_bytes())?;
        return Ok(());
    }
    let tail = format!(
        "lambda = {:.3e} ({}), residual rms = {:.3} % of the step response",
        summary.lambda,
        summary.lambda_rule,
        100.0 * summary.residual_rms_rel
    );
    match &summary.quantities {
        Quantities::Ohm {
            r_inf_ohm,
            r_pol_ohm,
            series_capacitance_f,
            v_inf_v,
            peaks,
        } => {
            let r_inf = r_inf_ohm.map_or("unknown (no baseline)".to_string(), |r| {
                format!("{r:.6} ohm")
            });
            writeln!(
                stdout,
                "r_inf = {r_inf}, r_pol = {r_pol_ohm:.6} ohm, {tail}"
            )?;
            if let Some(v) = v_inf_v {
                writeln!(stdout, "final voltage v_inf = {v:.6} V")?;
            }
            if let Some(c) = series_capacitance_f {
                writeln!(stdout, "series capacitance = {c:.4e} F")?;
            }
            for (i, p) in peaks.iter().enumerate() {
                writeln!(
                    stdout,
                    "peak {}: tau = {:.4e} s, r = {:.6} ohm",
                    i + 1,
                    p.tau_s,
                    p.r_ohm
                )?;
            }
        }
        Quantities::Siemens {
            g_inf_siemens,
            g_pol_siemens,
            peaks,
        } => {
            writeln!(
                stdout,
                "g_inf = {g_inf_siemens:.6e} S, g_pol = {g_pol_siemens:.6e} S (admittance distribution), {tail}"
            )?;
            for (i, p) in peaks.iter().enumerate() {
                writeln!(
                    stdout,
                    "peak {}: tau = {:.4e} s, g = {:.6e} S",
                    i + 1,
                    p.tau_s,
                    p.g_siemens
                )?;
            }
        }
    }
    writeln!(stdout, "wrote {} files to {}", written.len(), out.display())?;
    Ok(())
}

/// Every plot of a transient inversion as (file name, bytes).
pub fn figures(inv: &TransientInversion) -> Result<Vec<(String, Vec<u8>)>> {
    let peaks: Vec<f64> = inv.peaks.iter().map(|p| p.tau_s).collect();
    let (y_label, drt_label, title) = match inv.step {
        StepKind::CurrentStep { .. } => (
            "voltage (V)",
            "gamma (ohm)",
            "Current step: voltage and fit",
        ),
        StepKind::Relaxation { .. } => (
            "voltage (V)",
            "gamma (ohm)",
            "Relaxation after current interruption: voltage and fit",
        ),
        StepKind::VoltageStep { .. } => ("current (A)", "g (S)", "Voltage step: current and fit"),
    };
    let drt_title = match inv.unit {
        DistributionUnit::Ohm => "Distribution of relaxation times (from the transient)",
        DistributionUnit::Siemens => {
            "Admittance distribution of time constants (not the impedance DRT)"
        }
    };
    let mut out = Vec::new();
    for (ext, fmt) in [("svg", ImageFormat::Svg), ("png", ImageFormat::Png)] {
        out.push((
            format!("transient.{ext}"),
            plot::render_transient(
                &plot::TransientFigure {
                    time_s: &inv.time_s,
                    measured: &inv.measured,
                    fitted: &inv.fitted,
                    residual_scale: inv.response_span,
                    y_label,
                    title,
                },
                fmt,
            )?,
        ));
        out.push((
            format!("drt.{ext}"),
            plot::render_drt(
                &plot::DrtFigure {
                    tau_s: &inv.tau_s,
                    gamma: &inv.distribution,
                    y_label: drt_label,
                    peaks_tau_s: &peaks,
                    title: drt_title,
                },
                fmt,
            )?,
        ));
        if let Some(c) = &inv.curves {
            out.push((format!("lambda.{ext}"), lambda_figure(c, inv.lambda, fmt)?));
        }
    }
    Ok(out)
}
