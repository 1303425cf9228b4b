//! Figures of a series of spectra (over cycling, state of charge or
//! temperature): a heat map of the distributions, the trends of each
//! tracked process, and an Arrhenius plot of them.

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::FontTransform;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::ImageFormat;
use super::axis::{Axis, Extent, Scale};
use super::common::{self, Chart, DrawResult, INK, Paint, Panel};
use super::draw::{self, Key, Mark};
use crate::Result;
use crate::series::K_B_EV_PER_K;

/// One track (a process followed across the series) as drawn over the heat map.
#[derive(Clone, Copy, Debug)]
pub struct TrackLine<'a> {
    /// Track number, written next to the track's last point.
    pub id: u32,
    /// Position of each point along the series, in the unit of the heat map's x.
    pub x: &'a [f64],
    /// Relaxation time of each point in s; NaN or non-positive entries are skipped.
    pub tau_s: &'a [f64],
}

/// Heat map of a series of distributions: x = spectrum position or label,
/// y = log10 tau, colour = gamma.
#[derive(Clone, Copy, Debug)]
pub struct HeatmapFigure<'a> {
    /// Centre x of each column (ascending, may be non-uniform; column edges
    /// halfway between neighbours, the outer ones mirrored).
    pub x: &'a [f64],
    /// Axis label of x with unit, e.g. "spectrum" or "temperature (degC)".
    pub x_label: &'a str,
    /// tau samples (s), ascending, shared by every column.
    pub tau_s: &'a [f64],
    /// gamma per column: `gamma[c][k]` at `tau_s[k]` (ohm); `len == x.len()`,
    /// each inner `len == tau_s.len()`.
    pub gamma: &'a [Vec<f64>],
    /// Colour bar label with unit, e.g. "gamma (ohm)".
    pub gamma_label: &'a str,
    /// Tracks drawn over the map as lines with markers and their id written
    /// at the last point; may be empty.
    pub tracks: &'a [TrackLine<'a>],
    /// Figure title; empty for none.
    pub title: &'a str,
}

/// Tau and R of every track against the label.
#[derive(Clone, Copy, Debug)]
pub struct TrackSeries<'a> {
    /// Track number, shown in the legend as `track N`.
    pub id: u32,
    /// Position of each point along the series, in the unit named by the
    /// figure's `x_label`.
    pub x: &'a [f64],
    /// Relaxation time of each point in s (log axis).
    pub tau_s: &'a [f64],
    /// Resistance of each point in ohm.
    pub r_ohm: &'a [f64],
}

/// Trends of the tracked processes: τ and R against the series label.
#[derive(Clone, Copy, Debug)]
pub struct TrendFigure<'a> {
    /// Axis label of x with unit, e.g. "cycle" or "state of charge (%)".
    pub x_label: &'a str,
    /// The tracks, one colour each.
    pub tracks: &'a [TrackSeries<'a>],
    /// Figure title; empty for none.
    pub title: &'a str,
}

/// Arrhenius plot: ln(1/tau) and ln(1/R) of each track against 1000/T.
#[derive(Clone, Copy, Debug)]
pub struct ArrheniusTrack<'a> {
    /// Track number, shown in the legend as `track N`.
    pub id: u32,
    /// 1/T in 1/K, one per point.
    pub inv_t_per_k: &'a [f64],
    /// Relaxation time of each point in s.
    pub tau_s: &'a [f64],
    /// Resistance of each point in ohm.
    pub r_ohm: &'a [f64],
    /// Fitted activation energy (eV) and intercept `a` of
    /// ln(1/tau) = a_tau - ea_tau_ev/(k_B T); None when no fit (fewer than
    /// 3 points). Drawn as a straight line with "Ea = 0.61 eV" in the legend.
    pub tau_fit: Option<(f64, f64)>,
    /// Fitted activation energy (eV) and intercept `a` of
    /// ln(1/R) = a_r - ea_r_ev/(k_B T); None when no fit.
    pub r_fit: Option<(f64, f64)>,
}

/// Arrhenius plot of the tracks of a temperature series.
#[derive(Clone, Copy, Debug)]
pub struct ArrheniusFigure<'a> {
    /// The tracks, one colour each.
    pub tracks: &'a [ArrheniusTrack<'a>],
    /// Figure title; empty for none.
    pub title: &'a str,
}

// ---------------------------------------------------------------------------
// Colours

/// Viridis, the perceptually uniform sequential colour map of van der Walt
/// and Smith (matplotlib, 2015), at ten evenly spaced positions from 0 to 1
/// (values written from memory of the published table). Colours in between
/// are interpolated linearly in RGB.
const VIRIDIS: [(u8, u8, u8); 10] = [
    (0x44, 0x01, 0x54),
    (0x48, 0x28, 0x78),
    (0x3e, 0x4a, 0x89),
    (0x31, 0x68, 0x8e),
    (0x26, 0x82, 0x8e),
    (0x1f, 0x9e, 0x89),
    (0x35, 0xb7, 0x79),
    (0x6d, 0xcd, 0x59),
    (0xb4, 0xde, 0x2c),
    (0xfd, 0xe7, 0x25),
];

/// Colour of `t` in [0, 1] on [`VIRIDIS`]; values outside are clipped,
/// NaN gives the bottom colour.
fn colormap(t: f64) -> RGBColor {
    let t = if t.is_nan() { 0.0 } else { t.clamp(0.0, 1.0) };
    let s = t * (VIRIDIS.len() - 1) as f64;
    let i = (s.floor() as usize).min(VIRIDIS.len() - 2);
    let f = s - i as f64;
    let (a, b) = (VIRIDIS[i], VIRIDIS[i + 1]);
    let mix = |p: u8, q: u8| (f64::from(p) + f * (f64::from(q) - f64::from(p))).round() as u8;
    RGBColor(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2))
}

/// Colour levels of the heat map in SVG: cells of one level that touch
/// merge into one rectangle, which keeps the file small.
const SVG_LEVELS: u16 = 64;
/// Colour levels of the heat map in PNG, where the count costs nothing.
const PNG_LEVELS: u16 = 256;
/// Cells whose γ is NaN.
const NO_VALUE: RGBColor = RGBColor(190, 190, 190);

/// Colour level (0 to `levels` - 1) of `g` on a scale from 0 to `max`:
/// values are clipped to [0, max]; NaN has none.
fn level(g: f64, max: f64, levels: u16) -> Option<u16> {
    if g.is_nan() {
        return None;
    }
    let t = if max > 0.0 {
        g.clamp(0.0, max) / max
    } else {
        0.0
    };
    Some((t * f64::from(levels - 1)).round() as u16)
}

/// Colour of level `l` of `levels`.
fn level_color(l: Option<u16>, levels: u16) -> RGBColor {
    match l {
        Some(l) => colormap(f64::from(l) / f64::from(levels - 1)),
        None => NO_VALUE,
    }
}

/// Okabe and Ito's palette for colour-blind readers ("Color Universal
/// Design", 2008; values from memory), without its yellow, which is too
/// pale on white, and with the crate's ink for its black.
pub(crate) const TRACK_COLORS: [RGBColor; 7] = [
    RGBColor(0, 114, 178),
    RGBColor(213, 94, 0),
    RGBColor(0, 158, 115),
    RGBColor(204, 121, 167),
    RGBColor(230, 159, 0),
    RGBColor(86, 180, 233),
    INK,
];

/// Colour of track `id`: the same id has the same colour in every figure.
fn track_color(id: u32) -> RGBColor {
    TRACK_COLORS[id as usize % TRACK_COLORS.len()]
}

// ---------------------------------------------------------------------------
// Shared helpers

/// Runs of consecutive plottable points of `(xs[i], ys[i])` in plot
/// coordinates; an unplottable entry breaks the line.
fn runs(xs: &[f64], ys: &[f64], x: &Axis, y: &Axis) -> Vec<Vec<(f64, f64)>> {
    let mut out: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
    for (&a, &b) in xs.iter().zip(ys) {
        match (x.scale.to_plot(a), y.scale.to_plot(b)) {
            (Some(p), Some(q)) => {
                if let Some(run) = out.last_mut() {
                    run.push((p, q));
                }
            }
            _ if out.last().is_some_and(|r| !r.is_empty()) => out.push(Vec::new()),
            _ => {}
        }
    }
    out.retain(|r| !r.is_empty());
    out
}

