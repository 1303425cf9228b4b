//! Series, reference lines, legends and notes drawn on panels.
//!
//! Legends are drawn here rather than by plotters so that one look serves
//! both a box inside a panel and a row of keys outside it, and so that the
//! box can be placed where it hides the fewest data points.

use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::axis::Axis;
use super::common::{Chart, DrawResult, GRID, de, font};

/// How a series is drawn; its legend key is drawn the same way.
#[derive(Clone, Copy, Debug)]
pub(crate) enum Mark {
    /// Solid line, 2 px.
    Line(RGBColor),
    /// Dashed line, 2 px.
    Dashed(RGBColor),
    /// Dashed line, 1 px, for reference levels.
    ThinDashed(RGBColor),
    /// Hollow circles.
    Marker(RGBColor),
    /// Hollow circles joined by a 1 px line.
    LineMarker(RGBColor),
    /// A translucent shaded area, drawn with [`draw_hband`]; its key is a
    /// shaded box. Not a way to draw a series.
    Band(RGBColor),
}

/// A legend entry.
pub(crate) type Key<'s> = (Mark, &'s str);

const MARKER_RADIUS: i32 = 4;
const DASH: (u32, u32) = (7, 5);
/// Opacity of a [`Mark::Band`] fill.
const BAND_ALPHA: f64 = 0.16;
const KEY_FONT: f64 = 15.0;
/// Width of a key's sample, gap before its text, and gap between keys.
const SAMPLE: i32 = 24;
const GAP: i32 = 6;
const SEP: i32 = 20;

/// Plottable points of `(xs[i], ys[i])`, in plot coordinates.
pub(crate) fn points(xs: &[f64], ys: &[f64], x: &Axis, y: &Axis) -> Vec<(f64, f64)> {
    xs.iter()
        .zip(ys)
        .filter_map(|(&a, &b)| Some((x.scale.to_plot(a)?, y.scale.to_plot(b)?)))
        .collect()
}

/// Runs of consecutive plottable points; an unplottable entry breaks the line.
fn segments(xs: &[f64], ys: &[f64], x: &Axis, y: &Axis) -> Vec<Vec<(f64, f64)>> {
    let mut runs = vec![Vec::new()];
    for (&a, &b) in xs.iter().zip(ys) {
        match (x.scale.to_plot(a), y.scale.to_plot(b)) {
            (Some(p), Some(q)) => runs.last_mut().expect("runs starts non-empty").push((p, q)),
            _ if runs.last().is_some_and(|r| !r.is_empty()) => runs.push(Vec::new()),
            _ => {}
        }
    }
    runs.retain(|r| !r.is_empty());
    runs
}

/// Draws the series `(xs[i], ys[i])` with `mark`, skipping unplottable
/// entries. A line is broken at them, and a lone point becomes a dot.
pub(crate) fn draw_series<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    xs: &[f64],
    ys: &[f64],
    x: &Axis,
    y: &Axis,
    mark: Mark,
) -> DrawResult<()> {
    let (color, width) = match mark {
        Mark::Marker(c) => return draw_circles(chart, &points(xs, ys, x, y), c),
        Mark::Line(c) | Mark::Dashed(c) => (c, 2),
        Mark::LineMarker(c) | Mark::ThinDashed(c) => (c, 1),
        Mark::Band(_) => return Err("a band cannot be drawn as a series".into()),
    };
    let style = color.stroke_width(width);
    for run in segments(xs, ys, x, y) {
        // A run whose points all coincide would be an invisible line.
        let same =
            |p: &(f64, f64)| p.0.total_cmp(&run[0].0).is_eq() && p.1.total_cmp(&run[0].1).is_eq();
        if run.iter().all(same) {
            chart
                .draw_series(std::iter::once(Circle::new(run[0], 3, color.filled())))
                .map_err(de)?;
        } else if matches!(mark, Mark::Dashed(_) | Mark::ThinDashed(_)) {
            chart
                .draw_series(DashedLineSeries::new(run, DASH.0, DASH.1, style))
                .map_err(de)?;
        } else {
            chart.draw_series(LineSeries::new(run, style)).map_err(de)?;
        }
    }
    if matches!(mark, Mark::LineMarker(_)) {
        draw_circles(chart, &points(xs, ys, x, y), color)?;
    }
    Ok(())
}

