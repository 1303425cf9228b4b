//! Regularisation-parameter scans: one panel of score against λ per rule.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::ImageFormat;
use super::axis::{Extent, Scale, fmt_sci};
use super::common::{self, DrawResult, Paint, Panel};
use super::draw::{self, Mark};
use super::{LambdaCurve, LambdaFigure};
use crate::Result;

const STEM: &str = "lambda";

/// Grid of panels for `n` curves: `(rows, columns)`.
fn grid(n: usize) -> (usize, usize) {
    let cols = match n {
        0 | 1 => 1,
        2..=4 => 2,
        _ => 3,
    };
    (n.div_ceil(cols).max(1), cols)
}

/// Figure size in pixels for `n` curves: 900 × 600 up to four panels,
/// growing by about 300 × 300 px per extra row or column.
fn size(n: usize) -> (u32, u32) {
    let (rows, cols) = grid(n);
    let width = if cols <= 2 { 900 } else { 1260 };
    let height = if rows <= 2 {
        600
    } else {
        40 + 290 * rows as u32
    };
    (width, height)
}

/// Renders each curve in its own panel, score against λ (log axis, label
/// `lambda (dimensionless)`), the score axis logarithmic when the curve asks
/// for it. Each panel marks the curve's own choice (dashed) and the finally
/// selected λ (solid) with vertical lines. Points that cannot be shown on a
/// log axis are skipped; a curve with no plottable point gets a panel
/// saying so.
///
/// Returns SVG text as bytes or an encoded PNG (900 × 600 px for up to four
/// curves, larger for more). Fails with [`Error::Plot`](crate::Error::Plot)
/// (path `lambda.svg` or `lambda.png`) when `curves` is empty, or when a
/// curve is empty or its `lambda` and `score` differ in length.
pub fn render_lambda(fig: &LambdaFigure, format: ImageFormat) -> Result<Vec<u8>> {
    let plot = LambdaPlot::new(fig).map_err(|m| common::plot_error(STEM, format, m))?;
    common::render(&plot, STEM, format, size(fig.curves.len()))
}

struct LambdaPlot<'a> {
    fig: &'a LambdaFigure<'a>,
}

impl<'a> LambdaPlot<'a> {
    fn new(fig: &'a LambdaFigure<'a>) -> DrawResult<Self> {
        if fig.curves.is_empty() {
            return Err("nothing to plot (no lambda curves given)".into());
        }
        for c in fig.curves {
            if c.lambda.is_empty() {
                return Err(format!(
                    "nothing to plot for curve `{}` (lambda is empty)",
                    c.name
                ));
            }
            if c.score.len() != c.lambda.len() {
                return Err(format!(
                    "curve `{}`: score has {} values but lambda has {}",
                    c.name,
                    c.score.len(),
                    c.lambda.len()
                ));
            }
        }
        Ok(Self { fig })
    }

    fn curve_panel<DB: DrawingBackend>(
        &self,
        area: &DrawingArea<DB, Shift>,
        curve: &LambdaCurve<'_>,
    ) -> DrawResult<()> {
        let y_scale = if curve.log_y {
            Scale::Log
        } else {
            Scale::Linear
        };
        let (mut xe, mut ye) = (Extent::new(Scale::Log), Extent::new(y_scale));
        for (&l, &s) in curve.lambda.iter().zip(curve.score) {
            if Scale::Log.to_plot(l).is_some() && y_scale.to_plot(s).is_some() {
                xe.add(l);
                ye.add(s);
            }
        }
        let chosen = curve
            .chosen_lambda
            .filter(|l| Scale::Log.to_plot(*l).is_some());
        let caption = match chosen {
            Some(l) => format!("{} ({})", curve.name, fmt_sci(l, 2)),
            None => curve.name.to_string(),
        };
        if xe.raw().is_none() {
            draw::draw_note(area, &caption, Some(12), 17.0)?;
            let what = if curve.log_y {
                "positive finite"
            } else {
                "finite"
            };
            let note = format!("no point with positive lambda and {what} score");
            return draw::draw_note(area, &note, None, 15.0);
        }
        xe.add_all(chosen);
        xe.add(self.fig.selected_lambda);
        let panel = Panel {
            x: xe.finish("lambda")?,
            y: ye.finish("score")?,
            x_desc: Some("lambda (dimensionless)"),
            y_desc: curve.y_label,
            caption: Some(&caption),
            x_ticks: 6,
            y_ticks: 5,
            common_step: None,
            key_room: false,
        };
        let (x, y) = (&panel.x, &panel.y);
        let mut chart = common::build_panel(area, &panel)?;
        let mark = Mark::Line(common::DATA);
        draw::draw_series(&mut chart, curve.lambda, curve.score, x, y, mark)?;
        let pts = draw::points(curve.lambda, curve.score, x, y);
        chart
            .draw_series(
                pts.iter()
                    .map(|&p| Circle::new(p, 2, common::DATA.filled())),
            )
            .map_err(common::de)?;
        if let Some(p) = Scale::Log.to_plot(self.fig.selected_lambda) {
            draw::draw_vline(&mut chart, p, y, SELECTED)?;
        }
        if let Some(p) = chosen.and_then(|l| Scale::Log.to_plot(l)) {
            draw::draw_vline(&mut chart, p, y, CHOSEN)?;
        }
        Ok(())
    }
}