/// Checks that every series of track `id` has as many entries as its `x`.
fn check_track(id: u32, x_name: &str, x: &[f64], others: &[(&str, &[f64])]) -> DrawResult<()> {
    for (name, values) in others {
        if values.len() != x.len() {
            return Err(format!(
                "track {id}: {name} has {} values but {x_name} has {}",
                values.len(),
                x.len()
            ));
        }
    }
    Ok(())
}

/// An axis from `extent`, or a placeholder decade when it holds nothing
/// (a panel whose series are all unplottable is drawn empty).
fn axis_or_placeholder(extent: &Extent, scale: Scale, what: &str) -> DrawResult<Axis> {
    if extent.raw().is_some() {
        extent.finish(what)
    } else {
        Ok(Axis {
            scale,
            lo: 0.0,
            hi: 1.0,
        })
    }
}

/// The two stacked areas of a figure with a shared x axis: equal plotting
/// heights, the lower panel carrying the 48 px taller x label area.
fn two_panels<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
) -> (DrawingArea<DB, Shift>, DrawingArea<DB, Shift>) {
    let h = area.dim_in_pixel().1 as i32;
    area.split_vertically((h - 48) / 2)
}

/// A panel on the shared axis `x`; only the lower one shows `x_desc`.
fn stacked_panel<'s>(x: Axis, y: Axis, x_desc: Option<&'s str>, y_desc: &'s str) -> Panel<'s> {
    Panel {
        x,
        y,
        x_desc,
        y_desc,
        caption: None,
        x_ticks: 10,
        y_ticks: 6,
        common_step: None,
        key_room: false,
    }
}

/// Writes `text` in the middle of `area` when `empty` (a panel with
/// nothing to show).
fn note_if_empty<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    empty: bool,
    text: &str,
) -> DrawResult<()> {
    if empty {
        draw::draw_note(area, text, None, 15.0)?;
    }
    Ok(())
}

// ---------------------------------------------------------------------------
// Heat map

const HEATMAP_SIZE: (u32, u32) = (1000, 640);
const HEATMAP_STEM: &str = "heatmap";
/// Width of the strip right of the map that holds the colour bar.
const BAR_STRIP: i32 = 150;
/// Gap between the strip's left edge and the bar, and the bar's width.
const BAR_GAP: i32 = 14;
const BAR_WIDTH: i32 = 22;
/// Tick labels' font size in pixels (as on the other axes).
const TICK_FONT: f64 = 16.0;
/// Tracks with more plottable points than this are drawn without markers,
/// which would merge into a band.
const MAX_MARKERS: usize = 150;

/// Renders the distributions of a series as a heat map: one column per
/// spectrum at `x` (linear axis labelled `x_label`), τ upwards (log axis,
/// label `tau (s)`), γ as colour on the viridis scale from 0 (bottom of the
/// colour bar) to the largest finite γ (top); γ is clipped to that range
/// and NaN cells are grey. A colour bar with ticks and `gamma_label` stands
/// right of the map. Each track is drawn over the map as a white line with
/// a dark outline, with markers (up to 150 points) and its id in a small
/// box at its last point; points with NaN or non-positive τ are skipped and
/// break the line. Columns whose x is not finite and rows whose τ is not
/// positive and finite are left out.
///
/// SVG output draws touching cells of the same colour (γ quantised to 64
/// levels) as one rectangle; PNG uses 256 levels.
///
/// Returns SVG text as bytes or an encoded PNG of 1000 × 640 px. Fails with
/// [`Error::Plot`](crate::Error::Plot) (path `heatmap.svg` or
/// `heatmap.png`) when `x` or `tau_s` is empty, when `gamma` has a number
/// of columns other than `x`'s or a column of a length other than
/// `tau_s`'s, when the usable x or τ are not strictly ascending, when no
/// finite γ remains, or when a track's `tau_s` and `x` differ in length.
pub fn render_heatmap(fig: &HeatmapFigure, format: ImageFormat) -> Result<Vec<u8>> {
    let levels = match format {
        ImageFormat::Svg => SVG_LEVELS,
        ImageFormat::Png => PNG_LEVELS,
    };
    let plot =
        HeatmapPlot::new(fig, levels).map_err(|m| common::plot_error(HEATMAP_STEM, format, m))?;
    common::render(&plot, HEATMAP_STEM, format, HEATMAP_SIZE)
}

struct HeatmapPlot<'a> {
    fig: &'a HeatmapFigure<'a>,
    /// Indices of the columns (usable x) and rows (usable τ) drawn.
    cols: Vec<usize>,
    rows: Vec<usize>,
    /// Cell edges: `cols.len() + 1` in x, `rows.len() + 1` in log10 τ.
    x_edges: Vec<f64>,
    y_edges: Vec<f64>,
    /// Top of the colour scale (largest finite γ; 1 when none is positive).
    gamma_max: f64,
    levels: u16,
    x: Axis,
    y: Axis,
}

/// Edges of cells centred on the strictly ascending `centres`: halfway
/// between neighbours, the outer ones mirrored; a single centre gets a
/// cell of width `lone`.
fn cell_edges(centres: &[f64], lone: f64) -> Vec<f64> {
    match centres {
        [] => Vec::new(),
        [c] => vec![c - 0.5 * lone, c + 0.5 * lone],
        _ => {
            let n = centres.len();
            let mut e = Vec::with_capacity(n + 1);
            e.push(centres[0] - 0.5 * (centres[1] - centres[0]));
            e.extend(centres.windows(2).map(|w| 0.5 * (w[0] + w[1])));
            e.push(centres[n - 1] + 0.5 * (centres[n - 1] - centres[n - 2]));
            e
        }
    }
}

fn strictly_ascending(name: &str, v: &[f64]) -> DrawResult<()> {
    match v.windows(2).position(|w| w[1] <= w[0]) {
        Some(i) => Err(format!(
            "{name} must be strictly ascending (entry {} is not above the one before)",
            i + 1
        )),
        None => Ok(()),
    }
}

impl<'a> HeatmapPlot<'a> {
    fn new(fig: &'a HeatmapFigure<'a>, levels: u16) -> DrawResult<Self> {
        common::require("x", fig.x)?;
        common::require("tau_s", fig.tau_s)?;
        if fig.gamma.len() != fig.x.len() {
            return Err(format!(
                "gamma has {} columns but x has {}",
                fig.gamma.len(),
                fig.x.len()
            ));
        }
        for (c, column) in fig.gamma.iter().enumerate() {
            common::same_len(&format!("gamma[{c}]"), column, "tau_s", fig.tau_s)?;
        }
        for t in fig.tracks {
            check_track(t.id, "x", t.x, &[("tau_s", t.tau_s)])?;
        }
        let cols: Vec<usize> = (0..fig.x.len()).filter(|&c| fig.x[c].is_finite()).collect();
        let rows: Vec<usize> = (0..fig.tau_s.len())
            .filter(|&k| Scale::Log.to_plot(fig.tau_s[k]).is_some())
            .collect();
        if cols.is_empty() {
            return Err("no finite x values to plot".into());
        }
        if rows.is_empty() {
            return Err("no positive finite tau_s values to plot on a log axis".into());
        }
        let xc: Vec<f64> = cols.iter().map(|&c| fig.x[c]).collect();
        let yc: Vec<f64> = rows.iter().map(|&k| fig.tau_s[k].log10()).collect();
        strictly_ascending("x", &xc)?;
        strictly_ascending("tau_s", &yc)?;
        let mut max = f64::NEG_INFINITY;
        for &c in &cols {
            for &k in &rows {
                let g = fig.gamma[c][k];
                if g.is_finite() {
                    max = max.max(g);
                }
            }
        }
        if !max.is_finite() {
            return Err("no finite gamma values to plot".into());
        }
        let gamma_max = if max > 0.0 { max } else { 1.0 };
        let (x_edges, y_edges) = (cell_edges(&xc, 1.0), cell_edges(&yc, 1.0));
        let axis = |scale, e: &[f64]| Axis {
            scale,
            lo: e[0],
            hi: e[e.len() - 1],
        };
        let (x, y) = (axis(Scale::Linear, &x_edges), axis(Scale::Log, &y_edges));
        if !(x.hi - x.lo).is_finite() {
            return Err("x values are too large to plot".into());
        }
        Ok(Self {
            fig,
            cols,
            rows,
            x_edges,
            y_edges,
            gamma_max,
            levels,
            x,
            y,
        })
    }

    /// Colour level of drawn cell (`c`, `k`) (indices into `cols`, `rows`).
    fn cell_level(&self, c: usize, k: usize) -> Option<u16> {
        let g = self.fig.gamma[self.cols[c]][self.rows[k]];
        level(g, self.gamma_max, self.levels)
    }

