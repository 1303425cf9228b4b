//! Figures of an equivalent-circuit fit: the measured spectrum against the
//! fitted candidate circuits in the complex plane ([`render_model_nyquist`])
//! and against frequency ([`render_model_bode`]), and the measured
//! distribution of relaxation times against the chosen circuit's analytical
//! one ([`render_model_drt`]).
//!
//! The candidates' curves come on a frequency grid of their own, usually
//! denser than the data; the residual panel of the Bode figure interpolates
//! the chosen curve at the measured frequencies (`Interpolant`).

use plotters::coord::Shift;
use plotters::prelude::*;

use super::ImageFormat;
use super::axis::{Axis, Extent, Scale};
use super::bode::{magnitude, phase_deg};
use super::common::{self, Chart, DrawResult, Paint, Panel};
use super::draw::{self, Key, Mark};
use super::nyquist::{nyquist_panel, nyquist_ranges};
use super::series::TRACK_COLORS;
use crate::Result;

/// One fitted candidate's curve.
#[derive(Clone, Copy, Debug)]
pub struct ModelCurve<'a> {
    /// Legend text, e.g. `"3 processes (BIC -1651.2)"`.
    pub label: &'a str,
    /// Whether this is the chosen candidate: drawn as a solid line in the
    /// fit colour, over the others, which are thin dashed lines in colours
    /// of their own. When several curves are marked, the first is the
    /// choice and the rest are drawn like the others.
    pub chosen: bool,
    /// Frequencies in Hz, usually a dense grid across the measured band;
    /// points are joined in the order given, so give them sorted.
    pub frequency_hz: &'a [f64],
    /// Real part of the candidate's impedance in ohm, one per frequency.
    pub z_re_ohm: &'a [f64],
    /// Imaginary part of the candidate's impedance in ohm (physical sign,
    /// negative when capacitive), one per frequency.
    pub z_im_ohm: &'a [f64],
}

/// A measured spectrum and the curves of the circuits fitted to it.
#[derive(Clone, Copy, Debug)]
pub struct ModelFitFigure<'a> {
    /// Measurement frequencies in Hz.
    pub frequency_hz: &'a [f64],
    /// Real part of the measured impedance in ohm, one per frequency.
    pub z_re_ohm: &'a [f64],
    /// Imaginary part of the measured impedance in ohm (physical sign,
    /// negative when capacitive), one per frequency.
    pub z_im_ohm: &'a [f64],
    /// The fitted candidates, in legend order; may be empty.
    pub curves: &'a [ModelCurve<'a>],
    /// Figure title; empty for none.
    pub title: &'a str,
}

/// The measured distribution of relaxation times against the analytical
/// one of the fitted circuit.
#[derive(Clone, Copy, Debug)]
pub struct ModelDrtFigure<'a> {
    /// Relaxation times of the measured DRT in s (log axis).
    pub tau_s: &'a [f64],
    /// The measured DRT in ohm (per unit ln τ), one per τ; drawn as a line.
    pub gamma_ohm: &'a [f64],
    /// Relaxation times in s at which the model's continuous DRT is given;
    /// may be empty.
    pub model_tau_s: &'a [f64],
    /// The continuous part of the model's analytical DRT in ohm (per unit
    /// ln τ), one per `model_tau_s`; drawn as a second line.
    pub model_gamma_ohm: &'a [f64],
    /// Discrete lines of the model's DRT as `(tau_s, r_ohm)` (Voigt and
    /// Warburg elements); may be empty.
    pub model_lines: &'a [(f64, f64)],
    /// Height in ohm (per unit ln τ) of the stem drawn for a line of 1 ohm:
    /// a line of resistance R becomes a stem of height
    /// `R * line_height_per_ohm`. With the reciprocal of the measured grid's
    /// step in ln τ, a stem is as high as a peak of the same resistance
    /// held in one grid cell.
    pub line_height_per_ohm: f64,
    /// Figure title; empty for none.
    pub title: &'a str,
}

const DATA_MARK: Mark = Mark::Marker(common::DATA);
const CHOSEN_MARK: Mark = Mark::Line(common::FIT);
const RES_RE: Mark = Mark::LineMarker(common::DATA);
const RES_IM: Mark = Mark::LineMarker(common::ACCENT);

/// Index of the chosen curve: the first one marked.
fn chosen_index(curves: &[ModelCurve]) -> Option<usize> {
    curves.iter().position(|c| c.chosen)
}

/// How curve `i` is drawn: the choice solid in the fit colour, the others
/// thin and dashed, each in a colour fixed by its position in the list.
fn curve_mark(i: usize, chosen: Option<usize>) -> Mark {
    if chosen == Some(i) {
        return CHOSEN_MARK;
    }
    // The palette's first two colours are close to DATA and FIT.
    let others = &TRACK_COLORS[2..];
    Mark::ThinDashed(others[i % others.len()])
}

/// Checks the lengths of the measured series and of every curve.
fn check_fit_figure(fig: &ModelFitFigure) -> DrawResult<()> {
    let f = fig.frequency_hz;
    common::require("frequency_hz", f)?;
    common::same_len("z_re_ohm", fig.z_re_ohm, "frequency_hz", f)?;
    common::same_len("z_im_ohm", fig.z_im_ohm, "frequency_hz", f)?;
    for (i, c) in fig.curves.iter().enumerate() {
        for (name, v) in [("z_re_ohm", c.z_re_ohm), ("z_im_ohm", c.z_im_ohm)] {
            if v.len() != c.frequency_hz.len() {
                return Err(format!(
                    "curve {} ({:?}): {name} has {} values but frequency_hz has {}",
                    i + 1,
                    c.label,
                    v.len(),
                    c.frequency_hz.len()
                ));
            }
        }
    }
    Ok(())
}

/// One series of a fit figure: the curve's label and its `(x, y)` values.
type Curve<'k, 'v> = (&'k str, &'v [f64], &'v [f64]);

/// Legend keys and, for the legend to keep clear of, the plottable points
/// of each series drawn.
type Drawn<'k> = (Vec<Key<'k>>, Vec<Vec<(f64, f64)>>);

/// Draws the candidates' `curves` (the others first, the choice over them)
/// and the measured points `data` on top. Returns the legend keys of
/// everything with a plottable point (measured first, then the curves in
/// the given order) and, for the legend to keep clear of, every series'
/// plottable points.
fn draw_data_and_curves<'c, 'k, DB: DrawingBackend + 'c>(
    chart: &mut Chart<'c, DB>,
    (x, y): (&Axis, &Axis),
    data: (&[f64], &[f64]),
    curves: &[Curve<'k, '_>],
    chosen: Option<usize>,
) -> DrawResult<Drawn<'k>> {
    let order = (0..curves.len())
        .filter(|&i| chosen != Some(i))
        .chain(chosen);
    for i in order {
        let (_, xs, ys) = curves[i];
        draw::draw_series(chart, xs, ys, x, y, curve_mark(i, chosen))?;
    }
    draw::draw_series(chart, data.0, data.1, x, y, DATA_MARK)?;
    let mut keys = Vec::new();
    let mut avoid = Vec::new();
    let data_pts = draw::points(data.0, data.1, x, y);
    if !data_pts.is_empty() {
        keys.push((DATA_MARK, "measured"));
        avoid.push(data_pts);
    }
    for (i, &(label, xs, ys)) in curves.iter().enumerate() {
        let pts = draw::points(xs, ys, x, y);
        if !pts.is_empty() {
            keys.push((curve_mark(i, chosen), label));
            avoid.push(pts);
        }
    }
    Ok((keys, avoid))
}