fn draw_circles<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    pts: &[(f64, f64)],
    color: RGBColor,
) -> DrawResult<()> {
    let style = color.stroke_width(2);
    chart
        .draw_series(pts.iter().map(|&p| Circle::new(p, MARKER_RADIUS, style)))
        .map_err(de)?;
    Ok(())
}

/// Draws a vertical line across the panel at plot coordinate `p`.
pub(crate) fn draw_vline<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    p: f64,
    y: &Axis,
    mark: Mark,
) -> DrawResult<()> {
    draw_rule(chart, [(p, y.lo), (p, y.hi)], mark)
}

/// Draws a horizontal line across the panel at plot coordinate `p`.
pub(crate) fn draw_hline<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    x: &Axis,
    p: f64,
    mark: Mark,
) -> DrawResult<()> {
    draw_rule(chart, [(x.lo, p), (x.hi, p)], mark)
}

/// Draws a straight line between two points in plot coordinates.
fn draw_rule<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    ends: [(f64, f64); 2],
    mark: Mark,
) -> DrawResult<()> {
    let (color, width, dashed) = match mark {
        Mark::Dashed(c) => (c, 2, true),
        Mark::ThinDashed(c) => (c, 1, true),
        Mark::Line(c) | Mark::Marker(c) | Mark::LineMarker(c) => (c, 2, false),
        Mark::Band(_) => return Err("a band cannot be drawn as a line".into()),
    };
    let style = color.stroke_width(width);
    if dashed {
        chart
            .draw_series(DashedLineSeries::new(ends, DASH.0, DASH.1, style))
            .map_err(de)?;
    } else {
        chart
            .draw_series(LineSeries::new(ends, style))
            .map_err(de)?;
    }
    Ok(())
}

/// Shades the full width of the panel between the plot coordinates `lo`
/// and `hi` (in either order) in the colour of `Mark::Band`.
pub(crate) fn draw_hband<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    x: &Axis,
    (lo, hi): (f64, f64),
    color: RGBColor,
) -> DrawResult<()> {
    let corners = [(x.lo, lo), (x.hi, hi)];
    chart
        .draw_series(std::iter::once(Rectangle::new(
            corners,
            color.mix(BAND_ALPHA).filled(),
        )))
        .map_err(de)?;
    Ok(())
}

/// Shades the area between the curves `(xs[i], lo[i])` and `(xs[i], hi[i])`
/// in the colour of `Mark::Band`, with no outline. An index whose x, lo or
/// hi cannot be shown breaks the area there; a run of a single index
/// encloses nothing and is left out.
pub(crate) fn draw_area_between<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    xs: &[f64],
    (lo, hi): (&[f64], &[f64]),
    (x, y): (&Axis, &Axis),
    color: RGBColor,
) -> DrawResult<()> {
    let style = color.mix(BAND_ALPHA).filled();
    for run in area_runs(xs, lo, hi, x, y) {
        // Along the lower edge, then back along the upper one.
        let outline: Vec<(f64, f64)> = run
            .iter()
            .map(|&(p, l, _)| (p, l))
            .chain(run.iter().rev().map(|&(p, _, h)| (p, h)))
            .collect();
        chart
            .draw_series(std::iter::once(Polygon::new(outline, style)))
            .map_err(de)?;
    }
    Ok(())
}

/// Runs of consecutive indices at which x, lo and hi are all plottable, as
/// `(x, lo, hi)` in plot coordinates; runs of fewer than two are dropped.
fn area_runs(xs: &[f64], lo: &[f64], hi: &[f64], x: &Axis, y: &Axis) -> Vec<Vec<(f64, f64, f64)>> {
    let mut runs = vec![Vec::new()];
    for ((&a, &l), &h) in xs.iter().zip(lo).zip(hi) {
        let p = (x.scale.to_plot(a), y.scale.to_plot(l), y.scale.to_plot(h));
        match p {
            (Some(p), Some(l), Some(h)) => runs
                .last_mut()
                .expect("runs starts non-empty")
                .push((p, l, h)),
            _ if runs.last().is_some_and(|r| !r.is_empty()) => runs.push(Vec::new()),
            _ => {}
        }
    }
    runs.retain(|r| r.len() >= 2);
    runs
}

