//! `taumap invert`: spectrum in, DRT, fit, summary and plots out.

use super::args::{BasisArg, InvertArgs, OnOff, PenaltyArg, SolveArgs, WeightingArg};
use super::output::{
    FORMATS, add_distribution, fixed6, interval_phrase, labelled, lambda_phrase, output_set,
    print_warnings,
};
use anyhow::{Result, bail};
use std::path::{Path, PathBuf};
use taumap::io::Spectrum;
use taumap::io::spectrum::{SpectrumLayout, read_spectrum_with};
use taumap::kernel::BasisKind;
use taumap::kk::{KkOptions, KkTest, kk_test};
use taumap::pipeline::adaptive::AdaptiveOptions;
use taumap::pipeline::bands::BandOptions;
use taumap::pipeline::{
    CapacitanceMode, DrtOptions, InvertParams, LambdaChoice, LambdaRule, SpectrumInversion,
    Weighting, invert,
};
use taumap::plot;
use taumap::report::{self, Summary};

/// Turns the shared solver options into [`DrtOptions`], with
/// `default_per_decade` unless `--per-decade` is given, and bands unless
/// `--bands` says otherwise when `bands_default` is on.
pub fn drt_options_from(
    solve: &SolveArgs,
    default_per_decade: f64,
    bands_default: OnOff,
) -> Result<DrtOptions> {
    let lambda = match LambdaRule::from_name(&solve.lambda) {
        Some(rule) => LambdaChoice::Rule(rule),
        None => match solve.lambda.trim().parse::<f64>() {
            Ok(v) if v.is_finite() && v > 0.0 => LambdaChoice::Fixed(v),
            _ => bail!(
                "--lambda must be a rule (gcv, lcurve, discrepancy, recv) or a positive number, got \"{}\"",
                solve.lambda
            ),
        },
    };
    let p = DrtOptions {
        per_decade: solve.per_decade.unwrap_or(default_per_decade),
        tau_min_s: solve.tau_min,
        tau_max_s: solve.tau_max,
        basis: match solve.basis {
            BasisArg::Gaussian => BasisKind::Gaussian,
            BasisArg::Hat => BasisKind::Hat,
        },
        penalty_order: solve.penalty_order,
        lambda,
        all_curves: !solve.no_cv_curve,
        adaptive: match solve.penalty {
            PenaltyArg::Global => None,
            PenaltyArg::Adaptive => Some(AdaptiveOptions::default()),
        },
        bands: match (solve.bands.unwrap_or(bands_default), solve.penalty) {
            (OnOff::Off, _) => None,
            (OnOff::On, PenaltyArg::Global) => {
                eprintln!(
                    "note: no uncertainty bands with --penalty global (they are sampled from the \
                     adaptive penalty's posterior; see README)"
                );
                None
            }
            (OnOff::On, PenaltyArg::Adaptive) => Some(BandOptions {
                seed: solve.seed,
                ..BandOptions::default()
            }),
        },
        ..DrtOptions::default()
    };
    p.validate()?;
    Ok(p)
}

/// Default output directory: `<stem>-taumap/` beside the input.
pub fn default_out_dir(input: &Path) -> PathBuf {
    out_dir_named(input, "taumap")
}

/// `<stem>-<suffix>/` beside the input.
pub fn out_dir_named(input: &Path, suffix: &str) -> PathBuf {
    let stem = input
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "spectrum".into());
    input
        .parent()
        .unwrap_or_else(|| Path::new("."))
        .join(format!("{stem}-{suffix}"))
}

/// Names the input file in an error about its data, but not in an error
/// about a setting (`--per-decade 1000`, `--basis hat --penalty-order 2`:
/// [`taumap::Error::Param`] and [`taumap::Error::Config`]), where the file
/// is not at fault.
pub fn in_file<T>(result: taumap::Result<T>, input: &Path) -> Result<T> {
    result.map_err(|e| match e {
        taumap::Error::Param { .. } | taumap::Error::Config(_) => anyhow::Error::new(e),
        e => anyhow::Error::new(e).context(input.display().to_string()),
    })
}

/// The output directory: `--out`, else [`default_out_dir`]; standard
/// input (`-`) has no place of its own, so it needs `--out`.
pub fn out_dir(input: &Path, out: Option<&Path>) -> Result<PathBuf> {
    match out {
        // Said before the inversion, not after it.
        Some(dir) if std::fs::metadata(dir).is_ok_and(|m| !m.is_dir()) => {
            bail!(
                "{}: is a file, not a folder (choose another output folder)",
                dir.display()
            )
        }
        Some(dir) => Ok(dir.to_path_buf()),
        None if input == Path::new("-") => {
            bail!("reading standard input (\"-\") needs an output directory: give --out DIR")
        }
        None => Ok(default_out_dir(input)),
    }
}