// ---------------------------------------------------------------------------
// Nyquist

const NYQUIST_SIZE: (u32, u32) = (900, 600);
const NYQUIST_STEM: &str = "model-nyquist";

/// Renders −Z″ against Z′ (labels `Z' (ohm)` and `-Z'' (ohm)`) with the same
/// ohm-per-pixel scale on both axes, as [`render_nyquist`](super::render_nyquist)
/// does: the measured values as circles, the chosen candidate as a solid
/// line, the other candidates as thin dashed lines, and a legend naming
/// each curve by its label. The ranges cover zero on the imaginary axis,
/// the data and every curve; points with a non-finite part are skipped.
///
/// Returns SVG text as bytes or an encoded PNG of 900 × 600 px. Fails with
/// [`Error::Plot`](crate::Error::Plot) (path `model-nyquist.svg` or
/// `model-nyquist.png`) when `frequency_hz` is empty, when a measured
/// series or a curve's series has a length other than its frequencies', or
/// when no point with finite real and imaginary parts remains.
pub fn render_model_nyquist(fig: &ModelFitFigure, format: ImageFormat) -> Result<Vec<u8>> {
    let plot = ModelNyquist::new(fig).map_err(|m| common::plot_error(NYQUIST_STEM, format, m))?;
    common::render(&plot, NYQUIST_STEM, format, NYQUIST_SIZE)
}

struct ModelNyquist<'a> {
    fig: &'a ModelFitFigure<'a>,
    /// −Z″ of the data and of each curve, the quantities drawn upwards.
    data_up: Vec<f64>,
    curves_up: Vec<Vec<f64>>,
    chosen: Option<usize>,
    /// Padded ranges before they are widened to equal scales.
    x: (f64, f64),
    y: (f64, f64),
}

fn negated(v: &[f64]) -> Vec<f64> {
    v.iter().map(|a| -a).collect()
}

impl<'a> ModelNyquist<'a> {
    fn new(fig: &'a ModelFitFigure<'a>) -> DrawResult<Self> {
        check_fit_figure(fig)?;
        let data_up = negated(fig.z_im_ohm);
        let curves_up: Vec<Vec<f64>> = fig.curves.iter().map(|c| negated(c.z_im_ohm)).collect();
        let curves = fig.curves.iter().zip(&curves_up);
        let (x, y) = nyquist_ranges(
            std::iter::once((fig.z_re_ohm, data_up.as_slice()))
                .chain(curves.map(|(c, up)| (c.z_re_ohm, up.as_slice()))),
        )?;
        Ok(Self {
            fig,
            data_up,
            curves_up,
            chosen: chosen_index(fig.curves),
            x,
            y,
        })
    }
}

impl Paint for ModelNyquist<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<()> {
        let fig = self.fig;
        let area = common::titled(root, fig.title)?;
        let panel = nyquist_panel(&area, self.x, self.y)?;
        let mut chart = common::build_panel(&area, &panel)?;
        let axes = (&panel.x, &panel.y);
        draw::draw_zero_line(&mut chart, axes.0, axes.1)?;
        let curves: Vec<Curve> = fig
            .curves
            .iter()
            .zip(&self.curves_up)
            .map(|(c, up)| (c.label, c.z_re_ohm, up.as_slice()))
            .collect();
        let data = (fig.z_re_ohm, self.data_up.as_slice());
        let (keys, avoid) = draw_data_and_curves(&mut chart, axes, data, &curves, self.chosen)?;
        let avoid: Vec<&[(f64, f64)]> = avoid.iter().map(Vec::as_slice).collect();
        draw::draw_legend(&chart, &keys, &avoid)
    }
}

// ---------------------------------------------------------------------------
// Bode

/// Three stacked panels, as in [`render_bode`](super::render_bode).
const BODE_SIZE: (u32, u32) = (900, 860);
const BODE_STEM: &str = "model-bode";

/// Renders three stacked panels against frequency (log axis, label
/// `frequency (Hz)`, shared), laid out as [`render_bode`](super::render_bode):
/// |Z| in ohm on a log axis and the phase arg Z in degrees (negative when
/// capacitive), each with the measured values as circles, the chosen
/// candidate as a solid line and the others as thin dashed lines (legend in
/// the |Z| panel); below them the chosen candidate's relative residuals
/// (fit − data)/|Z| in percent, real and imaginary part, at the measured
/// frequencies, where |Z| is the measured magnitude. The chosen curve is
/// interpolated at the measured frequencies (real and imaginary parts each
/// by the cubic in ln f through the four nearest points of its grid); a
/// measured frequency outside the curve's band gets no residual. Without a
/// chosen curve the residual panel says so.
///
/// Returns SVG text as bytes or an encoded PNG of 900 × 860 px. Fails with
/// [`Error::Plot`](crate::Error::Plot) (path `model-bode.svg` or
/// `model-bode.png`) when `frequency_hz` is empty, when a measured series
/// or a curve's series has a length other than its frequencies', or when no
/// positive frequency or no positive |Z| remains to be drawn.
pub fn render_model_bode(fig: &ModelFitFigure, format: ImageFormat) -> Result<Vec<u8>> {
    let plot = ModelBode::new(fig).map_err(|m| common::plot_error(BODE_STEM, format, m))?;
    common::render(&plot, BODE_STEM, format, BODE_SIZE)
}

struct ModelBode<'a> {
    fig: &'a ModelFitFigure<'a>,
    chosen: Option<usize>,
    mag: Vec<f64>,
    phase: Vec<f64>,
    curves_mag: Vec<Vec<f64>>,
    curves_phase: Vec<Vec<f64>>,
    /// (fit − data)/|Z| in percent at the measured frequencies; empty
    /// without a chosen curve, NaN where the curve gives no value.
    res_re_pct: Vec<f64>,
    res_im_pct: Vec<f64>,
    x: Axis,
    y_mag: Axis,
    y_phase: Axis,
    y_res: Axis,
}

/// Adds `ys[i]` to `e` wherever `xs[i]` can be shown on a log axis: only
/// those points are drawn.
fn add_at_plottable(e: &mut Extent, xs: &[f64], ys: &[f64]) {
    for (&a, &b) in xs.iter().zip(ys) {
        if Scale::Log.to_plot(a).is_some() {
            e.add(b);
        }
    }
}

/// Relative residuals (fit − data)/|Z| in percent of `curve` at the
/// measured frequencies of `fig`, |Z| being the measured magnitude; NaN
/// where the curve has no value.
fn residuals_pct(fig: &ModelFitFigure, curve: &ModelCurve) -> (Vec<f64>, Vec<f64>) {
    let fit = Interpolant::new(curve.frequency_hz, curve.z_re_ohm, curve.z_im_ohm);
    let measured = fig.z_re_ohm.iter().zip(fig.z_im_ohm);
    fig.frequency_hz
        .iter()
        .zip(measured)
        .map(|(&f, (&re, &im))| {
            let size = re.hypot(im);
            match fit.at(f) {
                Some((fr, fi)) => (100.0 * (fr - re) / size, 100.0 * (fi - im) / size),
                None => (f64::NAN, f64::NAN),
            }
        })
        .unzip()
}