/// Draws a thin horizontal reference line at zero if zero is in view.
pub(crate) fn draw_zero_line<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    x: &Axis,
    y: &Axis,
) -> DrawResult<()> {
    if y.contains(0.0) {
        chart
            .draw_series(LineSeries::new(
                [(x.lo, 0.0), (x.hi, 0.0)],
                RGBColor(120, 120, 120).stroke_width(1),
            ))
            .map_err(de)?;
    }
    Ok(())
}

/// Draws the sample of `mark` with its left end at pixel `(x, y)`.
fn draw_sample<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    mark: Mark,
    (x, y): (i32, i32),
) -> DrawResult<()> {
    let line = [(x, y), (x + SAMPLE, y)];
    let dot = (x + SAMPLE / 2, y);
    match mark {
        Mark::Line(c) => area.draw(&PathElement::new(line, c.stroke_width(2))),
        Mark::Dashed(c) => area.draw(&DashedPathElement::new(line, 6, 4, c.stroke_width(2))),
        Mark::ThinDashed(c) => area.draw(&DashedPathElement::new(line, 6, 4, c.stroke_width(1))),
        Mark::Band(c) => area.draw(&Rectangle::new(
            [(x, y - 7), (x + SAMPLE, y + 7)],
            c.mix(BAND_ALPHA).filled(),
        )),
        Mark::Marker(c) => area.draw(&Circle::new(dot, MARKER_RADIUS, c.stroke_width(2))),
        Mark::LineMarker(c) => {
            area.draw(&PathElement::new(line, c.stroke_width(1)))
                .map_err(de)?;
            area.draw(&Circle::new(dot, MARKER_RADIUS, c.stroke_width(2)))
        }
    }
    .map_err(de)
}

fn text_width<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, text: &str) -> DrawResult<i32> {
    let (w, _) = area.estimate_text_size(text, &font(KEY_FONT)).map_err(de)?;
    Ok(w as i32)
}

/// Width in pixels of `keys` laid out in one row.
pub(crate) fn row_width<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    keys: &[Key<'_>],
) -> DrawResult<i32> {
    let mut total = 0;
    for (_, label) in keys {
        total += SAMPLE + GAP + text_width(area, label)?;
    }
    Ok(total + SEP * (keys.len() as i32 - 1).max(0))
}

/// Draws `keys` in one row starting at pixel `x`, centred on pixel row `y`
/// of `area`.
pub(crate) fn draw_key_row<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    keys: &[Key<'_>],
    (mut x, y): (i32, i32),
) -> DrawResult<()> {
    let style = font(KEY_FONT).pos(Pos::new(HPos::Left, VPos::Center));
    for &(mark, label) in keys {
        draw_sample(area, mark, (x, y))?;
        x += SAMPLE + GAP;
        area.draw(&Text::new(label, (x, y), style.clone()))
            .map_err(de)?;
        x += text_width(area, label)? + SEP;
    }
    Ok(())
}

