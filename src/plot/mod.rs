//! Figures of spectra, distributions, transients and regularisation scores,
//! rendered to SVG text or PNG bytes in memory.
//!
//! This is the only module that knows about drawing. Every `render_*`
//! function takes a borrowed figure description and an [`ImageFormat`] and
//! returns the encoded image; writing it to disk is left to the caller.
//!
//! - [`render_drt`]: γ against τ on a log axis, peaks marked, with an
//!   optional uncertainty band.
//! - [`render_nyquist`]: −Z″ against Z′ with equal ohm-per-pixel scales.
//! - [`render_bode`]: |Z|, phase and relative residuals against frequency.
//! - [`render_kk`]: Kramers-Kronig test residuals against frequency, with
//!   the band the verdict allows.
//! - [`render_lambda`]: one panel of score against λ per selection rule.
//! - [`render_transient`]: a step response and its fit, with residuals.
//! - [`render_model_nyquist`], [`render_model_bode`], [`render_model_drt`]:
//!   equivalent circuits fitted to a spectrum: the candidates' curves over
//!   the data, the chosen one's residuals, and its analytical DRT (a curve
//!   and stems) over the measured one.
//! - [`render_heatmap`], [`render_trends`], [`render_arrhenius`]: a series
//!   of spectra: its distributions as a heat map with the tracked processes
//!   drawn over it, the processes' τ and R against the series, and their
//!   Arrhenius plot with fitted activation energies.
//!
//! Text uses DejaVu Sans, compiled into the crate, so PNG output does not
//! depend on fonts installed on the machine. SVG output names the same
//! family, with `sans-serif` as fallback.
//!
//! Entries that cannot be shown (NaN, infinite, or not positive on a log
//! axis) are skipped, and a line is broken where they occur. A required
//! series that is empty, or series whose lengths disagree, give
//! [`Error::Plot`](crate::Error::Plot), whose path is the file name the plot
//! would usually get (`drt.svg`, `nyquist.png`, ...).
#![warn(clippy::unwrap_used, clippy::float_cmp)]

mod axis;
mod bode;
mod common;
mod draw;
mod drt;
mod kk;
mod lambda;
mod model;
mod nyquist;
mod series;
#[cfg(test)]
mod testutil;
mod transient;

pub use bode::render_bode;
pub use drt::render_drt;
pub use kk::render_kk;
pub use lambda::render_lambda;
pub use model::{
    ModelCurve, ModelDrtFigure, ModelFitFigure, render_model_bode, render_model_drt,
    render_model_nyquist,
};
pub use nyquist::{equal_scale_ranges, render_nyquist};
pub use series::{
    ArrheniusFigure, ArrheniusTrack, HeatmapFigure, TrackLine, TrackSeries, TrendFigure,
    render_arrhenius, render_heatmap, render_trends,
};
pub use transient::render_transient;

/// Output encoding of a figure.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ImageFormat {
    /// Scalable vector graphics; the bytes are UTF-8 SVG text.
    Svg,
    /// Portable network graphics, 8-bit RGB.
    Png,
}

/// A distribution of relaxation times, γ against τ.
#[derive(Clone, Copy, Debug)]
pub struct DrtFigure<'a> {
    /// Relaxation times in s, one per γ value; plotted on a log axis.
    pub tau_s: &'a [f64],
    /// Distribution values, in the unit named by `y_label`.
    pub gamma: &'a [f64],
    /// Vertical axis label including its unit, e.g. `"gamma (ohm)"`.
    pub y_label: &'a str,
    /// Relaxation times of detected peaks in s, marked on the curve; may be empty.
    pub peaks_tau_s: &'a [f64],
    /// Lower edge of an uncertainty band of γ, one per τ; empty for no band.
    pub band_lo: &'a [f64],
    /// Upper edge of the band, one per τ; empty exactly when `band_lo` is.
    pub band_hi: &'a [f64],
    /// Legend text of the band, e.g. `"90 % band"`; unused without a band.
    pub band_label: &'a str,
    /// Figure title; empty for none.
    pub title: &'a str,
}

/// A complex-plane (Nyquist) plot of measured and fitted impedance.
///
/// `z_im_ohm` keeps its physical sign (negative when capacitive); the plot
/// shows −Z″ upwards so that capacitive arcs lie above the real axis.
#[derive(Clone, Copy, Debug)]
pub struct NyquistFigure<'a> {
    /// Real part of the measured impedance in ohm.
    pub z_re_ohm: &'a [f64],
    /// Imaginary part of the measured impedance in ohm.
    pub z_im_ohm: &'a [f64],
    /// Real part of the fitted impedance in ohm; empty for no fit. May be
    /// sampled more densely than the data.
    pub fit_re_ohm: &'a [f64],
    /// Imaginary part of the fitted impedance in ohm; same length as `fit_re_ohm`.
    pub fit_im_ohm: &'a [f64],
    /// Figure title; empty for none.
    pub title: &'a str,
}

/// Bode plot: |Z|, phase and fit residuals against frequency.
#[derive(Clone, Copy, Debug)]
pub struct BodeFigure<'a> {
    /// Measurement frequencies in Hz.
    pub frequency_hz: &'a [f64],
    /// Real part of the measured impedance in ohm, one per frequency.
    pub z_re_ohm: &'a [f64],
    /// Imaginary part of the measured impedance in ohm, one per frequency.
    pub z_im_ohm: &'a [f64],
    /// Real part of the fit at the same frequencies in ohm; empty for no fit.
    pub fit_re_ohm: &'a [f64],
    /// Imaginary part of the fit at the same frequencies in ohm; empty for no fit.
    pub fit_im_ohm: &'a [f64],
    /// Relative residual of the real part (0.01 = 1 %), one per frequency; may be empty.
    pub residual_re_rel: &'a [f64],
    /// Relative residual of the imaginary part (0.01 = 1 %), one per frequency; may be empty.
    pub residual_im_rel: &'a [f64],
    /// Figure title; empty for none.
    pub title: &'a str,
}

