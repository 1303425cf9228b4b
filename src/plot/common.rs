//! Drawing machinery shared by every figure: the embedded font, the SVG and
//! PNG canvases, panel construction and input checks.
//!
//! Axis ranges and tick marks live in [`super::axis`], series and legends
//! in [`super::draw`]; this file sets up the canvas and the panels.

use std::path::PathBuf;
use std::sync::OnceLock;

use plotters::coord::Shift;
use plotters::coord::ranged1d::{DefaultFormatting, KeyPointHint, Ranged};
use plotters::prelude::*;
use plotters::style::{FontDesc, FontFamily, FontStyle, register_font};

use super::ImageFormat;
use super::axis::{Axis, Ticks};
use crate::{Error, Result};

/// Result of a drawing step; the message becomes [`Error::Plot`]'s `msg`.
pub(crate) type DrawResult<T> = std::result::Result<T, String>;

/// DejaVu Sans, bundled so that PNG output needs no system fonts.
const FONT_TTF: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// Family name used for every piece of text.
///
/// The SVG backend copies the family name verbatim into `font-family`, so
/// the name is written as a CSS fallback list: viewers without DejaVu Sans
/// still pick a sans-serif face. For PNG the same string is merely the key
/// under which the embedded font is registered.
pub(crate) const FAMILY: &str = "DejaVu Sans, sans-serif";

/// Registers the embedded font once per process.
fn ensure_font() -> DrawResult<()> {
    static READY: OnceLock<std::result::Result<(), String>> = OnceLock::new();
    READY
        .get_or_init(|| {
            // "sans-serif" is the family plotters falls back to for any style
            // left at its default; registering it too keeps such text on the
            // embedded font instead of failing on a machine without fonts.
            for name in [FAMILY, "sans-serif"] {
                register_font(name, FontStyle::Normal, FONT_TTF)
                    .map_err(|_| "the embedded font could not be loaded".to_string())?;
            }
            Ok(())
        })
        .clone()
}

/// Text style in the embedded font at `size` pixels, dark grey.
pub(crate) fn font(size: f64) -> TextStyle<'static> {
    TextStyle::from(FontDesc::new(
        FontFamily::Name(FAMILY),
        size,
        FontStyle::Normal,
    ))
    .color(&INK)
}

/// Measured data.
pub(crate) const DATA: RGBColor = RGBColor(24, 82, 150);
/// Fitted or model curves.
pub(crate) const FIT: RGBColor = RGBColor(210, 84, 28);
/// Peaks and per-rule choices.
pub(crate) const ACCENT: RGBColor = RGBColor(30, 135, 85);
/// Axis lines, frames and text.
pub(crate) const INK: RGBColor = RGBColor(35, 35, 35);
/// Major grid lines.
pub(crate) const GRID: RGBColor = RGBColor(212, 212, 212);
/// Minor grid lines.
const GRID_LIGHT: RGBColor = RGBColor(236, 236, 236);

/// Turns a plotters error into a message.
pub(crate) fn de<E: std::fmt::Display>(e: E) -> String {
    format!("drawing failed: {e}")
}

/// A figure that can paint itself on any plotters backend.
pub(crate) trait Paint {
    /// Draws the whole figure on `root`, which is already filled white.
    fn paint<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<()>;
}

/// File name used in error messages: `stem.svg` or `stem.png`.
pub(crate) fn file_name(stem: &str, format: ImageFormat) -> PathBuf {
    let ext = match format {
        ImageFormat::Svg => "svg",
        ImageFormat::Png => "png",
    };
    PathBuf::from(format!("{stem}.{ext}"))
}

/// Wraps a message into the crate error for the plot `stem`.
pub(crate) fn plot_error(stem: &str, format: ImageFormat, msg: String) -> Error {
    Error::Plot {
        path: file_name(stem, format),
        msg,
    }
}

/// Renders `figure` to SVG text or PNG bytes of `size` pixels.
pub(crate) fn render(
    figure: &impl Paint,
    stem: &str,
    format: ImageFormat,
    size: (u32, u32),
) -> Result<Vec<u8>> {
    render_inner(figure, format, size).map_err(|msg| plot_error(stem, format, msg))
}