    /// Paints the cells onto the plotting area of `chart`.
    fn draw_cells<'c, DB: DrawingBackend + 'c>(&self, chart: &Chart<'c, DB>) -> DrawResult<()> {
        let plot = chart.plotting_area();
        let area = plot.strip_coord_spec();
        let (bx, by) = area.get_base_pixel();
        let px: Vec<i32> = self
            .x_edges
            .iter()
            .map(|&e| plot.map_coordinate(&(e, self.y.lo)).0 - bx)
            .collect();
        let py: Vec<i32> = self
            .y_edges
            .iter()
            .map(|&e| plot.map_coordinate(&(self.x.lo, e)).1 - by)
            .collect();
        let (Some(&left), Some(&right), Some(&bottom), Some(&top)) =
            (px.first(), px.last(), py.first(), py.last())
        else {
            return Ok(());
        };
        // The bottom colour under the whole map; cells of level 0 are then
        // already drawn.
        let base = level_color(Some(0), self.levels);
        area.draw(&Rectangle::new(
            [(left, top), (right, bottom)],
            base.filled(),
        ))
        .map_err(common::de)?;
        for b in merge_cells(&px, &py, |c, k| self.cell_level(c, k)) {
            if b.level != Some(0) {
                let color = level_color(b.level, self.levels);
                area.draw(&Rectangle::new(
                    [(b.x0, b.y0), (b.x1, b.y1)],
                    color.filled(),
                ))
                .map_err(common::de)?;
            }
        }
        Ok(())
    }

    /// Draws each track as a white line with a dark outline, markers and
    /// its id at its last point.
    fn draw_tracks<'c, DB: DrawingBackend + 'c>(
        &self,
        area: &DrawingArea<DB, Shift>,
        chart: &mut Chart<'c, DB>,
    ) -> DrawResult<()> {
        let (x, y) = (&self.x, &self.y);
        for t in self.fig.tracks {
            for run in runs(t.x, t.tau_s, x, y) {
                if run.len() >= 2 {
                    let outline = LineSeries::new(run.iter().copied(), INK.stroke_width(4));
                    chart.draw_series(outline).map_err(common::de)?;
                    let line = LineSeries::new(run, WHITE.stroke_width(2));
                    chart.draw_series(line).map_err(common::de)?;
                }
            }
            let pts = draw::points(t.x, t.tau_s, x, y);
            if pts.len() <= MAX_MARKERS {
                let dots = pts.iter().map(|&p| Circle::new(p, 4, WHITE.filled()));
                chart.draw_series(dots).map_err(common::de)?;
                let rims = pts.iter().map(|&p| Circle::new(p, 4, INK.stroke_width(1)));
                chart.draw_series(rims).map_err(common::de)?;
            }
            if let Some(last) = pts.last() {
                let (px, py) = chart.plotting_area().map_coordinate(last);
                let (bx, by) = area.get_base_pixel();
                id_label(area, &t.id.to_string(), (px - bx, py - by))?;
            }
        }
        Ok(())
    }

    /// Draws the colour bar in `strip`, level with the plotting area of `chart`.
    fn draw_colour_bar<'c, DB: DrawingBackend + 'c>(
        &self,
        strip: &DrawingArea<DB, Shift>,
        chart: &Chart<'c, DB>,
    ) -> DrawResult<()> {
        let (_, yr) = chart.plotting_area().get_pixel_range();
        let (_, sy) = strip.get_base_pixel();
        let (top, bottom) = (yr.start - sy, yr.end - sy);
        let height = f64::from(bottom - top);
        let (x0, x1) = (BAR_GAP, BAR_GAP + BAR_WIDTH);
        let to_px = |t: f64| bottom - (t.clamp(0.0, 1.0) * height).round() as i32;
        // One band per level, spanning the values that round to it.
        let steps = f64::from(self.levels - 1);
        for l in 0..self.levels {
            let lo = to_px((f64::from(l) - 0.5) / steps);
            let hi = to_px((f64::from(l) + 0.5) / steps);
            if hi < lo {
                let color = level_color(Some(l), self.levels);
                strip
                    .draw(&Rectangle::new([(x0, hi), (x1, lo)], color.filled()))
                    .map_err(common::de)?;
            }
        }
        strip
            .draw(&Rectangle::new(
                [(x0, top), (x1, bottom)],
                INK.stroke_width(1),
            ))
            .map_err(common::de)?;
        let scale = Axis {
            scale: Scale::Linear,
            lo: 0.0,
            hi: self.gamma_max,
        };
        let ticks = scale.ticks(6);
        let style = common::font(TICK_FONT).pos(Pos::new(HPos::Left, VPos::Center));
        let mut widest = 0;
        for &v in &ticks.bold {
            let y = to_px(v / self.gamma_max);
            let tick = PathElement::new([(x1, y), (x1 + 5, y)], INK.stroke_width(1));
            strip.draw(&tick).map_err(common::de)?;
            let label = ticks.label(v);
            let (w, _) = strip
                .estimate_text_size(&label, &common::font(TICK_FONT))
                .map_err(common::de)?;
            widest = widest.max(w as i32);
            strip
                .draw(&Text::new(label, (x1 + 8, y), style.clone()))
                .map_err(common::de)?;
        }
        let desc = common::font(17.0)
            .transform(FontTransform::Rotate270)
            .pos(Pos::new(HPos::Center, VPos::Top));
        let at = (x1 + 8 + widest + 10, (top + bottom) / 2);
        strip
            .draw(&Text::new(self.fig.gamma_label, at, desc))
            .map_err(common::de)
    }
}

impl Paint for HeatmapPlot<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<()> {
        let area = common::titled(root, self.fig.title)?;
        let width = area.dim_in_pixel().0 as i32;
        let (main, strip) = area.split_horizontally(width - BAR_STRIP);
        let panel = Panel {
            x: self.x,
            y: self.y,
            x_desc: Some(self.fig.x_label),
            y_desc: "tau (s)",
            caption: None,
            x_ticks: 10,
            y_ticks: 8,
            common_step: None,
            key_room: false,
        };
        let mut chart = common::build_panel(&main, &panel)?;
        self.draw_cells(&chart)?;
        let (x, y) = (&self.x, &self.y);
        chart
            .plotting_area()
            .draw(&Rectangle::new(
                [(x.lo, y.lo), (x.hi, y.hi)],
                INK.stroke_width(1),
            ))
            .map_err(common::de)?;
        self.draw_tracks(&main, &mut chart)?;
        self.draw_colour_bar(&strip, &chart)
    }
}

/// Writes a track's id in a small white box right of pixel `(x, y)` of
/// `area` (left of it when the box would leave the area).
fn id_label<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    text: &str,
    (x, y): (i32, i32),
) -> DrawResult<()> {
    const PAD: i32 = 3;
    let style = common::font(14.0);
    let (w, h) = area.estimate_text_size(text, &style).map_err(common::de)?;
    let (w, h) = (w as i32, h as i32);
    let box_w = w + 2 * PAD;
    let left = if x + 8 + box_w < area.dim_in_pixel().0 as i32 {
        x + 8
    } else {
        x - 8 - box_w
    };
    let corners = [(left, y - h / 2 - PAD), (left + box_w, y + h / 2 + PAD)];
    area.draw(&Rectangle::new(corners, WHITE.filled()))
        .map_err(common::de)?;
    area.draw(&Rectangle::new(corners, INK.stroke_width(1)))
        .map_err(common::de)?;
    let anchored = style.pos(Pos::new(HPos::Left, VPos::Center));
    area.draw(&Text::new(text, (left + PAD, y), anchored))
        .map_err(common::de)
}

/// A filled rectangle of the heat map in pixels: columns `x0..x1` and rows
/// `y0..y1` (ends excluded), in colour level `level` (`None`: no value).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct Block {
    x0: i32,
    x1: i32,
    y0: i32,
    y1: i32,
    level: Option<u16>,
}