/// The residuals of a Kramers-Kronig test against frequency, with the band the verdict allows.
#[derive(Clone, Copy, Debug)]
pub struct KkFigure<'a> {
    /// Measurement frequencies in Hz (log axis).
    pub frequency_hz: &'a [f64],
    /// (Z' - Z'_fit)/|Z| per frequency (0.01 = 1 %).
    pub residual_re_rel: &'a [f64],
    /// (Z'' - Z''_fit)/|Z| per frequency.
    pub residual_im_rel: &'a [f64],
    /// Half-width of the band a single point may reach (relative, > 0),
    /// drawn as a shaded band around zero; 0 or non-finite: no band.
    pub point_limit_rel: f64,
    /// The noise level used by the verdict (relative); drawn as two thin
    /// dashed lines at ± this value when finite and > 0.
    pub noise_rel: f64,
    /// Figure title; empty for none.
    pub title: &'a str,
}

/// One regularisation-parameter scan: a score against λ.
#[derive(Clone, Copy, Debug)]
pub struct LambdaCurve<'a> {
    /// Name of the selection rule, shown as the panel heading.
    pub name: &'a str,
    /// Regularisation parameters scanned (dimensionless), plotted on a log axis.
    pub lambda: &'a [f64],
    /// Score at each λ, in the unit named by `y_label`.
    pub score: &'a [f64],
    /// Vertical axis label including its unit.
    pub y_label: &'a str,
    /// Plot the score on a log axis (non-positive scores are then skipped).
    pub log_y: bool,
    /// λ this rule picked, if it picked one.
    pub chosen_lambda: Option<f64>,
}

/// Scores of several λ-selection rules, one panel each.
#[derive(Clone, Copy, Debug)]
pub struct LambdaFigure<'a> {
    /// The scans, in panel order (left to right, then top to bottom).
    pub curves: &'a [LambdaCurve<'a>],
    /// λ finally used, marked in every panel.
    pub selected_lambda: f64,
    /// Figure title; empty for none.
    pub title: &'a str,
}

/// A measured step response and its fit.
#[derive(Clone, Copy, Debug)]
pub struct TransientFigure<'a> {
    /// Time since the step in s; plotted on a log axis, so t ≤ 0 is skipped.
    pub time_s: &'a [f64],
    /// Measured response, in the unit named by `y_label`.
    pub measured: &'a [f64],
    /// Fitted response at the same times; empty for no fit.
    pub fitted: &'a [f64],
    /// Divisor of the residuals, in the unit of `measured` (the size of the
    /// step response, so an offset such as a cell's rest voltage does not
    /// shrink them); 0 for the largest measured magnitude.
    pub residual_scale: f64,
    /// Vertical axis label including its unit, e.g. `"voltage (V)"`.
    pub y_label: &'a str,
    /// Figure title; empty for none.
    pub title: &'a str,
}

/// The DRT figure of any inversion's distribution (its unit in the axis
/// label, its peaks marked).
pub fn render_distribution(
    drt: &crate::pipeline::Distribution,
    title: &str,
    format: ImageFormat,
) -> crate::Result<Vec<u8>> {
    let peaks: Vec<f64> = drt.peaks.iter().map(|p| p.tau_s).collect();
    let y_label = match drt.unit {
        crate::pipeline::DistributionUnit::Ohm => "gamma (ohm)",
        crate::pipeline::DistributionUnit::Siemens => "g (S)",
    };
    let (band_lo, band_hi, band_label) = match &drt.bands {
        Some(b) => (
            b.gamma_lo.as_slice(),
            b.gamma_hi.as_slice(),
            format!("{:.0} % band", 100.0 * b.level),
        ),
        None => (&[][..], &[][..], String::new()),
    };
    render_drt(
        &DrtFigure {
            tau_s: &drt.tau_s,
            gamma: &drt.gamma,
            y_label,
            peaks_tau_s: &peaks,
            band_lo,
            band_hi,
            band_label: &band_label,
            title,
        },
        format,
    )
}

/// The rule-score figure of any inversion whose lambda was chosen by a
/// rule; `None` when it was fixed.
pub fn render_lambda_selection(
    selection: &crate::pipeline::LambdaSelection,
    format: ImageFormat,
) -> Option<crate::Result<Vec<u8>>> {
    use crate::lambda::LambdaRule;
    let c = selection.curves.as_ref()?;
    let curves: Vec<LambdaCurve> = c
        .rules
        .iter()
        .map(|r| LambdaCurve {
            name: r.rule.name(),
            lambda: &c.lambda,
            score: &r.score,
            y_label: match r.rule {
                LambdaRule::Gcv => "GCV score",
                LambdaRule::Lcurve => "L-curve curvature",
                LambdaRule::Discrepancy => "residual / noise",
                LambdaRule::Recv => "cross-validation score",
            },
            log_y: !matches!(r.rule, LambdaRule::Lcurve),
            chosen_lambda: r.chosen,
        })
        .collect();
    Some(render_lambda(
        &LambdaFigure {
            curves: &curves,
            selected_lambda: selection.lambda,
            title: "Choice of the regularisation parameter",
        },
        format,
    ))
}