/// The points of `spectrum` within `--f-min`/`--f-max` (all without
/// them); says on stderr how many are kept.
pub(super) fn band(
    input: &Path,
    spectrum: Spectrum,
    f_min: Option<f64>,
    f_max: Option<f64>,
) -> Result<Spectrum> {
    if f_min.is_none() && f_max.is_none() {
        return Ok(spectrum);
    }
    for (name, v) in [("f-min", f_min), ("f-max", f_max)] {
        if let Some(v) = v
            && !(v.is_finite() && v > 0.0)
        {
            bail!("parameter `{name}` must be a positive frequency in Hz, got {v}");
        }
    }
    let (lo, hi) = (f_min.unwrap_or(0.0), f_max.unwrap_or(f64::INFINITY));
    if lo > hi {
        bail!("parameter `f-max` must be at least f-min ({lo}), got {hi}");
    }
    let keep: Vec<usize> = (0..spectrum.len())
        .filter(|&i| (lo..=hi).contains(&spectrum.frequency_hz[i]))
        .collect();
    let pick = |v: &[f64]| keep.iter().map(|&i| v[i]).collect::<Vec<f64>>();
    let n = keep.len();
    if n < taumap::io::spectrum::MIN_POINTS {
        bail!(
            "{}: --f-min/--f-max keep {n} of {} points; at least {} are needed",
            input.display(),
            spectrum.len(),
            taumap::io::spectrum::MIN_POINTS
        );
    }
    eprintln!(
        "note: {}: fitting {n} of {} points, {:.4e} to {:.4e} Hz (--f-min/--f-max)",
        input.display(),
        spectrum.len(),
        spectrum.frequency_hz[keep[0]],
        spectrum.frequency_hz[keep[n - 1]]
    );
    Ok(Spectrum::new(
        pick(&spectrum.frequency_hz),
        pick(&spectrum.z_re_ohm),
        pick(&spectrum.z_im_ohm),
    )?)
}

/// Says on stderr how the reader took a file whose layout is not the
/// canonical one: skipped free text, converted units, its encoding.
pub(super) fn report_layout(input: &Path, layout: &SpectrumLayout) {
    let name = if input == Path::new("-") {
        "<stdin>".to_string()
    } else {
        input.display().to_string()
    };
    if let Some((first, last)) = layout.preamble {
        eprintln!(
            "note: {name}: lines {first}-{last} are free text above the header (line {}); skipped",
            layout.header_line
        );
    }
    if layout.encoding != taumap::io::table::TextEncoding::Utf8 {
        eprintln!("note: {name}: read as {}", layout.encoding.name());
    }
    let units = ["Hz", "ohm", if layout.polar { "degrees" } else { "ohm" }];
    for ((col, factor), unit) in layout.column_names.iter().zip(layout.factors).zip(units) {
        if factor != 1.0 {
            eprintln!("note: {name}: column \"{col}\" converted to {unit} (x {factor:e})");
        }
    }
}

/// Runs the subcommand.
pub fn run(a: &InvertArgs) -> Result<()> {
    let params = InvertParams {
        drt: drt_options_from(&a.solve, DrtOptions::default().per_decade, OnOff::On)?,
        inductance: a.series.modes().0,
        weighting: match a.weighting {
            WeightingArg::Modulus => Weighting::Modulus,
            WeightingArg::Unit => Weighting::Unit,
        },
        series_capacitance: a.series.modes().1,
    };
    let out = out_dir(&a.input, a.out.as_deref())?;
    let (spectrum, layout) = read_spectrum_with(&a.input, &a.columns.map()?)?;
    report_layout(&a.input, &layout);
    let spectrum = band(&a.input, spectrum, a.band.f_min, a.band.f_max)?;
    let reader_warnings: Vec<String> = layout
        .imag_mostly_positive
        .then(|| {
            "the imaginary part is positive at most frequencies; taumap expects Z'' with its physical sign (negative when capacitive)".to_string()
        })
        .into_iter()
        .collect();
    // Said at once, so a user whose inversion then fails still sees it.
    for w in &reader_warnings {
        eprintln!("warning: {}: {w}", a.input.display());
    }
    let (summary, written) = invert_into(
        &a.input,
        &spectrum,
        &params,
        &out,
        !a.solve.no_plots,
        reader_warnings,
    )?;
    if params.series_capacitance == CapacitanceMode::Auto
        && let Some(c) = summary.series_capacitance_f
    {
        eprintln!(
            "note: {}: the fit needs a series capacitance (a capacitive low-frequency branch): \
             C = {c:.3e} F, kept by the significance test (--series-capacitance=off to leave it out)",
            a.input.display()
        );
    }
    report_run(&summary, &out, &written, a.solve.json)
}