/// Draws `keys` in a row right-aligned above the plotting area of `chart`,
/// in the strip a panel built with `key_room` leaves free.
pub(crate) fn draw_keys_above<'a, DB: DrawingBackend + 'a>(
    area: &DrawingArea<DB, Shift>,
    chart: &Chart<'a, DB>,
    keys: &[Key<'_>],
) -> DrawResult<()> {
    let (xr, yr) = chart.plotting_area().get_pixel_range();
    let (bx, by) = area.get_base_pixel();
    let width = row_width(area, keys)?;
    draw_key_row(area, keys, (xr.end - bx - width, yr.start - by - 15))
}

/// Draws a legend box inside the plotting area, in the corner where it
/// covers least of the polylines `avoid` (plot coordinates; a marker
/// series counts as the polyline through its markers).
pub(crate) fn draw_legend<'a, DB: DrawingBackend + 'a>(
    chart: &Chart<'a, DB>,
    keys: &[Key<'_>],
    avoid: &[&[(f64, f64)]],
) -> DrawResult<()> {
    const PAD: i32 = 8;
    const ROW: i32 = 22;
    const INSET: i32 = 10;
    if keys.is_empty() {
        return Ok(());
    }
    let plot = chart.plotting_area();
    let area = plot.strip_coord_spec();
    let (pw, ph) = area.dim_in_pixel();
    let (pw, ph) = (pw as i32, ph as i32);
    let mut text_w = 0;
    for (_, label) in keys {
        text_w = text_w.max(text_width(&area, label)?);
    }
    let w = 2 * PAD + SAMPLE + GAP + text_w;
    let h = 2 * PAD + ROW * keys.len() as i32 - 6;
    let (bx, by) = area.get_base_pixel();
    let to_px = |p: &(f64, f64)| {
        let (x, y) = plot.map_coordinate(p);
        (f64::from(x - bx), f64::from(y - by))
    };
    // Samples along each polyline, so that a steep line between two
    // distant points still counts as crossing the box.
    let mut samples = Vec::new();
    for line in avoid {
        let px: Vec<(f64, f64)> = line.iter().map(to_px).collect();
        samples.extend(px.first().copied());
        for pair in px.windows(2) {
            let ((x0, y0), (x1, y1)) = (pair[0], pair[1]);
            samples.extend((1..=8).map(|i| {
                let t = f64::from(i) / 8.0;
                (x0 + t * (x1 - x0), y0 + t * (y1 - y0))
            }));
        }
    }
    let corners = [
        (pw - INSET - w, INSET),
        (INSET, INSET),
        (pw - INSET - w, ph - INSET - h),
        (INSET, ph - INSET - h),
    ];
    let covered = |&(x0, y0): &(i32, i32)| {
        let m = f64::from(MARKER_RADIUS + 2);
        let (x0, y0) = (f64::from(x0) - m, f64::from(y0) - m);
        let (x1, y1) = (x0 + f64::from(w) + 2.0 * m, y0 + f64::from(h) + 2.0 * m);
        samples
            .iter()
            .filter(|&&(x, y)| x0 <= x && x <= x1 && y0 <= y && y <= y1)
            .count()
    };
    // `min_by_key` keeps the first of equal counts: upper right is preferred.
    let (x0, y0) = corners
        .into_iter()
        .min_by_key(covered)
        .expect("four corners");
    let corners = [(x0, y0), (x0 + w, y0 + h)];
    area.draw(&Rectangle::new(corners, WHITE.mix(0.9).filled()))
        .map_err(de)?;
    area.draw(&Rectangle::new(corners, GRID.stroke_width(1)))
        .map_err(de)?;
    let style = font(KEY_FONT).pos(Pos::new(HPos::Left, VPos::Center));
    for (i, &(mark, label)) in keys.iter().enumerate() {
        let y = y0 + PAD + 8 + ROW * i as i32;
        draw_sample(&area, mark, (x0 + PAD, y))?;
        let at = (x0 + PAD + SAMPLE + GAP, y);
        area.draw(&Text::new(label, at, style.clone()))
            .map_err(de)?;
    }
    Ok(())
}

/// Writes `text` centred horizontally on `area`, at `y` px from its top
/// (`None`: centred vertically too). Used for panels with nothing to plot.
pub(crate) fn draw_note<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    text: &str,
    y: Option<i32>,
    size: f64,
) -> DrawResult<()> {
    let (w, h) = area.dim_in_pixel();
    let (v, y) = match y {
        Some(y) => (VPos::Top, y),
        None => (VPos::Center, h as i32 / 2),
    };
    let style = font(size).pos(Pos::new(HPos::Center, v));
    area.draw(&Text::new(text, (w as i32 / 2, y), style))
        .map_err(de)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::axis::Scale;

    #[test]
    fn area_breaks_at_unplottable_entries() {
        let x = Axis {
            scale: Scale::Log,
            lo: -1.0,
            hi: 4.0,
        };
        let y = Axis {
            scale: Scale::Linear,
            lo: -10.0,
            hi: 10.0,
        };
        let xs = [1.0, 10.0, 100.0, -1.0, 1e3, 1e4, f64::NAN, 1.0, 10.0];
        let lo = [0.0, 1.0, 2.0, 3.0, 4.0, f64::NAN, 6.0, 7.0, 8.0];
        let hi = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, f64::INFINITY, 9.0];
        let runs = area_runs(&xs, &lo, &hi, &x, &y);
        // Indices 0..3 form one run; 4 and 8 stand alone and are dropped.
        assert_eq!(
            runs,
            vec![vec![(0.0, 0.0, 1.0), (1.0, 1.0, 2.0), (2.0, 2.0, 3.0)]]
        );
    }
}