fn render_inner(figure: &impl Paint, format: ImageFormat, size: (u32, u32)) -> DrawResult<Vec<u8>> {
    ensure_font()?;
    match format {
        ImageFormat::Svg => {
            let mut svg = String::new();
            {
                let root = SVGBackend::with_string(&mut svg, size).into_drawing_area();
                root.fill(&WHITE).map_err(de)?;
                figure.paint(&root)?;
                root.present().map_err(de)?;
            }
            Ok(svg.into_bytes())
        }
        ImageFormat::Png => {
            let (w, h) = size;
            let mut rgb = vec![0u8; w as usize * h as usize * 3];
            {
                let root = BitMapBackend::with_buffer(&mut rgb, size).into_drawing_area();
                root.fill(&WHITE).map_err(de)?;
                figure.paint(&root)?;
                root.present().map_err(de)?;
            }
            encode_png(&rgb, w, h)
        }
    }
}

/// Encodes an 8-bit RGB buffer as PNG.
fn encode_png(rgb: &[u8], width: u32, height: u32) -> DrawResult<Vec<u8>> {
    let fail = |e: png::EncodingError| format!("cannot encode PNG: {e}");
    let mut out = Vec::new();
    let mut encoder = png::Encoder::new(&mut out, width, height);
    encoder.set_color(png::ColorType::Rgb);
    encoder.set_depth(png::BitDepth::Eight);
    let mut writer = encoder.write_header().map_err(fail)?;
    writer.write_image_data(rgb).map_err(fail)?;
    writer.finish().map_err(fail)?;
    Ok(out)
}

/// Draws the figure title (if any) and returns the area left below it.
pub(crate) fn titled<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    title: &str,
) -> DrawResult<DrawingArea<DB, Shift>> {
    if title.trim().is_empty() {
        return Ok(root.margin(8, 0, 0, 0));
    }
    root.titled(title, font(21.0)).map_err(de)
}

/// One axis as plotters sees it: a linear range in plot coordinates with
/// tick positions chosen by [`Axis::ticks`] rather than by plotters.
pub(crate) struct PlotRange {
    lo: f64,
    hi: f64,
    bold: Vec<f64>,
    light: Vec<f64>,
}

impl PlotRange {
    fn new(axis: &Axis, ticks: &Ticks) -> Self {
        Self {
            lo: axis.lo,
            hi: axis.hi,
            bold: ticks.bold.clone(),
            light: ticks.light.clone(),
        }
    }
}

impl Ranged for PlotRange {
    type FormatOption = DefaultFormatting;
    type ValueType = f64;

    fn map(&self, v: &f64, limit: (i32, i32)) -> i32 {
        let t = (v - self.lo) / (self.hi - self.lo);
        let px = f64::from(limit.0) + t * f64::from(limit.1 - limit.0);
        // Clamped so that a far-off value cannot overflow the pixel type.
        px.round().clamp(-1e6, 1e6) as i32
    }

    fn key_points<Hint: KeyPointHint>(&self, hint: Hint) -> Vec<f64> {
        if hint.weight().allow_light_points() {
            self.light.clone()
        } else {
            self.bold.clone()
        }
    }

    fn range(&self) -> std::ops::Range<f64> {
        self.lo..self.hi
    }
}

/// Chart on a pair of axes in plot coordinates (log10 for log axes).
pub(crate) type Chart<'c, DB> = ChartContext<'c, DB, Cartesian2d<PlotRange, PlotRange>>;

/// Everything needed to set up one panel.
pub(crate) struct Panel<'s> {
    /// Horizontal axis.
    pub x: Axis,
    /// Vertical axis.
    pub y: Axis,
    /// Horizontal axis label with unit; `None` hides the tick labels too
    /// (for panels stacked above one that carries the shared axis).
    pub x_desc: Option<&'s str>,
    /// Vertical axis label with unit.
    pub y_desc: &'s str,
    /// Panel heading, for figures with several panels.
    pub caption: Option<&'s str>,
    /// Upper bound on the number of labelled ticks along x.
    pub x_ticks: usize,
    /// Upper bound on the number of labelled ticks along y.
    pub y_ticks: usize,
    /// Same linear tick step on both axes (equal-scale plots).
    pub common_step: Option<f64>,
    /// Leave a strip above the plotting area for a row of legend keys.
    pub key_room: bool,
}

fn builder<'a, 'b, DB: DrawingBackend>(
    area: &'a DrawingArea<DB, Shift>,
    panel: &Panel<'_>,
) -> ChartBuilder<'a, 'b, DB> {
    let mut b = ChartBuilder::on(area);
    b.margin_top(if panel.key_room { 30 } else { 10 })
        .margin_bottom(6)
        .margin_left(8)
        .margin_right(28)
        .x_label_area_size(if panel.x_desc.is_some() { 58 } else { 10 })
        .y_label_area_size(92);
    if let Some(caption) = panel.caption {
        b.caption(caption, font(17.0));
    }
    b
}