/// Merges the cells of a heat map into as few rectangles as a simple sweep
/// finds. Column `c` spans pixels `px[c]..px[c + 1]` (ascending), row `k`
/// spans `py[k + 1]..py[k]` (descending: row 0 at the bottom); `level(c, k)`
/// is the cell's colour level. Cells that cover no pixel are left out,
/// touching cells of one level in a column become one run, and a run that
/// the next column repeats exactly is widened instead of repeated.
fn merge_cells(px: &[i32], py: &[i32], level: impl Fn(usize, usize) -> Option<u16>) -> Vec<Block> {
    let mut out = Vec::new();
    // Runs of the previous drawn column, bottom first.
    let mut open: Vec<Block> = Vec::new();
    for c in 0..px.len().saturating_sub(1) {
        let (x0, x1) = (px[c], px[c + 1]);
        if x1 <= x0 {
            continue;
        }
        let mut column: Vec<Block> = Vec::new();
        for k in 0..py.len().saturating_sub(1) {
            let (y0, y1) = (py[k + 1], py[k]);
            if y1 <= y0 {
                continue;
            }
            let l = level(c, k);
            match column.last_mut() {
                Some(run) if run.level == l && run.y0 == y1 => run.y0 = y0,
                _ => column.push(Block {
                    x0,
                    x1,
                    y0,
                    y1,
                    level: l,
                }),
            }
        }
        // Both lists run bottom to top (y0 descending), so one pass pairs them.
        let mut j = 0;
        for run in &mut column {
            while j < open.len() && open[j].y0 > run.y0 {
                out.push(open[j]);
                j += 1;
            }
            let same =
                |p: &Block| (p.y0, p.y1, p.level, p.x1) == (run.y0, run.y1, run.level, run.x0);
            if open.get(j).is_some_and(same) {
                run.x0 = open[j].x0;
                j += 1;
            }
        }
        out.extend_from_slice(&open[j..]);
        open = column;
    }
    out.extend(open);
    out
}

// ---------------------------------------------------------------------------
// Trends

const TRENDS_SIZE: (u32, u32) = (900, 760);
const TRENDS_STEM: &str = "trends";

/// Renders two panels sharing x (linear axis labelled `x_label`): τ of each
/// track on a log axis above (label `tau (s)`), R on a linear axis from
/// zero below (label `R (ohm)`). Each track is a line with circles in its
/// own colour (the same id always gets the same colour), broken where a
/// value cannot be shown; the legend in the upper panel names them
/// `track N`.
///
/// Returns SVG text as bytes or an encoded PNG of 900 × 760 px. Fails with
/// [`Error::Plot`](crate::Error::Plot) (path `trends.svg` or `trends.png`)
/// when `tracks` is empty, when a track's `tau_s` or `r_ohm` has a length
/// other than its `x`'s, or when no track has a point with finite x.
pub fn render_trends(fig: &TrendFigure, format: ImageFormat) -> Result<Vec<u8>> {
    let plot = TrendPlot::new(fig).map_err(|m| common::plot_error(TRENDS_STEM, format, m))?;
    common::render(&plot, TRENDS_STEM, format, TRENDS_SIZE)
}

struct TrendPlot<'a> {
    fig: &'a TrendFigure<'a>,
    x: Axis,
    y_tau: Axis,
    y_r: Axis,
    /// Whether any τ, and any R, can be shown.
    any_tau: bool,
    any_r: bool,
}

impl<'a> TrendPlot<'a> {
    fn new(fig: &'a TrendFigure<'a>) -> DrawResult<Self> {
        if fig.tracks.is_empty() {
            return Err("nothing to plot (no tracks given)".into());
        }
        let mut xe = Extent::new(Scale::Linear);
        let (mut te, mut re) = (Extent::new(Scale::Log), Extent::new(Scale::Linear));
        for t in fig.tracks {
            check_track(t.id, "x", t.x, &[("tau_s", t.tau_s), ("r_ohm", t.r_ohm)])?;
            for ((&x, &tau), &r) in t.x.iter().zip(t.tau_s).zip(t.r_ohm) {
                if !x.is_finite() {
                    continue;
                }
                let (tau_ok, r_ok) = (Scale::Log.to_plot(tau).is_some(), r.is_finite());
                if tau_ok || r_ok {
                    xe.add(x);
                }
                te.add(tau);
                re.add(r);
            }
        }
        if xe.raw().is_none() {
            return Err("no point with finite x and a positive tau_s or finite r_ohm".into());
        }
        let (any_tau, any_r) = (te.raw().is_some(), re.raw().is_some());
        // A resistance is read against zero.
        re.add(0.0);
        Ok(Self {
            fig,
            x: xe.finish("x")?,
            y_tau: axis_or_placeholder(&te, Scale::Log, "tau_s")?,
            y_r: re.finish("r_ohm")?,
            any_tau,
            any_r,
        })
    }
}

impl Paint for TrendPlot<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<()> {
        let area = common::titled(root, self.fig.title)?;
        let (upper, lower) = two_panels(&area);
        let x = &self.x;
        let names: Vec<String> = self
            .fig
            .tracks
            .iter()
            .map(|t| format!("track {}", t.id))
            .collect();

        let panel = stacked_panel(self.x, self.y_tau, None, "tau (s)");
        let mut chart = common::build_panel(&upper, &panel)?;
        let mut keys: Vec<Key> = Vec::new();
        let mut avoid = Vec::new();
        for (t, name) in self.fig.tracks.iter().zip(&names) {
            let mark = Mark::LineMarker(track_color(t.id));
            draw::draw_series(&mut chart, t.x, t.tau_s, x, &self.y_tau, mark)?;
            keys.push((mark, name));
            avoid.push(draw::points(t.x, t.tau_s, x, &self.y_tau));
        }
        let avoid_refs: Vec<&[(f64, f64)]> = avoid.iter().map(Vec::as_slice).collect();
        draw::draw_legend(&chart, &keys, &avoid_refs)?;
        let plot = chart.plotting_area().strip_coord_spec();
        note_if_empty(&plot, !self.any_tau, "no positive finite tau to show")?;

        let panel = stacked_panel(self.x, self.y_r, Some(self.fig.x_label), "R (ohm)");
        let mut chart = common::build_panel(&lower, &panel)?;
        draw::draw_zero_line(&mut chart, x, &self.y_r)?;
        for t in self.fig.tracks {
            let mark = Mark::LineMarker(track_color(t.id));
            draw::draw_series(&mut chart, t.x, t.r_ohm, x, &self.y_r, mark)?;
        }
        let plot = chart.plotting_area().strip_coord_spec();
        note_if_empty(&plot, !self.any_r, "no finite R to show")
    }
}

// ---------------------------------------------------------------------------
// Arrhenius

const ARRHENIUS_SIZE: (u32, u32) = (900, 760);
const ARRHENIUS_STEM: &str = "arrhenius";
/// Horizontal axis label: 1000/T with T in K.
const INV_T_LABEL: &str = "1000/T (1/K)";

/// Renders two panels against 1000/T (linear axis, label `1000/T (1/K)`,
/// shared): ln(1/τ) with τ in s above (label `ln(1/tau / s⁻¹)`), ln(1/R)
/// with 1/R in S below (label `ln(1/R / S)`, the log of the conductance).
/// Each track's points are circles in its own colour (the same id always
/// gets the same colour); a fit, when given, is drawn as the straight line
/// ln(1/q) = a − Ea/(k_B T) across the track's temperatures and its Ea
/// appears in the legend (`track 1: Ea = 0.61 eV`). Points with
/// non-positive or non-finite τ, R or 1/T are skipped.
///
/// Returns SVG text as bytes or an encoded PNG of 900 × 760 px. Fails with
/// [`Error::Plot`](crate::Error::Plot) (path `arrhenius.svg` or
/// `arrhenius.png`) when `tracks` is empty, when a track's `tau_s` or
/// `r_ohm` has a length other than its `inv_t_per_k`'s, or when no point
/// with a finite 1/T remains.
pub fn render_arrhenius(fig: &ArrheniusFigure, format: ImageFormat) -> Result<Vec<u8>> {
    let plot =
        ArrheniusPlot::new(fig).map_err(|m| common::plot_error(ARRHENIUS_STEM, format, m))?;
    common::render(&plot, ARRHENIUS_STEM, format, ARRHENIUS_SIZE)
}

/// End points, at `x_lo` and `x_hi` (x = 1000/T in 1/K), of the fitted
/// Arrhenius line ln(1/q) = a − Ea/(k_B T) for `(ea_ev, a)`; `None` when Ea
/// or a is not finite.
fn fit_line((ea_ev, a): (f64, f64), (x_lo, x_hi): (f64, f64)) -> Option<[(f64, f64); 2]> {
    if !(ea_ev.is_finite() && a.is_finite()) {
        return None;
    }
    // 1/T = x / 1000.
    let y = |x: f64| a - ea_ev / K_B_EV_PER_K * (x / 1000.0);
    Some([(x_lo, y(x_lo)), (x_hi, y(x_hi))])
}

