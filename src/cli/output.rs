//! What every inversion command writes and prints, whatever it measured:
//! the distribution's files and figures, the warnings, and the lines of the
//! console report that spectra and transients share.

use anyhow::Result;
use std::io::Write;
use std::path::{Path, PathBuf};
use taumap::io::write::OutputSet;
use taumap::pipeline::Distribution;
use taumap::plot::{self, ImageFormat};
use taumap::report;

/// Every file a command (inversion or test) may write into its output
/// directory. A run removes those of them it does not write itself (an
/// earlier run's plots, a `lambda.csv` from before a fixed-lambda run, the
/// files of another command), never anything else.
pub const OUTPUT_FILES: [&str; 35] = [
    "drt.csv",
    "fit.csv",
    "lambda.csv",
    "summary.json",
    "drt.svg",
    "drt.png",
    "lambda.svg",
    "lambda.png",
    "nyquist.svg",
    "nyquist.png",
    "bode.svg",
    "bode.png",
    "transient.svg",
    "transient.png",
    "residuals.csv",
    "kk.svg",
    "kk.png",
    "tracks.csv",
    "trends.csv",
    "drt-series.csv",
    "spectra.csv",
    "heatmap.svg",
    "heatmap.png",
    "trends.svg",
    "trends.png",
    "arrhenius.svg",
    "arrhenius.png",
    "model.txt",
    "parameters.csv",
    "model-nyquist.svg",
    "model-nyquist.png",
    "model-bode.svg",
    "model-bode.png",
    "model-drt.svg",
    "model-drt.png",
];

/// An empty set of outputs for `dir` that replaces every earlier
/// inversion's files there.
pub fn output_set(dir: &Path) -> OutputSet {
    OutputSet::new(dir).owning(&OUTPUT_FILES)
}

/// Both image formats, with their file extensions.
pub const FORMATS: [(&str, ImageFormat); 2] =
    [("svg", ImageFormat::Svg), ("png", ImageFormat::Png)];

/// Adds `drt.csv`, `lambda.csv` (when a rule chose lambda) and, with
/// `plots`, the DRT and lambda figures of `drt` to `set`.
pub fn add_distribution(
    set: &mut OutputSet,
    drt: &Distribution,
    drt_title: &str,
    plots: bool,
) -> Result<()> {
    set.add("drt.csv", report::drt_csv(drt))?;
    if let Some(l) = report::lambda_csv(&drt.lambda) {
        set.add("lambda.csv", l)?;
    }
    if plots {
        for (ext, fmt) in FORMATS {
            set.add(
                format!("drt.{ext}"),
                plot::render_distribution(drt, drt_title, fmt)?,
            )?;
            if let Some(bytes) = plot::render_lambda_selection(&drt.lambda, fmt) {
                set.add(format!("lambda.{ext}"), bytes?)?;
            }
        }
    }
    Ok(())
}

/// Prints every warning of `drt` as `warning: INPUT: ...` on stderr.
pub fn print_warnings(input: &Path, drt: &Distribution) {
    for w in &drt.warnings {
        eprintln!("warning: {}: {w}", input.display());
    }
    if let Some(n) = drt.lambda.note() {
        eprintln!("note: {}: {n}", input.display());
    }
}

/// A value for the console: six decimals in the range people read that way
/// (1e-3 to 1e6, and zero), else six significant digits in exponent form, so
/// 1e-30 ohm does not print as 0.000000 nor 1e300 as 300 digits.
pub fn fixed6(v: f64) -> String {
    if v == 0.0 || (1e-3..1e6).contains(&v.abs()) {
        format!("{v:.6}")
    } else {
        format!("{v:.6e}")
    }
}

/// `" (90 % interval: tau 1.0e-3..1.1e-3 s, r 0.10..0.12 ohm; confidence
/// 0.98)"` for a peak with bands, empty without.
pub fn interval_phrase(
    i: &report::PeakInterval,
    lo: Option<f64>,
    hi: Option<f64>,
    unit: &str,
) -> String {
    match (i.confidence, i.tau_lo_s, i.tau_hi_s, lo, hi) {
        (Some(c), Some(tl), Some(th), Some(lo), Some(hi)) => format!(
            " (tau {tl:.3e}..{th:.3e} s, {}..{} {unit}; confidence {c:.2})",
            fixed6(lo),
            fixed6(hi)
        ),
        (Some(c), ..) => format!(" (confidence {c:.2})"),
        _ => String::new(),
    }
}

/// The peaks of a summary for the console: `peak 1`, `peak 2`, ... then
/// every weak one as `weak peak`.
pub fn labelled<'a, T>(peaks: &'a [T], weak: &'a [T]) -> impl Iterator<Item = (String, &'a T)> {
    peaks
        .iter()
        .enumerate()
        .map(|(i, p)| (format!("peak {}", i + 1), p))
        .chain(weak.iter().map(|p| ("weak peak".to_string(), p)))
}

/// The console's `lambda = ... (rule), residual rms = ... %` phrase.
pub fn lambda_phrase(fit: &report::FitSummary) -> String {
    format!(
        "lambda = {:.3e} ({}), residual rms = {:.3} %",
        fit.lambda.lambda,
        fit.lambda.lambda_rule,
        100.0 * fit.residual_rms_rel
    )
}

/// Prints the JSON summary (with `--json`) or, through `human`, the short
/// report followed by the count of files written.
pub fn report_run(
    json: Option<String>,
    out: &Path,
    written: &[PathBuf],
    human: impl FnOnce(&mut dyn Write) -> std::io::Result<()>,
) -> Result<()> {
    let mut stdout = std::io::stdout().lock();
    if let Some(text) = json {
        stdout.write_all(text.as_bytes())?;
        return Ok(());
    }
    human(&mut stdout)?;
    writeln!(stdout, "wrote {} files to {}", written.len(), out.display())?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::fixed6;

    #[test]
    fn console_values_stay_readable_at_any_magnitude() {
        assert_eq!(fixed6(0.150492), "0.150492");
        assert_eq!(fixed6(0.0), "0.000000");
        assert_eq!(fixed6(1e-30), "1.000000e-30");
        assert_eq!(fixed6(-2.5e300), "-2.500000e300");
        assert_eq!(fixed6(12345.678), "12345.678000");
    }
}