/// Size in pixels of the plotting area `panel` would get on `area`.
pub(crate) fn plot_size<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    panel: &Panel<'_>,
) -> DrawResult<(u32, u32)> {
    let chart = builder(area, panel)
        .build_cartesian_2d(0.0..1.0, 0.0..1.0)
        .map_err(de)?;
    Ok(chart.plotting_area().dim_in_pixel())
}

/// Tick labels' font size in pixels.
const TICK_FONT: f64 = 16.0;

/// Ticks for `axis` with the largest count up to `max_ticks` whose labels
/// need at most `room_px` pixels according to `need`.
fn fitted_ticks(
    axis: &Axis,
    max_ticks: usize,
    room_px: u32,
    need: impl Fn(&Ticks) -> DrawResult<u32>,
) -> DrawResult<Ticks> {
    let mut n = max_ticks.max(2);
    loop {
        let ticks = axis.ticks(n);
        if n <= 2 || need(&ticks)? <= room_px {
            return Ok(ticks);
        }
        n -= 1;
    }
}

/// Builds a panel and draws its grid, ticks, axis labels and frame.
pub(crate) fn build_panel<'c, DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    panel: &Panel<'_>,
) -> DrawResult<Chart<'c, DB>> {
    let (xt, yt) = match panel.common_step {
        Some(step) => (panel.x.linear_ticks(step), panel.y.linear_ticks(step)),
        None => {
            let (w, h) = plot_size(area, panel)?;
            let x_need = |t: &Ticks| -> DrawResult<u32> {
                let mut total = 0;
                for &p in &t.bold {
                    let (tw, _) = area
                        .estimate_text_size(&t.label(p), &font(TICK_FONT))
                        .map_err(de)?;
                    total += tw + 14;
                }
                Ok(total)
            };
            let y_need = |t: &Ticks| Ok(t.bold.len() as u32 * 26);
            (
                fitted_ticks(&panel.x, panel.x_ticks, w, x_need)?,
                fitted_ticks(&panel.y, panel.y_ticks, h, y_need)?,
            )
        }
    };
    let mut chart = builder(area, panel)
        .build_cartesian_2d(PlotRange::new(&panel.x, &xt), PlotRange::new(&panel.y, &yt))
        .map_err(de)?;
    let show_x = panel.x_desc.is_some();
    let x_fmt = |v: &f64| if show_x { xt.label(*v) } else { String::new() };
    let y_fmt = |v: &f64| yt.label(*v);
    chart
        .configure_mesh()
        .x_label_formatter(&x_fmt)
        .y_label_formatter(&y_fmt)
        .x_desc(panel.x_desc.unwrap_or(""))
        .y_desc(panel.y_desc)
        .label_style(font(TICK_FONT))
        .axis_desc_style(font(17.0))
        .bold_line_style(GRID)
        .light_line_style(GRID_LIGHT)
        .axis_style(INK)
        .draw()
        .map_err(de)?;
    chart
        .plotting_area()
        .draw(&Rectangle::new(
            [(panel.x.lo, panel.y.lo), (panel.x.hi, panel.y.hi)],
            INK.stroke_width(1),
        ))
        .map_err(de)?;
    Ok(chart)
}

/// Checks that a required series has data.
pub(crate) fn require(name: &str, values: &[f64]) -> DrawResult<()> {
    if values.is_empty() {
        return Err(format!("nothing to plot ({name} is empty)"));
    }
    Ok(())
}

/// Checks that `values` has as many entries as `reference`.
pub(crate) fn same_len(
    name: &str,
    values: &[f64],
    ref_name: &str,
    reference: &[f64],
) -> DrawResult<()> {
    if values.len() != reference.len() {
        return Err(format!(
            "{} has {} values but {} has {}",
            name,
            values.len(),
            ref_name,
            reference.len()
        ));
    }
    Ok(())
}

/// Like [`same_len`], but an empty `values` (series not supplied) is accepted.
pub(crate) fn same_len_or_empty(
    name: &str,
    values: &[f64],
    ref_name: &str,
    reference: &[f64],
) -> DrawResult<()> {
    if values.is_empty() {
        return Ok(());
    }
    same_len(name, values, ref_name, reference)
}