/// ln(1/v), NaN where v is not positive and finite.
fn ln_inverse(v: &[f64]) -> Vec<f64> {
    v.iter()
        .map(|&q| {
            if q.is_finite() && q > 0.0 {
                -q.ln()
            } else {
                f64::NAN
            }
        })
        .collect()
}

/// A fitted line's end points (1000/T, ln) and its activation energy in eV.
type FitLine = ([(f64, f64); 2], f64);

/// One track in plot units.
struct ArrheniusSeries {
    id: u32,
    /// 1000/T in 1/K.
    x: Vec<f64>,
    /// ln(1/τ) with τ in s, and its fitted line and Ea (eV).
    ln_rate: Vec<f64>,
    rate_fit: Option<FitLine>,
    /// ln(1/R) with R in ohm, and its fitted line and Ea (eV).
    ln_conductance: Vec<f64>,
    conductance_fit: Option<FitLine>,
}

/// Range of the `xs` whose `ys` is finite.
fn x_range(xs: &[f64], ys: &[f64]) -> Option<(f64, f64)> {
    let mut e = Extent::new(Scale::Linear);
    for (&x, &y) in xs.iter().zip(ys) {
        if x.is_finite() && y.is_finite() {
            e.add(x);
        }
    }
    e.raw()
}

impl ArrheniusSeries {
    fn new(t: &ArrheniusTrack) -> Self {
        let x: Vec<f64> = t.inv_t_per_k.iter().map(|v| 1000.0 * v).collect();
        let (ln_rate, ln_conductance) = (ln_inverse(t.tau_s), ln_inverse(t.r_ohm));
        let line = |fit: Option<(f64, f64)>, ys: &[f64]| {
            let fit = fit?;
            Some((fit_line(fit, x_range(&x, ys)?)?, fit.0))
        };
        Self {
            id: t.id,
            rate_fit: line(t.tau_fit, &ln_rate),
            conductance_fit: line(t.r_fit, &ln_conductance),
            x,
            ln_rate,
            ln_conductance,
        }
    }
}

struct ArrheniusPlot<'a> {
    fig: &'a ArrheniusFigure<'a>,
    series: Vec<ArrheniusSeries>,
    x: Axis,
    y_rate: Axis,
    y_conductance: Axis,
}

impl<'a> ArrheniusPlot<'a> {
    fn new(fig: &'a ArrheniusFigure<'a>) -> DrawResult<Self> {
        if fig.tracks.is_empty() {
            return Err("nothing to plot (no tracks given)".into());
        }
        for t in fig.tracks {
            let others = [("tau_s", t.tau_s), ("r_ohm", t.r_ohm)];
            check_track(t.id, "inv_t_per_k", t.inv_t_per_k, &others)?;
        }
        let series: Vec<ArrheniusSeries> = fig.tracks.iter().map(ArrheniusSeries::new).collect();
        let mut xe = Extent::new(Scale::Linear);
        let (mut rate, mut cond) = (Extent::new(Scale::Linear), Extent::new(Scale::Linear));
        for s in &series {
            for ((&x, &r), &g) in s.x.iter().zip(&s.ln_rate).zip(&s.ln_conductance) {
                if x.is_finite() && (r.is_finite() || g.is_finite()) {
                    xe.add(x);
                    rate.add(r);
                    cond.add(g);
                }
            }
            if let Some((ends, _)) = s.rate_fit {
                rate.add_all(ends.map(|p| p.1));
            }
            if let Some((ends, _)) = s.conductance_fit {
                cond.add_all(ends.map(|p| p.1));
            }
        }
        if xe.raw().is_none() {
            return Err(
                "no point with finite inv_t_per_k and a positive finite tau_s or r_ohm".into(),
            );
        }
        Ok(Self {
            fig,
            x: xe.finish("1000/T")?,
            y_rate: axis_or_placeholder(&rate, Scale::Linear, "ln(1/tau)")?,
            y_conductance: axis_or_placeholder(&cond, Scale::Linear, "ln(1/R)")?,
            series,
        })
    }

    /// Draws one panel: each track's points (`ys` of it) and fitted line.
    fn panel<DB: DrawingBackend>(
        &self,
        area: &DrawingArea<DB, Shift>,
        (y, y_desc): (Axis, &str),
        bottom: bool,
        pick: impl Fn(&ArrheniusSeries) -> (&[f64], Option<FitLine>),
    ) -> DrawResult<()> {
        let x_desc = bottom.then_some(INV_T_LABEL);
        let mut chart = common::build_panel(area, &stacked_panel(self.x, y, x_desc, y_desc))?;
        let mut labels = Vec::new();
        let mut avoid = Vec::new();
        let mut any = false;
        for s in &self.series {
            let color = track_color(s.id);
            let (ys, fit) = pick(s);
            let pts = draw::points(&s.x, ys, &self.x, &y);
            any |= !pts.is_empty();
            let label = match fit {
                Some((ends, ea_ev)) => {
                    let (xs, fit_ys) = (ends.map(|p| p.0), ends.map(|p| p.1));
                    draw::draw_series(&mut chart, &xs, &fit_ys, &self.x, &y, Mark::Line(color))?;
                    avoid.push(ends.to_vec());
                    (
                        Mark::LineMarker(color),
                        format!("track {}: Ea = {ea_ev:.2} eV", s.id),
                    )
                }
                None => (Mark::Marker(color), format!("track {}", s.id)),
            };
            draw::draw_series(&mut chart, &s.x, ys, &self.x, &y, Mark::Marker(color))?;
            avoid.push(pts);
            labels.push(label);
        }
        let keys: Vec<Key> = labels.iter().map(|(m, l)| (*m, l.as_str())).collect();
        let avoid_refs: Vec<&[(f64, f64)]> = avoid.iter().map(Vec::as_slice).collect();
        draw::draw_legend(&chart, &keys, &avoid_refs)?;
        let plot = chart.plotting_area().strip_coord_spec();
        note_if_empty(&plot, !any, "no point to show")
    }
}