impl<'a> ModelBode<'a> {
    fn new(fig: &'a ModelFitFigure<'a>) -> DrawResult<Self> {
        check_fit_figure(fig)?;
        let f = fig.frequency_hz;
        let chosen = chosen_index(fig.curves);
        let mag = magnitude(fig.z_re_ohm, fig.z_im_ohm);
        let phase = phase_deg(fig.z_re_ohm, fig.z_im_ohm);
        let curves_mag: Vec<Vec<f64>> = fig
            .curves
            .iter()
            .map(|c| magnitude(c.z_re_ohm, c.z_im_ohm))
            .collect();
        let curves_phase: Vec<Vec<f64>> = fig
            .curves
            .iter()
            .map(|c| phase_deg(c.z_re_ohm, c.z_im_ohm))
            .collect();
        let (res_re_pct, res_im_pct) = match chosen {
            Some(i) => residuals_pct(fig, &fig.curves[i]),
            None => (Vec::new(), Vec::new()),
        };

        let mut xe = Extent::new(Scale::Log);
        xe.add_all(f.iter().copied());
        let (mut me, mut pe) = (Extent::new(Scale::Log), Extent::new(Scale::Linear));
        add_at_plottable(&mut me, f, &mag);
        add_at_plottable(&mut pe, f, &phase);
        for (c, (m, p)) in fig.curves.iter().zip(curves_mag.iter().zip(&curves_phase)) {
            xe.add_all(c.frequency_hz.iter().copied());
            add_at_plottable(&mut me, c.frequency_hz, m);
            add_at_plottable(&mut pe, c.frequency_hz, p);
        }
        let mut re = Extent::new(Scale::Linear);
        add_at_plottable(&mut re, f, &res_re_pct);
        add_at_plottable(&mut re, f, &res_im_pct);
        re.add(0.0);
        Ok(Self {
            fig,
            chosen,
            mag,
            phase,
            curves_mag,
            curves_phase,
            res_re_pct,
            res_im_pct,
            x: xe.finish("frequency_hz")?,
            y_mag: me.finish("|Z|")?,
            y_phase: pe.finish("phase")?,
            y_res: re.finish("residual")?,
        })
    }

    fn panel<'s>(&self, y: Axis, y_desc: &'s str, bottom: bool) -> Panel<'s> {
        Panel {
            x: self.x,
            y,
            x_desc: bottom.then_some("frequency (Hz)"),
            y_desc,
            caption: None,
            x_ticks: 10,
            y_ticks: 5,
            common_step: None,
            key_room: bottom,
        }
    }

    /// The curves' `(frequency, value)` series for one panel.
    fn curves<'s>(&'s self, values: &'s [Vec<f64>]) -> Vec<Curve<'a, 's>> {
        self.fig
            .curves
            .iter()
            .zip(values)
            .map(|(c, v)| (c.label, c.frequency_hz, v.as_slice()))
            .collect()
    }
}

impl Paint for ModelBode<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<()> {
        let f = self.fig.frequency_hz;
        let area = common::titled(root, self.fig.title)?;
        // Equal plotting heights: the bottom panel carries a 20 px key strip
        // and the shared axis labels, 68 px more than the other two.
        let h = area.dim_in_pixel().1 as i32;
        let unit = (h - 68) / 3;
        let parts = area.split_by_breakpoints([] as [i32; 0], [unit, 2 * unit]);
        let [a_mag, a_phase, a_res] = parts.as_slice() else {
            return Err(format!("expected 3 panel areas, got {}", parts.len()));
        };

        let mut chart = common::build_panel(a_mag, &self.panel(self.y_mag, "|Z| (ohm)", false))?;
        let axes = (&self.x, &self.y_mag);
        let curves = self.curves(&self.curves_mag);
        let data = (f, self.mag.as_slice());
        let (keys, avoid) = draw_data_and_curves(&mut chart, axes, data, &curves, self.chosen)?;
        let avoid: Vec<&[(f64, f64)]> = avoid.iter().map(Vec::as_slice).collect();
        draw::draw_legend(&chart, &keys, &avoid)?;

        let panel = self.panel(self.y_phase, "phase (deg)", false);
        let mut chart = common::build_panel(a_phase, &panel)?;
        draw::draw_zero_line(&mut chart, &self.x, &self.y_phase)?;
        let axes = (&self.x, &self.y_phase);
        let curves = self.curves(&self.curves_phase);
        let data = (f, self.phase.as_slice());
        draw_data_and_curves(&mut chart, axes, data, &curves, self.chosen)?;

        let panel = self.panel(self.y_res, "(fit - data)/|Z| (%)", true);
        let mut chart = common::build_panel(a_res, &panel)?;
        draw::draw_zero_line(&mut chart, &self.x, &self.y_res)?;
        let plottable = |v: &[f64]| !draw::points(f, v, &self.x, &self.y_res).is_empty();
        if self.chosen.is_none() || !(plottable(&self.res_re_pct) || plottable(&self.res_im_pct)) {
            let note = if self.chosen.is_none() {
                "no chosen fit"
            } else {
                "no residual at the measured frequencies"
            };
            let plot = chart.plotting_area().strip_coord_spec();
            return draw::draw_note(&plot, note, None, 15.0);
        }
        let (x, y) = (&self.x, &self.y_res);
        draw::draw_series(&mut chart, f, &self.res_re_pct, x, y, RES_RE)?;
        draw::draw_series(&mut chart, f, &self.res_im_pct, x, y, RES_IM)?;
        let keys = [(RES_RE, "real part"), (RES_IM, "imaginary part")];
        draw::draw_keys_above(a_res, &chart, &keys)
    }
}

/// A curve's impedance at any frequency inside its band, for residuals at
/// measured frequencies the curve's grid does not contain.
///
/// Real and imaginary parts are interpolated separately in ln f by the
/// cubic through the four nearest grid points, in Lagrange form
/// (polynomial interpolation; common practice), with the stencil shifted
/// inwards at the ends of the band and fewer points when the grid has
/// fewer than four. A frequency that equals a grid frequency (to 1e-9
/// relative) takes that point's value. The error falls as the fourth power
/// of the grid step: at 20 points per decade it stays below 2e-5 of |Z| on
/// the arc of a Voigt element (checked in the tests), below the noise of a
/// measurement, whereas straight lines between the points would be off by
/// about 1e-3.
struct Interpolant {
    /// ln f of the usable grid points, strictly ascending.
    ln_f: Vec<f64>,
    re: Vec<f64>,
    im: Vec<f64>,
}

/// Closeness in ln f under which two frequencies are one.
const SAME_LN_F: f64 = 1e-9;

impl Interpolant {
    /// Keeps the points with positive finite frequency and finite parts,
    /// sorted by frequency, the first of each group of equal frequencies.
    fn new(frequency_hz: &[f64], z_re_ohm: &[f64], z_im_ohm: &[f64]) -> Self {
        let mut pts: Vec<(f64, f64, f64)> = frequency_hz
            .iter()
            .zip(z_re_ohm.iter().zip(z_im_ohm))
            .filter(|&(&f, (re, im))| f.is_finite() && f > 0.0 && re.is_finite() && im.is_finite())
            .map(|(&f, (&re, &im))| (f.ln(), re, im))
            .collect();
        // A stable sort keeps the input order among equal frequencies.
        pts.sort_by(|a, b| a.0.total_cmp(&b.0));
        pts.dedup_by(|later, kept| later.0 - kept.0 < SAME_LN_F);
        let mut out = Self {
            ln_f: Vec::with_capacity(pts.len()),
            re: Vec::with_capacity(pts.len()),
            im: Vec::with_capacity(pts.len()),
        };
        for (u, re, im) in pts {
            out.ln_f.push(u);
            out.re.push(re);
            out.im.push(im);
        }
        out
    }