/// Marks for the λ picked by a panel's own rule and for the one finally used.
const CHOSEN: Mark = Mark::Dashed(common::ACCENT);
const SELECTED: Mark = Mark::Line(common::FIT);

impl Paint for LambdaPlot<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<()> {
        let area = common::titled(root, self.fig.title)?;
        // One key for all panels, in a strip below the title.
        let (strip, area) = area.split_vertically(30);
        let selected = format!("selected: {}", fmt_sci(self.fig.selected_lambda, 2));
        let mut keys = Vec::new();
        if self.fig.curves.iter().any(|c| c.chosen_lambda.is_some()) {
            keys.push((CHOSEN, "choice of the panel's rule"));
        }
        if Scale::Log.to_plot(self.fig.selected_lambda).is_some() {
            keys.push((SELECTED, selected.as_str()));
        }
        let width = draw::row_width(&strip, &keys)?;
        let (w, _) = strip.dim_in_pixel();
        draw::draw_key_row(&strip, &keys, ((w as i32 - width) / 2, 12))?;

        let cells = area.split_evenly(grid(self.fig.curves.len()));
        for (cell, curve) in cells.iter().zip(self.fig.curves) {
            self.curve_panel(cell, curve)?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::testutil::{check_png, check_svg, save};

    fn scan() -> (Vec<f64>, Vec<f64>, Vec<f64>) {
        let lambda: Vec<f64> = (0..40)
            .map(|i| 10f64.powf(-8.0 + 8.0 * i as f64 / 39.0))
            .collect();
        // A GCV-like valley with its minimum at 1e-4, and an L-curve-like
        // curvature peak at 1e-3 that goes negative on the flanks.
        let valley = lambda
            .iter()
            .map(|l| 1e-3 * (1.0 + (l.log10() + 4.0).powi(2)))
            .collect();
        let bump = lambda
            .iter()
            .map(|l| 2.0 * (-(l.log10() + 3.0).powi(2)).exp() - 0.2)
            .collect();
        (lambda, valley, bump)
    }

    #[test]
    fn renders_both_formats() {
        let (lambda, valley, bump) = scan();
        let curves = [
            LambdaCurve {
                name: "cross-validation",
                lambda: &lambda,
                score: &valley,
                y_label: "score (ohm^2)",
                log_y: true,
                chosen_lambda: Some(1e-4),
            },
            LambdaCurve {
                name: "corner curvature",
                lambda: &lambda,
                score: &bump,
                y_label: "curvature (dimensionless)",
                log_y: false,
                chosen_lambda: Some(1e-3),
            },
            LambdaCurve {
                name: "curvature on log axis",
                lambda: &lambda,
                score: &bump,
                y_label: "curvature (dimensionless)",
                log_y: true,
                chosen_lambda: None,
            },
        ];
        let fig = LambdaFigure {
            curves: &curves,
            selected_lambda: 1e-4,
            title: "Choice of lambda",
        };
        let png = render_lambda(&fig, ImageFormat::Png).unwrap();
        check_png(&png, size(3));
        save("lambda.png", &png);
        let svg = render_lambda(&fig, ImageFormat::Svg).unwrap();
        save("lambda.svg", &svg);
        check_svg(
            &svg,
            &[
                "lambda (dimensionless)",
                "score (ohm^2)",
                "corner curvature",
            ],
        );

        // More panels than fit in two columns.
        let many: Vec<LambdaCurve> = curves.iter().cycle().take(5).copied().collect();
        let fig = LambdaFigure {
            curves: &many,
            ..fig
        };
        let png = render_lambda(&fig, ImageFormat::Png).unwrap();
        check_png(&png, size(5));
        save("lambda_five.png", &png);
    }

    #[test]
    fn degenerate_inputs() {
        let none = LambdaFigure {
            curves: &[],
            selected_lambda: 1.0,
            title: "",
        };
        let err = render_lambda(&none, ImageFormat::Png)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot lambda.png: nothing to plot (no lambda curves given)"
        );
        let base = LambdaCurve {
            name: "gcv",
            lambda: &[1e-3, 1e-2],
            score: &[1.0],
            y_label: "score (ohm^2)",
            log_y: true,
            chosen_lambda: None,
        };
        let fig = LambdaFigure {
            curves: &[base],
            ..none
        };
        let err = render_lambda(&fig, ImageFormat::Svg)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot lambda.svg: curve `gcv`: score has 1 values but lambda has 2"
        );

        let curves = [
            // Nothing plottable on the log axis.
            LambdaCurve {
                lambda: &[0.0, -1.0, 1e-3],
                score: &[1.0, 1.0, -2.0],
                ..base
            },
            // A single point, non-finite marks.
            LambdaCurve {
                lambda: &[1e-3],
                score: &[2.0],
                chosen_lambda: Some(f64::NAN),
                ..base
            },
            // All equal scores.
            LambdaCurve {
                lambda: &[1e-3, 1e-2, 1e-1],
                score: &[0.0, 0.0, 0.0],
                log_y: false,
                chosen_lambda: Some(1e-2),
                ..base
            },
        ];
        let fig = LambdaFigure {
            curves: &curves,
            selected_lambda: -1.0,
            title: "",
        };
        let png = render_lambda(&fig, ImageFormat::Png).unwrap();
        check_png(&png, size(3));
        save("lambda_degenerate.png", &png);
        render_lambda(&fig, ImageFormat::Svg).unwrap();
    }
}