impl Paint for ArrheniusPlot<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<()> {
        let area = common::titled(root, self.fig.title)?;
        let (upper, lower) = two_panels(&area);
        self.panel(&upper, (self.y_rate, "ln(1/tau / s⁻¹)"), false, |s| {
            (s.ln_rate.as_slice(), s.rate_fit)
        })?;
        self.panel(&lower, (self.y_conductance, "ln(1/R / S)"), true, |s| {
            (s.ln_conductance.as_slice(), s.conductance_fit)
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::testutil::{check_png, check_svg, save};

    /// Log-normal bump of height `h` at log10 τ = `mu`, width `sigma` decades.
    fn bump(log_tau: f64, h: f64, mu: f64, sigma: f64) -> f64 {
        h * (-0.5 * ((log_tau - mu) / sigma).powi(2)).exp()
    }

    /// A synthetic ageing series: `n` spectra, `m` τ samples from 1 µs to
    /// 100 s; a fast process at τ = 1e-4 s growing from 8 to 14 ohm and a
    /// slow one moving from 0.1 s to 1 s while its height falls from 20 to
    /// 12 ohm. Returns x, τ, γ, and the two processes' τ per spectrum.
    struct Series {
        x: Vec<f64>,
        tau: Vec<f64>,
        gamma: Vec<Vec<f64>>,
        fast_tau: Vec<f64>,
        slow_tau: Vec<f64>,
    }

    fn series(n: usize, m: usize) -> Series {
        let tau: Vec<f64> = (0..m)
            .map(|k| 10f64.powf(-6.0 + 8.0 * k as f64 / (m - 1) as f64))
            .collect();
        let x: Vec<f64> = (0..n).map(|c| c as f64).collect();
        let (mut gamma, mut fast_tau, mut slow_tau) = (Vec::new(), Vec::new(), Vec::new());
        for c in 0..n {
            let s = c as f64 / (n - 1).max(1) as f64;
            let (fast_mu, slow_mu) = (-4.0, -1.0 + s);
            gamma.push(
                tau.iter()
                    .map(|t| {
                        let lt = t.log10();
                        bump(lt, 8.0 + 6.0 * s, fast_mu, 0.25)
                            + bump(lt, 20.0 - 8.0 * s, slow_mu, 0.35)
                    })
                    .collect(),
            );
            fast_tau.push(10f64.powf(fast_mu));
            slow_tau.push(10f64.powf(slow_mu));
        }
        Series {
            x,
            tau,
            gamma,
            fast_tau,
            slow_tau,
        }
    }

    fn heatmap<'a>(s: &'a Series, tracks: &'a [TrackLine<'a>]) -> HeatmapFigure<'a> {
        HeatmapFigure {
            x: &s.x,
            x_label: "cycle",
            tau_s: &s.tau,
            gamma: &s.gamma,
            gamma_label: "gamma (ohm)",
            tracks,
            title: "Ageing series",
        }
    }

    #[test]
    fn heatmap_renders_both_formats() {
        let s = series(60, 160);
        let mut fast = s.fast_tau.clone();
        fast[30] = f64::NAN; // a gap in the track
        fast[31] = -1.0;
        let tracks = [
            TrackLine {
                id: 1,
                x: &s.x,
                tau_s: &fast,
            },
            TrackLine {
                id: 2,
                x: &s.x,
                tau_s: &s.slow_tau,
            },
        ];
        let fig = heatmap(&s, &tracks);
        let png = render_heatmap(&fig, ImageFormat::Png).unwrap();
        check_png(&png, HEATMAP_SIZE);
        save("heatmap.png", &png);
        let svg = render_heatmap(&fig, ImageFormat::Svg).unwrap();
        save("heatmap.svg", &svg);
        check_svg(
            &svg,
            &["Ageing series", "cycle", "tau (s)", "gamma (ohm)", "10⁻⁴"],
        );
        let text = std::str::from_utf8(&svg).unwrap();
        // The track ids are written in their boxes.
        assert!(text.contains(">\n1\n</text>") && text.contains(">\n2\n</text>"));
        // Track 1 is broken at its gap: two runs, each a dark outline
        // under a white line, plus track 2's pair.
        let white_lines = text
            .matches(r##"stroke="#FFFFFF" stroke-width="2""##)
            .count();
        assert_eq!(white_lines, 3);
        // The top of the colour scale is the largest γ, just under 20 ohm
        // (the slow process at the first spectrum, between two τ samples).
        let plot = HeatmapPlot::new(&fig, SVG_LEVELS).unwrap();
        assert!(
            plot.gamma_max > 19.9 && plot.gamma_max <= 20.0,
            "{}",
            plot.gamma_max
        );
        assert!(text.contains(">\n15\n</text>"), "no colour bar tick at 15");
    }

    /// A filled rectangle of an SVG: fill colour and x, y, width, height in px.
    type SvgRect = (String, [i32; 4]);

    /// The filled rectangles of `svg` wider than `min_width` px.
    fn wide_rects(svg: &[u8], min_width: i32) -> Vec<SvgRect> {
        let text = std::str::from_utf8(svg).unwrap();
        text.split("<rect")
            .skip(1)
            .filter_map(|r| {
                let attr = |name: &str| {
                    let start = r.find(&format!(" {name}=\""))? + name.len() + 3;
                    let end = start + r[start..].find('"')?;
                    Some(r[start..end].to_string())
                };
                let num = |name: &str| attr(name)?.parse::<i32>().ok();
                let geometry = [num("x")?, num("y")?, num("width")?, num("height")?];
                let fill = attr("fill").filter(|f| f != "none")?;
                (geometry[2] > min_width).then_some((fill, geometry))
            })
            .collect()
    }

    /// Horizontal runs of at least `min_len` pixels of colour `rgb` in a
    /// decoded PNG, as (row, first column, length).
    fn png_runs(png: &[u8], rgb: (u8, u8, u8), min_len: usize) -> Vec<(usize, usize, usize)> {
        let decoder = png::Decoder::new(png);
        let mut reader = decoder.read_info().unwrap();
        let mut buf = vec![0; reader.output_buffer_size()];
        let info = reader.next_frame(&mut buf).unwrap();
        let want = [rgb.0, rgb.1, rgb.2];
        let mut out = Vec::new();
        for (y, row) in buf[..info.buffer_size()]
            .chunks_exact(3 * info.width as usize)
            .enumerate()
        {
            let mut n = 0;
            for (x, p) in row.chunks_exact(3).chain([&[0u8, 0, 1][..]]).enumerate() {
                if p == want {
                    n += 1;
                } else {
                    if n >= min_len {
                        out.push((y, x - n, n));
                    }
                    n = 0;
                }
            }
        }
        out
    }

    const TOP: (u8, u8, u8) = (0xfd, 0xe7, 0x25);
    const BOTTOM: (u8, u8, u8) = (0x44, 0x01, 0x54);

    #[test]
    fn largest_gamma_is_top_colour_and_zero_bottom() {
        // 2 × 2 cells: only the upper right (x = 1, τ = 1 s) is non-zero,
        // and the upper left is negative, clipped to the bottom colour.
        let gamma = vec![vec![0.0, -3.0], vec![0.0, 5.0]];
        let fig = HeatmapFigure {
            x: &[0.0, 1.0],
            x_label: "spectrum",
            tau_s: &[1e-3, 1.0],
            gamma: &gamma,
            gamma_label: "gamma (ohm)",
            tracks: &[],
            title: "two by two",
        };
        let svg = render_heatmap(&fig, ImageFormat::Svg).unwrap();
        save("heatmap_2x2.svg", &svg);
        // Wide filled rectangles (the colour bar is 22 px wide): the white
        // canvas, the bottom colour under the whole map, and the top colour
        // on exactly its upper right quarter.
        let rects = wide_rects(&svg, 100);
        let fills: Vec<&str> = rects.iter().map(|r| r.0.as_str()).collect();
        assert_eq!(fills, ["#FFFFFF", "#440154", "#FDE725"], "{rects:?}");
        let ([mx, my, mw, mh], [qx, qy, qw, qh]) = (rects[1].1, rects[2].1);
        assert!(mw > 600 && mh > 400, "map {:?}", rects[1].1);
        assert!((qx - (mx + mw / 2)).abs() <= 1 && qy == my, "{rects:?}");
        assert!(
            (qw - mw / 2).abs() <= 1 && (qh - mh / 2).abs() <= 1,
            "{rects:?}"
        );

        let png = render_heatmap(&fig, ImageFormat::Png).unwrap();
        save("heatmap_2x2.png", &png);
        // In the PNG: rows of the top colour across the right half of the
        // upper half of the map, rows of the bottom colour across the whole
        // width of its lower half.
        let (top, bottom) = (png_runs(&png, TOP, 100), png_runs(&png, BOTTOM, 100));
        let (first_row, last_row) = (bottom[0].0, bottom[bottom.len() - 1].0);
        let middle_row = (first_row + last_row) / 2;
        let full = bottom.iter().map(|r| r.2).max().unwrap();
        assert!(full > 600, "{full}");
        assert!(!top.is_empty());
        for &(y, x, len) in &top {
            assert!(
                y <= middle_row + 1,
                "top colour in row {y}, map rows {first_row}..{last_row}"
            );
            assert!(
                x > bottom[0].1 + full / 2 - 2 && len < full / 2 + 2,
                "{x} {len}"
            );
        }
        assert!(bottom.iter().any(|r| r.0 > middle_row + 10 && r.2 == full));
    }

    #[test]
    fn levels_clip_and_span_the_map() {
        assert_eq!(level(5.0, 5.0, 64), Some(63));
        assert_eq!(level(f64::INFINITY, 5.0, 64), Some(63));
        assert_eq!(level(0.0, 5.0, 64), Some(0));
        assert_eq!(level(-2.0, 5.0, 64), Some(0));
        assert_eq!(level(2.5, 5.0, 64), Some(32)); // 31.5 rounds up
        assert_eq!(level(f64::NAN, 5.0, 64), None);
        assert_eq!(level(0.0, 0.0, 256), Some(0));
        assert_eq!(level_color(Some(63), 64), RGBColor(0xfd, 0xe7, 0x25));
        assert_eq!(level_color(Some(0), 64), RGBColor(0x44, 0x01, 0x54));
        // Halfway is halfway between stops 4 and 5 (#26828E, #1F9E89).
        assert_eq!(colormap(0.5), RGBColor(35, 144, 140));
        // The map grows lighter throughout (a sequential map).
        let luma =
            |c: RGBColor| 0.299 * f64::from(c.0) + 0.587 * f64::from(c.1) + 0.114 * f64::from(c.2);
        let l: Vec<f64> = (0..=20).map(|i| luma(colormap(i as f64 / 20.0))).collect();
        assert!(l.windows(2).all(|w| w[1] > w[0]), "{l:?}");
    }

    #[test]
    fn cells_merge_down_and_across() {
        // Three columns of 10 px, the middle one empty (no pixel); four
        // rows, bottom row 0 at pixel rows 30..40.
        let px = [0, 10, 10, 20];
        let py = [40, 30, 20, 20, 0];
        // Columns 0 and 2 are equal: rows 0 and 1 at level 1, the empty
        // row 2 at level 9 (never shown), row 3 at level 2.
        let levels = |c: usize, k: usize| -> Option<u16> {
            match (c, k) {
                (1, _) => Some(7),
                (_, 0 | 1) => Some(1),
                (_, 2) => Some(9),
                _ => Some(2),
            }
        };
        let blocks = merge_cells(&px, &py, levels);
        let b = |x0, x1, y0, y1, l| Block {
            x0,
            x1,
            y0,
            y1,
            level: Some(l),
        };
        let mut blocks = blocks;
        blocks.sort_by_key(|b| (b.y0, b.x0));
        assert_eq!(blocks, vec![b(0, 20, 0, 20, 2), b(0, 20, 20, 40, 1)]);

        // Columns that differ stay apart; a NaN cell is its own block.
        let blocks = merge_cells(&[0, 5, 9], &[10, 0], |c, _| (c == 0).then_some(3));
        assert_eq!(
            blocks,
            vec![
                b(0, 5, 0, 10, 3),
                Block {
                    x0: 5,
                    x1: 9,
                    y0: 0,
                    y1: 10,
                    level: None
                }
            ]
        );
    }

    #[test]
    fn cell_edges_are_halfway_and_mirrored() {
        assert_eq!(cell_edges(&[1.0, 2.0, 4.0], 1.0), vec![0.5, 1.5, 3.0, 5.0]);
        assert_eq!(cell_edges(&[3.0, 5.0], 1.0), vec![2.0, 4.0, 6.0]);
        assert_eq!(cell_edges(&[7.0], 1.0), vec![6.5, 7.5]);
    }

    #[test]
    fn large_heatmap_is_small_and_quick() {
        let s = series(1000, 500);
        let tracks = [TrackLine {
            id: 2,
            x: &s.x,
            tau_s: &s.slow_tau,
        }];
        let fig = heatmap(&s, &tracks);
        let start = std::time::Instant::now();
        let svg = render_heatmap(&fig, ImageFormat::Svg).unwrap();
        let svg_time = start.elapsed();
        let start = std::time::Instant::now();
        let png = render_heatmap(&fig, ImageFormat::Png).unwrap();
        let png_time = start.elapsed();
        save("heatmap_large.png", &png);
        check_png(&png, HEATMAP_SIZE);
        check_svg(&svg, &["cycle"]);
        save("heatmap_large.svg", &svg);
        assert!(svg.len() < 3_000_000, "SVG of {} bytes", svg.len());
        // Generous bounds for a loaded machine; a release build takes
        // a small fraction of this.
        assert!(svg_time.as_secs_f64() < 5.0, "SVG took {svg_time:?}");
        assert!(png_time.as_secs_f64() < 5.0, "PNG took {png_time:?}");
    }

    #[test]
    fn heatmap_checks_its_input() {
        let s = series(4, 3);
        let err = |fig: &HeatmapFigure, f| render_heatmap(fig, f).unwrap_err().to_string();
        let short = HeatmapFigure {
            gamma: &s.gamma[..3],
            ..heatmap(&s, &[])
        };
        assert_eq!(
            err(&short, ImageFormat::Svg),
            "plot heatmap.svg: gamma has 3 columns but x has 4"
        );
        let mut ragged = s.gamma.clone();
        ragged[1].pop();
        let fig = HeatmapFigure {
            gamma: &ragged,
            ..heatmap(&s, &[])
        };
        assert_eq!(
            err(&fig, ImageFormat::Png),
            "plot heatmap.png: gamma[1] has 2 values but tau_s has 3"
        );
        let tracks = [TrackLine {
            id: 7,
            x: &s.x,
            tau_s: &s.slow_tau[..2],
        }];
        assert_eq!(
            err(&heatmap(&s, &tracks), ImageFormat::Svg),
            "plot heatmap.svg: track 7: tau_s has 2 values but x has 4"
        );
        let x = [0.0, 2.0, 1.0, 3.0];
        let unsorted = HeatmapFigure {
            x: &x,
            ..heatmap(&s, &[])
        };
        assert_eq!(
            err(&unsorted, ImageFormat::Svg),
            "plot heatmap.svg: x must be strictly ascending (entry 2 is not above the one before)"
        );
        let empty = HeatmapFigure {
            x: &[],
            gamma: &[],
            ..heatmap(&s, &[])
        };
        assert_eq!(
            err(&empty, ImageFormat::Png),
            "plot heatmap.png: nothing to plot (x is empty)"
        );
        let nan = vec![vec![f64::NAN; 3]; 4];
        let all_nan = HeatmapFigure {
            gamma: &nan,
            ..heatmap(&s, &[])
        };
        assert_eq!(
            err(&all_nan, ImageFormat::Svg),
            "plot heatmap.svg: no finite gamma values to plot"
        );
        // Unusable x and τ entries are left out, NaN γ drawn grey; one
        // column and one row still make a map.
        let x = [f64::NAN, 1.0, 2.0, 3.0];
        let tau = [1e-3, -1.0, f64::NAN];
        let mut gamma = s.gamma.clone();
        gamma[2][0] = f64::NAN;
        let gappy = HeatmapFigure {
            x: &x,
            tau_s: &tau,
            gamma: &gamma,
            ..heatmap(&s, &[])
        };
        let png = render_heatmap(&gappy, ImageFormat::Png).unwrap();
        check_png(&png, HEATMAP_SIZE);
        assert!(!png_runs(&png, (190, 190, 190), 50).is_empty());
        let plot = HeatmapPlot::new(&gappy, SVG_LEVELS).unwrap();
        assert_eq!(
            (plot.cols.clone(), plot.rows.clone()),
            (vec![1, 2, 3], vec![0])
        );
        assert!((plot.y.lo - (-3.5)).abs() < 1e-12 && (plot.y.hi - (-2.5)).abs() < 1e-12);
    }

    fn trend_tracks(s: &Series) -> (Vec<f64>, Vec<f64>) {
        let r_fast: Vec<f64> = s.x.iter().map(|c| 8.0 + 0.1 * c).collect();
        let r_slow: Vec<f64> = s.x.iter().map(|c| 20.0 - 0.1 * c).collect();
        (r_fast, r_slow)
    }

    #[test]
    fn trends_render_both_formats() {
        let s = series(30, 10);
        let (r_fast, r_slow) = trend_tracks(&s);
        let mut slow_tau = s.slow_tau.clone();
        slow_tau[10] = f64::NAN;
        let tracks = [
            TrackSeries {
                id: 1,
                x: &s.x,
                tau_s: &s.fast_tau,
                r_ohm: &r_fast,
            },
            TrackSeries {
                id: 2,
                x: &s.x,
                tau_s: &slow_tau,
                r_ohm: &r_slow,
            },
        ];
        let fig = TrendFigure {
            x_label: "cycle",
            tracks: &tracks,
            title: "Processes over cycling",
        };
        let png = render_trends(&fig, ImageFormat::Png).unwrap();
        check_png(&png, TRENDS_SIZE);
        save("trends.png", &png);
        let svg = render_trends(&fig, ImageFormat::Svg).unwrap();
        save("trends.svg", &svg);
        check_svg(
            &svg,
            &[
                "Processes over cycling",
                "cycle",
                "tau (s)",
                "R (ohm)",
                "track 1",
                "track 2",
            ],
        );
        // The two tracks have their own colours.
        let text = std::str::from_utf8(&svg).unwrap();
        for c in [track_color(1), track_color(2)] {
            let hex = format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2);
            assert!(text.contains(&hex), "no {hex}");
        }
        assert_ne!(track_color(1), track_color(2));
        // R is read from zero; τ spans 1e-4 to 1 s.
        let plot = TrendPlot::new(&fig).unwrap();
        assert!(plot.y_r.lo < 0.0 && plot.y_r.lo > -2.0, "{}", plot.y_r.lo);
        assert!(plot.y_tau.contains(-4.0) && plot.y_tau.contains(0.0));
        assert!(plot.y_tau.lo > -4.5 && plot.y_tau.hi < 0.5);
    }

    #[test]
    fn trends_check_their_input() {
        let err = |fig: &TrendFigure, f| render_trends(fig, f).unwrap_err().to_string();
        let none = TrendFigure {
            x_label: "cycle",
            tracks: &[],
            title: "",
        };
        assert_eq!(
            err(&none, ImageFormat::Svg),
            "plot trends.svg: nothing to plot (no tracks given)"
        );
        let tracks = [TrackSeries {
            id: 4,
            x: &[1.0, 2.0],
            tau_s: &[1e-3, 2e-3],
            r_ohm: &[1.0],
        }];
        let short = TrendFigure {
            tracks: &tracks,
            ..none
        };
        assert_eq!(
            err(&short, ImageFormat::Png),
            "plot trends.png: track 4: r_ohm has 1 values but x has 2"
        );
        let tracks = [TrackSeries {
            id: 4,
            x: &[f64::NAN, 2.0],
            tau_s: &[1e-3, f64::NAN],
            r_ohm: &[1.0, f64::NAN],
        }];
        let nothing = TrendFigure {
            tracks: &tracks,
            ..none
        };
        assert!(err(&nothing, ImageFormat::Svg).starts_with("plot trends.svg: no point"));
        // R only, no τ: renders with a note in the τ panel.
        let tracks = [TrackSeries {
            id: 4,
            x: &[1.0, 2.0],
            tau_s: &[0.0, f64::NAN],
            r_ohm: &[1.0, 1.5],
        }];
        let r_only = TrendFigure {
            tracks: &tracks,
            ..none
        };
        let svg = render_trends(&r_only, ImageFormat::Svg).unwrap();
        check_svg(&svg, &["no positive finite tau to show"]);
        check_png(
            &render_trends(&r_only, ImageFormat::Png).unwrap(),
            TRENDS_SIZE,
        );
    }

    #[test]
    fn arrhenius_line_slope_follows_ea() {
        // Ea = 0.61 eV: between 300 K and 350 K, ln(1/τ) rises by
        // Ea/k_B · (1/300 - 1/350) = 0.61/8.617333262e-5 · 4.7619e-4 = 3.3709.
        let ea = 0.61;
        let (x0, x1) = (1000.0 / 350.0, 1000.0 / 300.0);
        let [(a0, y0), (a1, y1)] = fit_line((ea, 30.0), (x0, x1)).unwrap();
        assert_eq!((a0, a1), (x0, x1));
        let want = ea / 8.617333262e-5 * (1.0 / 300.0 - 1.0 / 350.0);
        assert!((want - 3.370_9).abs() < 1e-3, "{want}");
        assert!((y0 - y1 - want).abs() < 1e-9, "{} vs {want}", y0 - y1);
        // At 1/T = 0 the line passes through the intercept.
        let [(_, y), _] = fit_line((ea, 30.0), (0.0, 1.0)).unwrap();
        assert!((y - 30.0).abs() < 1e-12);
        assert!(fit_line((f64::NAN, 1.0), (0.0, 1.0)).is_none());
    }

    /// Four temperatures, 0 to 60 degC, a process with Ea = 0.6 eV in τ
    /// and 0.45 eV in R, and one with two points and no fit.
    struct ArrheniusData {
        inv_t: Vec<f64>,
        tau: Vec<f64>,
        r: Vec<f64>,
        tau_fit: (f64, f64),
        r_fit: (f64, f64),
    }

    fn arrhenius_data() -> ArrheniusData {
        let temps_k = [273.15, 293.15, 313.15, 333.15];
        let inv_t: Vec<f64> = temps_k.iter().map(|t| 1.0 / t).collect();
        let (ea_tau, a_tau) = (0.6, 28.0);
        let (ea_r, a_r) = (0.45, 16.0);
        let tau = inv_t
            .iter()
            .map(|it| (-(a_tau - ea_tau / K_B_EV_PER_K * it)).exp())
            .collect();
        let r = inv_t
            .iter()
            .map(|it| (-(a_r - ea_r / K_B_EV_PER_K * it)).exp())
            .collect();
        ArrheniusData {
            inv_t,
            tau,
            r,
            tau_fit: (ea_tau, a_tau),
            r_fit: (ea_r, a_r),
        }
    }

    #[test]
    fn arrhenius_renders_both_formats() {
        let ArrheniusData {
            inv_t,
            tau,
            r,
            tau_fit,
            r_fit,
        } = arrhenius_data();
        let tracks = [
            ArrheniusTrack {
                id: 1,
                inv_t_per_k: &inv_t,
                tau_s: &tau,
                r_ohm: &r,
                tau_fit: Some(tau_fit),
                r_fit: Some(r_fit),
            },
            ArrheniusTrack {
                id: 2,
                inv_t_per_k: &inv_t[..2],
                tau_s: &[1e-5, 3e-5],
                r_ohm: &[2.0, f64::NAN],
                tau_fit: None,
                r_fit: None,
            },
        ];
        let fig = ArrheniusFigure {
            tracks: &tracks,
            title: "Temperature series",
        };
        let png = render_arrhenius(&fig, ImageFormat::Png).unwrap();
        check_png(&png, ARRHENIUS_SIZE);
        save("arrhenius.png", &png);
        let svg = render_arrhenius(&fig, ImageFormat::Svg).unwrap();
        save("arrhenius.svg", &svg);
        check_svg(
            &svg,
            &[
                "Temperature series",
                "1000/T (1/K)",
                "ln(1/tau / s⁻¹)",
                "ln(1/R / S)",
                "track 1: Ea = 0.60 eV",
                "track 1: Ea = 0.45 eV",
                "track 2",
            ],
        );
        // The fitted line runs through the exact points it was made from.
        let plot = ArrheniusPlot::new(&fig).unwrap();
        let (ends, ea) = plot.series[0].rate_fit.unwrap();
        assert!((ea - 0.6).abs() < 1e-12);
        let s = &plot.series[0];
        assert!((ends[0].0 - 1000.0 / 333.15).abs() < 1e-9);
        assert!((ends[1].0 - 1000.0 / 273.15).abs() < 1e-9);
        assert!((ends[0].1 - s.ln_rate[3]).abs() < 1e-9);
        assert!((ends[1].1 - s.ln_rate[0]).abs() < 1e-9);
        assert!(plot.series[1].rate_fit.is_none());

        // Each line spans the temperatures of its own quantity: without R
        // at 0 degC the conductance line starts at 20 degC, the rate line
        // still at 0 degC.
        let mut r_gap = r.clone();
        r_gap[0] = f64::NAN;
        let gap = [ArrheniusTrack {
            r_ohm: &r_gap,
            ..tracks[0]
        }];
        let gap_fig = ArrheniusFigure {
            tracks: &gap,
            ..fig
        };
        let plot = ArrheniusPlot::new(&gap_fig).unwrap();
        let s = &plot.series[0];
        let (rate_ends, _) = s.rate_fit.unwrap();
        let (cond_ends, _) = s.conductance_fit.unwrap();
        assert!((rate_ends[1].0 - 1000.0 / 273.15).abs() < 1e-9);
        assert!((cond_ends[1].0 - 1000.0 / 293.15).abs() < 1e-9);
        assert!((cond_ends[1].1 - s.ln_conductance[1]).abs() < 1e-9);
    }

    #[test]
    fn arrhenius_checks_its_input() {
        let err = |fig: &ArrheniusFigure, f| render_arrhenius(fig, f).unwrap_err().to_string();
        let none = ArrheniusFigure {
            tracks: &[],
            title: "",
        };
        assert_eq!(
            err(&none, ImageFormat::Png),
            "plot arrhenius.png: nothing to plot (no tracks given)"
        );
        let tracks = [ArrheniusTrack {
            id: 3,
            inv_t_per_k: &[3e-3, 3.2e-3],
            tau_s: &[1e-3],
            r_ohm: &[1.0, 2.0],
            tau_fit: None,
            r_fit: None,
        }];
        let short = ArrheniusFigure {
            tracks: &tracks,
            ..none
        };
        assert_eq!(
            err(&short, ImageFormat::Svg),
            "plot arrhenius.svg: track 3: tau_s has 1 values but inv_t_per_k has 2"
        );
        let tracks = [ArrheniusTrack {
            id: 3,
            inv_t_per_k: &[3e-3, 3.2e-3],
            tau_s: &[-1.0, 0.0],
            r_ohm: &[f64::NAN, f64::INFINITY],
            tau_fit: None,
            r_fit: None,
        }];
        let nothing = ArrheniusFigure {
            tracks: &tracks,
            ..none
        };
        assert!(err(&nothing, ImageFormat::Svg).starts_with("plot arrhenius.svg: no point"));
    }
}