    /// `(z_re_ohm, z_im_ohm)` at `frequency_hz`, or `None` outside the band
    /// of the grid (no extrapolation) or for a frequency that is not
    /// positive and finite.
    fn at(&self, frequency_hz: f64) -> Option<(f64, f64)> {
        let u = (frequency_hz.is_finite() && frequency_hz > 0.0).then(|| frequency_hz.ln())?;
        let (first, last) = (*self.ln_f.first()?, *self.ln_f.last()?);
        if u < first - SAME_LN_F || u > last + SAME_LN_F {
            return None;
        }
        let n = self.ln_f.len();
        let i = self.ln_f.partition_point(|&v| v < u);
        for j in [i.wrapping_sub(1), i] {
            if self.ln_f.get(j).is_some_and(|v| (v - u).abs() < SAME_LN_F) {
                return Some((self.re[j], self.im[j]));
            }
        }
        let m = n.min(4);
        let start = i.saturating_sub(2).min(n - m);
        let stencil = start..start + m;
        let (mut re, mut im) = (0.0, 0.0);
        for j in stencil.clone() {
            let w: f64 = stencil
                .clone()
                .filter(|&k| k != j)
                .map(|k| (u - self.ln_f[k]) / (self.ln_f[j] - self.ln_f[k]))
                .product();
            re += w * self.re[j];
            im += w * self.im[j];
        }
        Some((re, im))
    }
}

// ---------------------------------------------------------------------------
// DRT

const DRT_SIZE: (u32, u32) = (900, 600);
const DRT_STEM: &str = "model-drt";
const MODEL_MARK: Mark = Mark::Line(common::FIT);
const MEASURED_DRT_MARK: Mark = Mark::Line(common::DATA);
/// Radius in px of the dot on top of a stem.
const STEM_DOT: i32 = 3;

/// Renders γ in ohm against τ (log axis, labels `tau (s)` and
/// `gamma (ohm)`): the measured DRT as a line in the data colour, the
/// model's continuous DRT as a line in the fit colour, and each of the
/// model's lines as a stem in the fit colour from zero to
/// `r_ohm * line_height_per_ohm` at its τ, with a dot on top. The legend
/// reads `measured DRT` and `fitted model (analytical)` (the latter for
/// the continuous part and the stems alike). The ranges cover zero and
/// everything drawn; entries that cannot be shown (τ not positive, a value
/// or a stem height not finite) are skipped.
///
/// Returns SVG text as bytes or an encoded PNG of 900 × 600 px. Fails with
/// [`Error::Plot`](crate::Error::Plot) (path `model-drt.svg` or
/// `model-drt.png`) when `tau_s` is empty, when `gamma_ohm` or
/// `model_gamma_ohm` has a length other than its τ's, or when nothing at
/// all can be drawn.
pub fn render_model_drt(fig: &ModelDrtFigure, format: ImageFormat) -> Result<Vec<u8>> {
    let plot = ModelDrt::new(fig).map_err(|m| common::plot_error(DRT_STEM, format, m))?;
    common::render(&plot, DRT_STEM, format, DRT_SIZE)
}

struct ModelDrt<'a> {
    fig: &'a ModelDrtFigure<'a>,
    /// Stems that can be drawn, as `(tau_s, height_ohm)`.
    stems: Vec<(f64, f64)>,
    x: Axis,
    y: Axis,
}

/// The drawable stems of `fig`'s lines as `(tau_s, height_ohm)`, height
/// `r_ohm * line_height_per_ohm`; a line at a τ that is not positive and
/// finite, or whose height is not finite, is left out.
fn stems(fig: &ModelDrtFigure) -> Vec<(f64, f64)> {
    fig.model_lines
        .iter()
        .map(|&(tau_s, r_ohm)| (tau_s, r_ohm * fig.line_height_per_ohm))
        .filter(|&(t, h)| Scale::Log.to_plot(t).is_some() && h.is_finite())
        .collect()
}

impl<'a> ModelDrt<'a> {
    fn new(fig: &'a ModelDrtFigure<'a>) -> DrawResult<Self> {
        common::require("tau_s", fig.tau_s)?;
        common::same_len("gamma_ohm", fig.gamma_ohm, "tau_s", fig.tau_s)?;
        common::same_len(
            "model_gamma_ohm",
            fig.model_gamma_ohm,
            "model_tau_s",
            fig.model_tau_s,
        )?;
        let stems = stems(fig);
        let (mut xe, mut ye) = (Extent::new(Scale::Log), Extent::new(Scale::Linear));
        let curves = [
            (fig.tau_s, fig.gamma_ohm),
            (fig.model_tau_s, fig.model_gamma_ohm),
        ];
        let stem_ends = stems.iter().flat_map(|&(t, h)| [(t, 0.0), (t, h)]);
        let curve_points = curves
            .into_iter()
            .flat_map(|(t, g)| t.iter().copied().zip(g.iter().copied()));
        for (t, g) in curve_points.chain(stem_ends) {
            if Scale::Log.to_plot(t).is_some() && g.is_finite() {
                xe.add(t);
                ye.add(g);
            }
        }
        if xe.raw().is_none() {
            return Err("no point with positive finite tau_s and finite gamma_ohm to plot".into());
        }
        // A distribution is read against its zero baseline.
        ye.add(0.0);
        Ok(Self {
            fig,
            stems,
            x: xe.finish("tau_s")?,
            y: ye.finish("gamma_ohm")?,
        })
    }
}

impl Paint for ModelDrt<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<()> {
        let (fig, x, y) = (self.fig, &self.x, &self.y);
        let area = common::titled(root, fig.title)?;
        let panel = Panel {
            x: self.x,
            y: self.y,
            x_desc: Some("tau (s)"),
            y_desc: "gamma (ohm)",
            caption: None,
            x_ticks: 10,
            y_ticks: 7,
            common_step: None,
            key_room: false,
        };
        let mut chart = common::build_panel(&area, &panel)?;
        draw::draw_zero_line(&mut chart, x, y)?;
        draw::draw_series(
            &mut chart,
            fig.tau_s,
            fig.gamma_ohm,
            x,
            y,
            MEASURED_DRT_MARK,
        )?;
        let (mt, mg) = (fig.model_tau_s, fig.model_gamma_ohm);
        draw::draw_series(&mut chart, mt, mg, x, y, MODEL_MARK)?;
        let mut avoid = vec![
            draw::points(fig.tau_s, fig.gamma_ohm, x, y),
            draw::points(mt, mg, x, y),
        ];
        for &(t, h) in &self.stems {
            draw::draw_series(&mut chart, &[t, t], &[0.0, h], x, y, MODEL_MARK)?;
            let stem = draw::points(&[t, t], &[0.0, h], x, y);
            if let Some(&top) = stem.last() {
                let dot = Circle::new(top, STEM_DOT, common::FIT.filled());
                chart
                    .draw_series(std::iter::once(dot))
                    .map_err(common::de)?;
            }
            avoid.push(stem);
        }
        let mut keys = Vec::new();
        if !avoid[0].is_empty() {
            keys.push((MEASURED_DRT_MARK, "measured DRT"));
        }
        if !avoid[1].is_empty() || !self.stems.is_empty() {
            keys.push((MODEL_MARK, "fitted model (analytical)"));
        }
        let avoid: Vec<&[(f64, f64)]> = avoid.iter().map(Vec::as_slice).collect();
        draw::draw_legend(&chart, &keys, &avoid)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::testutil::{check_png, check_svg, rc_arc, save};

