//! `taumap kk`: is a spectrum valid (linear, causal, stable while it was
//! measured)? The linear Kramers-Kronig test of [`taumap::kk`]; residuals,
//! summary and a residual plot out.

use super::args::KkArgs;
use super::invert::{band, in_file, out_dir_named, report_layout};
use super::output::{FORMATS, output_set, report_run};
use anyhow::{Result, bail};
use std::path::{Path, PathBuf};
use taumap::io::spectrum::read_spectrum_with;
use taumap::kk::{KkOptions, kk_test};
use taumap::plot;
use taumap::report::kk::{KkSummary, residuals_csv};

/// Runs the subcommand.
pub fn run(a: &KkArgs) -> Result<()> {
    let opts = KkOptions {
        noise_rel: a.noise_rel,
        inductance: a.series.modes().0,
        capacitance: a.series.modes().1,
        ..KkOptions::default()
    };
    if let Some(v) = a.noise_rel
        && !(v.is_finite() && v > 0.0)
    {
        bail!(
            "parameter `noise-rel` must be a positive relative noise level (0.001 for 0.1 %), got {v}"
        );
    }
    let out = match a.out.as_deref() {
        Some(_) => super::invert::out_dir(&a.input, a.out.as_deref())?,
        None if a.input == Path::new("-") => super::invert::out_dir(&a.input, None)?,
        None => out_dir_named(&a.input, "kk"),
    };
    let (spectrum, layout) = read_spectrum_with(&a.input, &a.columns.map()?)?;
    report_layout(&a.input, &layout);
    let spectrum = band(&a.input, spectrum, a.band.f_min, a.band.f_max)?;
    let t = in_file(kk_test(&spectrum, &opts), &a.input)?;
    let name = a.input.display().to_string();
    for w in &t.warnings {
        eprintln!("warning: {name}: {w}");
    }
    if let Some(w) = t.failure() {
        eprintln!("warning: {name}: {w}");
    }
    let summary = KkSummary::new(&name, &t, &opts);
    let mut set = output_set(&out);
    set.add("residuals.csv", residuals_csv(&t))?;
    set.add("summary.json", summary.to_json())?;
    if !a.no_plots {
        for (ext, fmt) in FORMATS {
            set.add(
                format!("kk.{ext}"),
                plot::render_kk(
                    &plot::KkFigure {
                        frequency_hz: &t.frequency_hz,
                        residual_re_rel: &t.residual_re_rel,
                        residual_im_rel: &t.residual_im_rel,
                        point_limit_rel: t.point_limit_rel,
                        noise_rel: t.noise_rel,
                        title: "Kramers-Kronig residuals",
                    },
                    fmt,
                )?,
            )?;
        }
    }
    let written: Vec<PathBuf> = set.commit()?;
    report_run(a.json.then(|| summary.to_json()), &out, &written, |w| {
        let verdict = match t.valid {
            Some(true) => "valid",
            Some(false) => "not valid",
            None => "not testable",
        };
        writeln!(
            w,
            "Kramers-Kronig: {verdict}: residual rms {:.3} % (limit {:.3} %, noise {:.3} % {}), {} Voigt elements, mu = {:.2}",
            100.0 * t.residual_rms_rel,
            100.0 * t.threshold_rel,
            100.0 * t.noise_rel,
            match t.noise_source {
                taumap::kk::NoiseSource::Estimated => "estimated",
                taumap::kk::NoiseSource::Given => "given",
            },
            t.elements,
            t.mu
        )?;
        if !t.flagged_hz.is_empty() {
            writeln!(
                w,
                "{} frequencies beyond the single-point limit ({:.3} %), from {:.4e} to {:.4e} Hz",
                t.flagged_hz.len(),
                100.0 * t.point_limit_rel,
                t.flagged_hz[0],
                t.flagged_hz[t.flagged_hz.len() - 1]
            )?;
        }
        Ok(())
    })
}