/// Inverts `spectrum` (read from `input`) and commits every output to `out`
/// together; returns the summary and the files written. `reader_warnings`
/// (doubts the reader had about the file, already printed) lead the
/// summary's warnings.
pub fn invert_into(
    input: &Path,
    spectrum: &Spectrum,
    params: &InvertParams,
    out: &Path,
    plots: bool,
    reader_warnings: Vec<String>,
) -> Result<(Summary, Vec<PathBuf>)> {
    // Whole-spectrum problems name the file they came from.
    let mut inv = in_file(invert(spectrum, params), input)?;
    let kk = kk_verdict(input, spectrum, params);
    print_warnings(input, &inv.drt);
    inv.drt.warnings.splice(0..0, reader_warnings);
    if let Some(w) = kk.as_ref().and_then(|t| t.failure()) {
        eprintln!("warning: {}: {w}", input.display());
        inv.drt.warnings.push(w);
    }
    let summary =
        Summary::new(&input.display().to_string(), spectrum, params, &inv).with_kk(kk.as_ref());
    let written = write_outputs(out, spectrum, &inv, &summary, plots)?;
    Ok((summary, written))
}

/// The Kramers-Kronig test of the spectrum about to be inverted, with the
/// inversion's series-term modes (a failure is said by the caller, after
/// the inversion's own warnings; the inversion still runs). `None`, with a
/// note, when the test cannot run (fewer points than it needs).
fn kk_verdict(input: &Path, spectrum: &Spectrum, params: &InvertParams) -> Option<KkTest> {
    let opts = KkOptions {
        inductance: params.inductance,
        capacitance: params.series_capacitance,
        ..KkOptions::default()
    };
    match kk_test(spectrum, &opts) {
        Ok(t) => Some(t),
        Err(e) => {
            eprintln!("note: {}: no Kramers-Kronig verdict: {e}", input.display());
            None
        }
    }
}

/// Prints either the JSON summary (with `--json`) or a short human report.
pub fn report_run(summary: &Summary, out: &Path, written: &[PathBuf], json: bool) -> Result<()> {
    super::output::report_run(json.then(|| summary.to_json()), out, written, |w| {
        writeln!(
            w,
            "r_inf = {} ohm, r_pol = {} ohm, {}",
            fixed6(summary.r_inf_ohm),
            fixed6(summary.r_pol_ohm),
            lambda_phrase(&summary.fit)
        )?;
        if let Some(l) = summary.inductance_h {
            writeln!(w, "inductance = {l:.4e} H")?;
        }
        for (label, p) in labelled(&summary.peaks, &summary.weak_peaks) {
            writeln!(
                w,
                "{label}: tau = {:.4e} s ({:.4e} Hz), r = {} ohm{}",
                p.tau_s,
                p.frequency_hz,
                fixed6(p.r_ohm),
                interval_phrase(&p.interval, p.r_lo_ohm, p.r_hi_ohm, "ohm")
            )?;
        }
        Ok(())
    })
}

/// Builds every output in memory, then commits them together.
pub fn write_outputs(
    out: &Path,
    spectrum: &Spectrum,
    inv: &SpectrumInversion,
    summary: &Summary,
    plots: bool,
) -> Result<Vec<PathBuf>> {
    let mut set = output_set(out);
    add_distribution(
        &mut set,
        &inv.drt,
        "Distribution of relaxation times",
        plots,
    )?;
    set.add("fit.csv", report::fit_csv(spectrum, &inv.fit))?;
    set.add("summary.json", summary.to_json())?;
    if plots {
        let fit = &inv.fit;
        for (ext, fmt) in FORMATS {
            set.add(
                format!("nyquist.{ext}"),
                plot::render_nyquist(
                    &plot::NyquistFigure {
                        z_re_ohm: &spectrum.z_re_ohm,
                        z_im_ohm: &spectrum.z_im_ohm,
                        fit_re_ohm: &fit.fit_re_ohm,
                        fit_im_ohm: &fit.fit_im_ohm,
                        title: "Nyquist plot: data and DRT fit",
                    },
                    fmt,
                )?,
            )?;
            set.add(
                format!("bode.{ext}"),
                plot::render_bode(
                    &plot::BodeFigure {
                        frequency_hz: &spectrum.frequency_hz,
                        z_re_ohm: &spectrum.z_re_ohm,
                        z_im_ohm: &spectrum.z_im_ohm,
                        fit_re_ohm: &fit.fit_re_ohm,
                        fit_im_ohm: &fit.fit_im_ohm,
                        residual_re_rel: &fit.residual_re_rel,
                        residual_im_rel: &fit.residual_im_rel,
                        title: "Bode plot and relative residuals",
                    },
                    fmt,
                )?,
            )?;
        }
    }
    Ok(set.commit()?)
}