    /// Z = r_inf + R/(1 + j 2 pi f R C) (analytic), as `(re, im)`.
    fn voigt(f: f64, r_inf: f64, r: f64, c: f64) -> (f64, f64) {
        let x = 2.0 * std::f64::consts::PI * f * r * c;
        let d = 1.0 + x * x;
        (r_inf + r / d, -r * x / d)
    }

    /// 20 frequencies per decade over the band of `rc_arc` (0.1 Hz to 100 kHz).
    fn dense_grid() -> Vec<f64> {
        (0..=120)
            .map(|k| 10f64.powf(-1.0 + f64::from(k) / 20.0))
            .collect()
    }

    /// Three candidates on the dense grid for the arc of `rc_arc`
    /// (R = 50 ohm, C = 20 uF): a misfit arc, the chosen one (the exact
    /// arc with 1 % of |Z| added to the real part) and the exact arc shifted
    /// by 0.3 ohm.
    struct Candidates {
        f: Vec<f64>,
        parts: Vec<(Vec<f64>, Vec<f64>)>,
    }

    const LABELS: [&str; 3] = [
        "1 process (BIC -301.4)",
        "2 processes (BIC -420.5)",
        "3 processes (BIC -410.2)",
    ];

    fn candidates() -> Candidates {
        let f = dense_grid();
        let sample = |z: &dyn Fn(f64) -> (f64, f64)| -> (Vec<f64>, Vec<f64>) {
            f.iter().map(|&x| z(x)).unzip()
        };
        let parts = vec![
            sample(&|x| voigt(x, 0.0, 45.0, 25e-6)),
            sample(&|x| {
                let (re, im) = voigt(x, 0.0, 50.0, 20e-6);
                (re + 0.01 * re.hypot(im), im)
            }),
            sample(&|x| voigt(x, 0.3, 50.0, 20e-6)),
        ];
        Candidates { f, parts }
    }

    fn curves<'a>(c: &'a Candidates, chosen: Option<usize>) -> Vec<ModelCurve<'a>> {
        c.parts
            .iter()
            .enumerate()
            .map(|(i, (re, im))| ModelCurve {
                label: LABELS[i],
                chosen: chosen == Some(i),
                frequency_hz: &c.f,
                z_re_ohm: re,
                z_im_ohm: im,
            })
            .collect()
    }

    struct Data {
        f: Vec<f64>,
        re: Vec<f64>,
        im: Vec<f64>,
    }

    fn data() -> Data {
        let (f, re, im) = rc_arc();
        Data { f, re, im }
    }

    fn fit_figure<'a>(d: &'a Data, curves: &'a [ModelCurve<'a>]) -> ModelFitFigure<'a> {
        ModelFitFigure {
            frequency_hz: &d.f,
            z_re_ohm: &d.re,
            z_im_ohm: &d.im,
            curves,
            title: "Separator test cell, candidate circuits",
        }
    }

    fn text(svg: &[u8]) -> &str {
        std::str::from_utf8(svg).expect("SVG is UTF-8")
    }

    /// Polylines of `colour` (as `#RRGGBB`) and stroke width `width` px.
    fn polylines(svg: &[u8], colour: &str, width: u32) -> usize {
        let needle = format!("stroke=\"{colour}\" stroke-width=\"{width}\" points=");
        text(svg).matches(&needle).count()
    }

    /// Filled circles of `colour`.
    fn dots(svg: &[u8], colour: &str) -> usize {
        text(svg).matches(&format!("fill=\"{colour}\"")).count()
    }

    const FIT_HEX: &str = "#D2541C";

    fn hex(c: RGBColor) -> String {
        format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2)
    }

    /// Cubic interpolation in ln f on 20 points per decade reproduces the
    /// arc of a Voigt element (R = 50 ohm, C = 20 uF, analytic) to 3e-5
    /// of |Z| between the grid points (1.6e-5 at worst, near the top of
    /// the arc); straight lines would not (about 1e-3: the step h = 0.115
    /// in ln f gives h^2/8 = 1.7e-3 on the e^u-like tails).
    #[test]
    fn interpolant_matches_the_arc() {
        let f = dense_grid();
        let (re, im): (Vec<f64>, Vec<f64>) = f.iter().map(|&x| voigt(x, 0.0, 50.0, 20e-6)).unzip();
        let curve = Interpolant::new(&f, &re, &im);
        let mut worst: f64 = 0.0;
        // Between every pair of grid points, and at rc_arc's frequencies.
        let probes = f.windows(2).map(|w| (w[0] * w[1]).sqrt()).chain(rc_arc().0);
        for x in probes {
            let (a, b) = curve.at(x).unwrap();
            let (ea, eb) = voigt(x, 0.0, 50.0, 20e-6);
            worst = worst.max((a - ea).hypot(b - eb) / ea.hypot(eb));
        }
        assert!(worst < 3e-5, "worst relative error {worst:e}");
        assert!(worst > 0.0, "probes all fell on grid points");

        // A grid point gives its own value; outside the band there is none.
        let (a, b) = curve.at(f[37]).unwrap();
        assert_eq!((a, b), (re[37], im[37]));
        assert!(curve.at(0.099).is_none() && curve.at(1.01e5).is_none());
        assert!(curve.at(f64::NAN).is_none() && curve.at(-1.0).is_none());
        assert!(curve.at(0.1 * (1.0 + 1e-12)).is_some());
    }

    /// Unsorted grids, repeated and unusable points, and grids of fewer
    /// than four points.
    #[test]
    fn interpolant_handles_rough_grids() {
        // z = ln f + j (ln f)^2 is reproduced exactly by any cubic stencil.
        let z = |f: f64| (f.ln(), f.ln().powi(2));
        let f = [100.0, 1.0, 10.0, f64::NAN, 1000.0, 10.0, -5.0, 3.0];
        let (mut re, im): (Vec<f64>, Vec<f64>) = f.iter().map(|&x| z(x)).unzip();
        // The second 10 Hz point differs and is dropped (the first is kept).
        re[5] = 99.0;
        let curve = Interpolant::new(&f, &re, &im);
        assert_eq!(curve.ln_f.len(), 5);
        for x in [1.5, 5.0, 20.0, 700.0] {
            let (a, b) = curve.at(x).unwrap();
            let (ea, eb) = z(x);
            assert!(
                (a - ea).abs() < 1e-9 && (b - eb).abs() < 1e-9,
                "{x}: {a} {b}"
            );
        }
        assert_eq!(curve.at(10.0), Some(z(10.0)));

        // Two points: the straight line in ln f between them.
        let two = Interpolant::new(&[1.0, 100.0], &[0.0, 2.0], &[-4.0, 0.0]);
        let (a, b) = two.at(10.0).unwrap();
        assert!(
            (a - 1.0).abs() < 1e-12 && (b + 2.0).abs() < 1e-12,
            "{a} {b}"
        );
        // One point: only its own frequency; none: nothing.
        let one = Interpolant::new(&[5.0], &[1.0], &[2.0]);
        assert_eq!(one.at(5.0), Some((1.0, 2.0)));
        assert!(one.at(5.1).is_none());
        assert!(Interpolant::new(&[], &[], &[]).at(1.0).is_none());
    }

    /// The chosen candidate is the exact arc with 1 % of |Z| added to its
    /// real part: residuals of +1 % (real) and 0 (imaginary) at every
    /// measured frequency, to the interpolation error.
    #[test]
    fn residuals_of_the_chosen_curve() {
        let (d, c) = (data(), candidates());
        let cs = curves(&c, Some(1));
        let fig = fit_figure(&d, &cs);
        let plot = ModelBode::new(&fig).unwrap();
        assert_eq!(plot.chosen, Some(1));
        assert_eq!(plot.res_re_pct.len(), d.f.len());
        for (i, (re, im)) in plot.res_re_pct.iter().zip(&plot.res_im_pct).enumerate() {
            // 3e-3 %: the interpolation error (see above) with some room.
            assert!(
                (re - 1.0).abs() < 3e-3,
                "real residual {re} % at {}",
                d.f[i]
            );
            assert!(im.abs() < 3e-3, "imaginary residual {im} % at {}", d.f[i]);
        }
        // The range of the residual panel covers 0 and +1 %, and little more.
        assert!(plot.y_res.contains(0.0) && plot.y_res.contains(1.0));
        assert!(
            plot.y_res.hi < 1.2 && plot.y_res.lo > -0.2,
            "{:?}",
            plot.y_res
        );

        // Two marked: the first is the choice. Candidate 2 (index 2) is
        // the arc plus 0.3 ohm: residual 0.3/|Z| in the real part.
        let mut two = curves(&c, Some(2));
        two[1].chosen = false;
        two.push(ModelCurve {
            chosen: true,
            ..cs[1]
        });
        let fig = fit_figure(&d, &two);
        let plot = ModelBode::new(&fig).unwrap();
        assert_eq!(plot.chosen, Some(2));
        let want = 100.0 * 0.3 / d.re[0].hypot(d.im[0]);
        assert!(
            (plot.res_re_pct[0] - want).abs() < 1e-4,
            "{}",
            plot.res_re_pct[0]
        );

        // None chosen: no residuals.
        let none = curves(&c, None);
        let fig = fit_figure(&d, &none);
        let plot = ModelBode::new(&fig).unwrap();
        assert_eq!(plot.chosen, None);
        assert!(plot.res_re_pct.is_empty() && plot.res_im_pct.is_empty());
    }

    #[test]
    fn fit_figures_render_both_formats() {
        let (d, c) = (data(), candidates());
        let cs = curves(&c, Some(1));
        let fig = fit_figure(&d, &cs);

        let png = render_model_nyquist(&fig, ImageFormat::Png).unwrap();
        check_png(&png, NYQUIST_SIZE);
        save("model_nyquist.png", &png);
        let svg = render_model_nyquist(&fig, ImageFormat::Svg).unwrap();
        save("model_nyquist.svg", &svg);
        check_svg(&svg, &["Z&apos; (ohm)", "-Z&apos;&apos; (ohm)", "measured"]);
        for label in LABELS {
            assert_eq!(text(&svg).matches(label).count(), 1, "{label}");
        }

        let png = render_model_bode(&fig, ImageFormat::Png).unwrap();
        check_png(&png, BODE_SIZE);
        save("model_bode.png", &png);
        let svg = render_model_bode(&fig, ImageFormat::Svg).unwrap();
        save("model_bode.svg", &svg);
        check_svg(
            &svg,
            &[
                "frequency (Hz)",
                "|Z| (ohm)",
                "phase (deg)",
                "(fit - data)/|Z| (%)",
                "real part",
                "imaginary part",
                "measured",
                "10⁵",
            ],
        );
        // The legend sits in the |Z| panel only.
        for label in LABELS {
            assert_eq!(text(&svg).matches(label).count(), 1, "{label}");
        }
        assert!(!text(&svg).contains("no chosen fit"));
    }

    /// The chosen curve is one solid 2 px line (plus its legend sample);
    /// the others are thin dashes in their own colours, none in the fit
    /// colour.
    #[test]
    fn chosen_curve_is_solid_and_the_others_dashed() {
        let (d, c) = (data(), candidates());
        let cs = curves(&c, Some(1));
        let fig = fit_figure(&d, &cs);
        let first_other = hex(TRACK_COLORS[2]);
        let third_other = hex(TRACK_COLORS[4]);
        let svg = render_model_nyquist(&fig, ImageFormat::Svg).unwrap();
        assert_eq!(polylines(&svg, FIT_HEX, 2), 2);
        assert_eq!(polylines(&svg, FIT_HEX, 1), 0);
        for other in [&first_other, &third_other] {
            assert!(polylines(&svg, other, 1) > 10, "{other}: too few dashes");
            assert_eq!(polylines(&svg, other, 2), 0, "{other}");
        }
        // In the Bode figure: one solid line per panel plus the legend's.
        let svg = render_model_bode(&fig, ImageFormat::Svg).unwrap();
        assert_eq!(polylines(&svg, FIT_HEX, 2), 3);
        assert!(polylines(&svg, &first_other, 1) > 20);

        // Choosing the first candidate instead swaps the styles.
        let cs = curves(&c, Some(0));
        let svg = render_model_nyquist(&fit_figure(&d, &cs), ImageFormat::Svg).unwrap();
        assert_eq!(polylines(&svg, FIT_HEX, 2), 2);
        assert_eq!(polylines(&svg, &first_other, 1), 0);
        let second_other = hex(TRACK_COLORS[3]);
        assert!(polylines(&svg, &second_other, 1) > 10);
    }

    /// The Nyquist ranges cover the data, zero and every curve, also one
    /// reaching far past the data.
    #[test]
    fn nyquist_range_covers_every_curve() {
        let (d, c) = (data(), candidates());
        let mut cs = curves(&c, Some(1));
        let fig = fit_figure(&d, &cs);
        let plot = ModelNyquist::new(&fig).unwrap();
        // Data and curves reach Z' = 50.5 (chosen, + 1 %) and -Z'' = 25.
        assert!(plot.x.1 > 50.5 && plot.x.1 < 54.0, "{:?}", plot.x);
        assert!(
            plot.y.0 < 0.0 && plot.y.1 > 25.0 && plot.y.1 < 28.0,
            "{:?}",
            plot.y
        );

        let far_re = [0.0, 200.0];
        let far_im = [-80.0, 0.0];
        cs.push(ModelCurve {
            label: "far",
            chosen: false,
            frequency_hz: &[1.0, 2.0],
            z_re_ohm: &far_re,
            z_im_ohm: &far_im,
        });
        let fig = fit_figure(&d, &cs);
        let plot = ModelNyquist::new(&fig).unwrap();
        assert!(
            plot.x.1 > 200.0 && plot.y.1 > 80.0,
            "{:?} {:?}",
            plot.x,
            plot.y
        );
    }

    /// A measured DRT with one peak and a model of a Voigt element (one
    /// line) and a ZARC-like bump (continuous part).
    struct Drt {
        tau: Vec<f64>,
        gamma: Vec<f64>,
        model_tau: Vec<f64>,
        model_gamma: Vec<f64>,
        lines: Vec<(f64, f64)>,
        height: f64,
    }

    fn drt() -> Drt {
        let bump =
            |t: &f64, centre: f64, h: f64, w: f64| h * (-((t.log10() - centre) / w).powi(2)).exp();
        let tau: Vec<f64> = (0..80)
            .map(|i| 10f64.powf(-6.0 + 7.0 * f64::from(i) / 79.0))
            .collect();
        let gamma = tau
            .iter()
            .map(|t| bump(t, -3.0, 12.0, 0.25) + bump(t, -0.5, 6.0, 0.4))
            .collect();
        let model_tau: Vec<f64> = (0..300)
            .map(|i| 10f64.powf(-6.0 + 7.0 * f64::from(i) / 299.0))
            .collect();
        let model_gamma = model_tau.iter().map(|t| bump(t, -0.5, 6.2, 0.38)).collect();
        // Step of the measured grid in ln tau.
        let step = 7.0 / 79.0 * std::f64::consts::LN_10;
        Drt {
            tau,
            gamma,
            model_tau,
            model_gamma,
            lines: vec![(1e-3, 4.0), (1e-4, 0.5)],
            height: 1.0 / step,
        }
    }

    fn drt_figure(d: &Drt) -> ModelDrtFigure<'_> {
        ModelDrtFigure {
            tau_s: &d.tau,
            gamma_ohm: &d.gamma,
            model_tau_s: &d.model_tau,
            model_gamma_ohm: &d.model_gamma,
            model_lines: &d.lines,
            line_height_per_ohm: d.height,
            title: "Separator test cell, chosen circuit",
        }
    }

    #[test]
    fn drt_renders_both_formats() {
        let d = drt();
        let fig = drt_figure(&d);
        let png = render_model_drt(&fig, ImageFormat::Png).unwrap();
        check_png(&png, DRT_SIZE);
        save("model_drt.png", &png);
        let svg = render_model_drt(&fig, ImageFormat::Svg).unwrap();
        save("model_drt.svg", &svg);
        check_svg(
            &svg,
            &[
                "tau (s)",
                "gamma (ohm)",
                "measured DRT",
                "fitted model (analytical)",
                "10⁻³",
            ],
        );
    }

    /// A line of R ohm is a stem of height R * line_height_per_ohm, with
    /// one dot on top; no lines, no stems; an unusable height, no stems.
    #[test]
    fn drt_stems_follow_the_lines() {
        let d = drt();
        let fig = drt_figure(&d);
        let plot = ModelDrt::new(&fig).unwrap();
        // 1 / (7/79 ln 10) = 4.9013 per ohm: 4 ohm -> 19.6 (above the
        // measured peak of 12), 0.5 ohm -> 2.45.
        assert_eq!(plot.stems.len(), 2);
        let want = [(1e-3, 4.0 * d.height), (1e-4, 0.5 * d.height)];
        for (got, want) in plot.stems.iter().zip(want) {
            assert!((got.0 - want.0).abs() < 1e-15 && (got.1 - want.1).abs() < 1e-12);
        }
        assert!((d.height - 4.9013).abs() < 1e-4, "{}", d.height);
        assert!(plot.y.contains(19.6) && plot.y.hi < 21.0, "{:?}", plot.y);
        let svg = render_model_drt(&fig, ImageFormat::Svg).unwrap();
        assert_eq!(dots(&svg, FIT_HEX), 2);

        let no_lines = ModelDrtFigure {
            model_lines: &[],
            ..fig
        };
        let plot = ModelDrt::new(&no_lines).unwrap();
        assert!(plot.stems.is_empty());
        assert!(plot.y.hi < 13.0, "{:?}", plot.y);
        let svg = render_model_drt(&no_lines, ImageFormat::Svg).unwrap();
        assert_eq!(dots(&svg, FIT_HEX), 0);
        check_svg(&svg, &["measured DRT", "fitted model (analytical)"]);

        // Neither lines nor a continuous part: no model key.
        let measured_only = ModelDrtFigure {
            model_tau_s: &[],
            model_gamma_ohm: &[],
            ..no_lines
        };
        let svg = render_model_drt(&measured_only, ImageFormat::Svg).unwrap();
        check_svg(&svg, &["measured DRT"]);
        assert!(!text(&svg).contains("fitted model"));
        // Lines only: the key is there.
        let lines_only = ModelDrtFigure {
            model_lines: &d.lines,
            ..measured_only
        };
        let svg = render_model_drt(&lines_only, ImageFormat::Svg).unwrap();
        check_svg(&svg, &["fitted model (analytical)"]);
        assert_eq!(dots(&svg, FIT_HEX), 2);

        for h in [f64::NAN, f64::INFINITY] {
            let bad = ModelDrtFigure {
                line_height_per_ohm: h,
                ..fig
            };
            assert!(ModelDrt::new(&bad).unwrap().stems.is_empty());
            render_model_drt(&bad, ImageFormat::Png).unwrap();
        }
        // Lines at unusable tau are skipped, the rest kept.
        let rough = [
            (f64::NAN, 1.0),
            (0.0, 1.0),
            (1e-2, f64::INFINITY),
            (1e-2, 1.0),
        ];
        let some = ModelDrtFigure {
            model_lines: &rough,
            ..fig
        };
        assert_eq!(ModelDrt::new(&some).unwrap().stems, vec![(1e-2, d.height)]);
    }

    #[test]
    fn fit_figures_check_their_input() {
        let d = data();
        let empty = ModelFitFigure {
            frequency_hz: &[],
            z_re_ohm: &[],
            z_im_ohm: &[],
            curves: &[],
            title: "",
        };
        let err = render_model_nyquist(&empty, ImageFormat::Png)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot model-nyquist.png: nothing to plot (frequency_hz is empty)"
        );
        let short = ModelFitFigure {
            frequency_hz: &d.f,
            z_re_ohm: &d.re,
            z_im_ohm: &d.im[1..],
            ..empty
        };
        let err = render_model_bode(&short, ImageFormat::Svg)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot model-bode.svg: z_im_ohm has 29 values but frequency_hz has 30"
        );
        let bad_curve = [ModelCurve {
            label: "2 processes",
            chosen: true,
            frequency_hz: &[1.0, 2.0],
            z_re_ohm: &[1.0, 2.0],
            z_im_ohm: &[1.0],
        }];
        let fig = fit_figure(&d, &bad_curve);
        let err = render_model_nyquist(&fig, ImageFormat::Svg)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot model-nyquist.svg: curve 1 (\"2 processes\"): z_im_ohm has 1 values \
             but frequency_hz has 2"
        );
    }

    /// Degenerate spectra and curves render without a panic.
    #[test]
    fn fit_figures_degenerate_inputs() {
        let (d, c) = (data(), candidates());
        let nan = [f64::NAN; 3];
        // A candidate whose fit failed (no values) and one of NaN only.
        let failed = [
            ModelCurve {
                label: "failed fit",
                chosen: false,
                frequency_hz: &[],
                z_re_ohm: &[],
                z_im_ohm: &[],
            },
            ModelCurve {
                label: "NaN fit",
                chosen: true,
                frequency_hz: &[1.0, 2.0, 3.0],
                z_re_ohm: &nan,
                z_im_ohm: &nan,
            },
        ];
        let fig = fit_figure(&d, &failed);
        for svg in [
            render_model_nyquist(&fig, ImageFormat::Svg).unwrap(),
            render_model_bode(&fig, ImageFormat::Svg).unwrap(),
        ] {
            // Nothing drawn, no key.
            assert!(!text(&svg).contains("failed fit") && !text(&svg).contains("NaN fit"));
        }
        let svg = render_model_bode(&fig, ImageFormat::Svg).unwrap();
        check_svg(&svg, &["no residual at the measured frequencies"]);

        // No curves at all.
        let bare = fit_figure(&d, &[]);
        let svg = render_model_bode(&bare, ImageFormat::Svg).unwrap();
        check_svg(&svg, &["no chosen fit", "measured"]);

        // A chosen curve on a band that misses half the data: residuals
        // only inside it.
        let half: Vec<ModelCurve> = curves(&c, Some(1))
            .into_iter()
            .map(|k| ModelCurve {
                frequency_hz: &k.frequency_hz[60..],
                z_re_ohm: &k.z_re_ohm[60..],
                z_im_ohm: &k.z_im_ohm[60..],
                ..k
            })
            .collect();
        let fig = fit_figure(&d, &half);
        let plot = ModelBode::new(&fig).unwrap();
        let shown = plot.res_re_pct.iter().filter(|v| v.is_finite()).count();
        // Data at 10^(-1 + 6 i/29) >= 10^2 Hz: i >= 14.5, so 15 points.
        assert_eq!(shown, 15);

        // One point; a flat spectrum with NaN, zero and infinite entries;
        // zeros; a million-fold range of |Z| (1 mohm to 1 kohm).
        let wide_f: Vec<f64> = (0..60)
            .map(|i| 10f64.powf(-3.0 + 0.15 * f64::from(i)))
            .collect();
        let (wide_re, wide_im): (Vec<f64>, Vec<f64>) = wide_f
            .iter()
            .map(|&f| {
                let (a, b) = voigt(f, 1e-3, 1e3, 1e-3);
                let (p, q) = voigt(f, 0.0, 1e-2, 1e-4);
                (a + p, b + q)
            })
            .collect();
        let wide_curve = [ModelCurve {
            label: "wide",
            chosen: true,
            frequency_hz: &wide_f,
            z_re_ohm: &wide_re,
            z_im_ohm: &wide_im,
        }];
        let single_curve = [ModelCurve {
            label: "one point",
            chosen: true,
            frequency_hz: &[50.0],
            z_re_ohm: &[10.0],
            z_im_ohm: &[-1.0],
        }];
        let figures = [
            ModelFitFigure {
                frequency_hz: &[50.0],
                z_re_ohm: &[10.0],
                z_im_ohm: &[-1.0],
                curves: &single_curve,
                title: "",
            },
            ModelFitFigure {
                frequency_hz: &[1.0, 10.0, f64::NAN, -5.0, 100.0],
                z_re_ohm: &[5.0, 5.0, 5.0, 5.0, f64::INFINITY],
                z_im_ohm: &[0.0, 0.0, 0.0, 0.0, 0.0],
                curves: &failed,
                title: "",
            },
            ModelFitFigure {
                frequency_hz: &[1.0, 2.0],
                z_re_ohm: &[0.0, 1e-300],
                z_im_ohm: &[0.0, 0.0],
                curves: &single_curve[..0],
                title: "",
            },
            ModelFitFigure {
                frequency_hz: &wide_f,
                z_re_ohm: &wide_re,
                z_im_ohm: &wide_im,
                curves: &wide_curve,
                title: "A million-fold range",
            },
        ];
        for fig in &figures {
            check_png(
                &render_model_nyquist(fig, ImageFormat::Png).unwrap(),
                NYQUIST_SIZE,
            );
            render_model_nyquist(fig, ImageFormat::Svg).unwrap();
            check_png(
                &render_model_bode(fig, ImageFormat::Png).unwrap(),
                BODE_SIZE,
            );
            render_model_bode(fig, ImageFormat::Svg).unwrap();
        }
        let wide = &figures[3];
        save(
            "model_bode_wide.png",
            &render_model_bode(wide, ImageFormat::Png).unwrap(),
        );
        // The wide spectrum's exact fit: residuals at rounding level.
        let plot = ModelBode::new(wide).unwrap();
        assert!(plot.res_re_pct.iter().all(|v| v.abs() < 1e-9));

        // No usable point at all: a clear error, no panic.
        let unusable = ModelFitFigure {
            frequency_hz: &[1.0, 2.0],
            z_re_ohm: &[f64::NAN, f64::INFINITY],
            z_im_ohm: &[0.0, 0.0],
            curves: &[],
            title: "",
        };
        let err = render_model_nyquist(&unusable, ImageFormat::Png)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot model-nyquist.png: no impedance point with finite real and imaginary parts"
        );
        assert!(render_model_bode(&unusable, ImageFormat::Png).is_err());
    }

    #[test]
    fn drt_degenerate_inputs() {
        let empty = ModelDrtFigure {
            tau_s: &[],
            gamma_ohm: &[],
            model_tau_s: &[],
            model_gamma_ohm: &[],
            model_lines: &[],
            line_height_per_ohm: 1.0,
            title: "",
        };
        let err = render_model_drt(&empty, ImageFormat::Png)
            .unwrap_err()
            .to_string();
        assert_eq!(err, "plot model-drt.png: nothing to plot (tau_s is empty)");
        let mismatch = ModelDrtFigure {
            tau_s: &[1.0, 2.0],
            gamma_ohm: &[1.0, 2.0],
            model_tau_s: &[1.0],
            ..empty
        };
        let err = render_model_drt(&mismatch, ImageFormat::Svg)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot model-drt.svg: model_gamma_ohm has 0 values but model_tau_s has 1"
        );
        let unusable = ModelDrtFigure {
            tau_s: &[0.0, f64::NAN],
            gamma_ohm: &[1.0, 1.0],
            ..empty
        };
        let err = render_model_drt(&unusable, ImageFormat::Svg)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot model-drt.svg: no point with positive finite tau_s and finite gamma_ohm to plot"
        );
        // ... but a line alone can be drawn.
        let line = [(1e-3, 2.0)];
        let line_only = ModelDrtFigure {
            model_lines: &line,
            ..unusable
        };
        check_png(
            &render_model_drt(&line_only, ImageFormat::Png).unwrap(),
            DRT_SIZE,
        );

        // One point, a flat zero DRT with NaN and infinity, and a
        // million-fold range of tau and gamma.
        let wide_tau: Vec<f64> = (0..100)
            .map(|i| 10f64.powf(-9.0 + 0.12 * f64::from(i)))
            .collect();
        let wide_gamma: Vec<f64> = (0..100)
            .map(|i| 10f64.powf(-6.0 + 0.06 * f64::from(i)))
            .collect();
        let wide_lines = [(1e-8, 1e-6), (1e2, 1e3)];
        let figures = [
            ModelDrtFigure {
                tau_s: &[1e-3],
                gamma_ohm: &[4.0],
                model_tau_s: &[1e-3],
                model_gamma_ohm: &[4.0],
                model_lines: &line,
                ..empty
            },
            ModelDrtFigure {
                tau_s: &[1e-3, 1e-3, f64::NAN, 0.0, 1e-3],
                gamma_ohm: &[0.0, 0.0, 1.0, 1.0, f64::INFINITY],
                model_tau_s: &[1e-3, 2e-3],
                model_gamma_ohm: &[f64::NAN, f64::NEG_INFINITY],
                ..empty
            },
            ModelDrtFigure {
                tau_s: &wide_tau,
                gamma_ohm: &wide_gamma,
                model_tau_s: &wide_tau,
                model_gamma_ohm: &wide_gamma,
                model_lines: &wide_lines,
                line_height_per_ohm: 3.0,
                title: "A million-fold range",
            },
        ];
        for fig in &figures {
            check_png(&render_model_drt(fig, ImageFormat::Png).unwrap(), DRT_SIZE);
            render_model_drt(fig, ImageFormat::Svg).unwrap();
        }
        save(
            "model_drt_degenerate.png",
            &render_model_drt(&figures[1], ImageFormat::Png).unwrap(),
        );
    }
}
