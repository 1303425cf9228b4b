//! A step response and its fit, with a residual panel.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::ImageFormat;
use super::TransientFigure;
use super::axis::{Axis, Extent, Scale};
use super::common::{self, DrawResult, Paint, Panel};
use super::draw::{self, Mark};
use crate::Result;

const SIZE: (u32, u32) = (900, 650);
const STEM: &str = "transient";

/// Renders the measured response as circles and the fit as a line against
/// time (log axis, label `time (s)`), above a panel of residuals
///
/// $$ r_i = 100\,\frac{y_i - \hat y_i}{\max_j \lvert y_j \rvert} \quad (\%) $$
///
/// with `y` measured and `ŷ` fitted, or with `residual_scale` in place of the
/// largest measured magnitude when it is positive. Scaling by one value
/// rather than point by point keeps the residuals finite where the response
/// passes through zero.
///
/// Returns SVG text as bytes or an encoded PNG of 900 × 650 px. Fails with
/// [`Error::Plot`](crate::Error::Plot) (path `transient.svg` or
/// `transient.png`) when `time_s` is empty, when `measured` or a non-empty
/// `fitted` has a different length, or when no point with t > 0 and a
/// finite value remains.
pub fn render_transient(fig: &TransientFigure, format: ImageFormat) -> Result<Vec<u8>> {
    let plot = TransientPlot::new(fig).map_err(|m| common::plot_error(STEM, format, m))?;
    common::render(&plot, STEM, format, SIZE)
}

struct TransientPlot<'a> {
    fig: &'a TransientFigure<'a>,
    /// Residuals in percent of the largest measured magnitude; empty without a fit.
    residual_pct: Vec<f64>,
    x: Axis,
    y: Axis,
    y_res: Axis,
}

impl<'a> TransientPlot<'a> {
    fn new(fig: &'a TransientFigure<'a>) -> DrawResult<Self> {
        common::require("time_s", fig.time_s)?;
        common::same_len("measured", fig.measured, "time_s", fig.time_s)?;
        common::same_len_or_empty("fitted", fig.fitted, "time_s", fig.time_s)?;
        let (mut xe, mut ye) = (Extent::new(Scale::Log), Extent::new(Scale::Linear));
        let mut scale = 0.0f64;
        for (&t, &m) in fig.time_s.iter().zip(fig.measured) {
            if t.is_finite() && t > 0.0 && m.is_finite() {
                xe.add(t);
                ye.add(m);
                scale = scale.max(m.abs());
            }
        }
        if xe.raw().is_none() {
            return Err(
                "no point with positive finite time_s and finite measured value \
                        (a log time axis cannot show t <= 0)"
                    .into(),
            );
        }
        for (&t, &f) in fig.time_s.iter().zip(fig.fitted) {
            if t.is_finite() && t > 0.0 {
                ye.add(f);
            }
        }
        if fig.residual_scale.is_finite() && fig.residual_scale > 0.0 {
            scale = fig.residual_scale;
        }
        let residual_pct: Vec<f64> = if scale > f64::MIN_POSITIVE {
            fig.measured
                .iter()
                .zip(fig.fitted)
                .map(|(m, f)| 100.0 * (m - f) / scale)
                .collect()
        } else {
            Vec::new()
        };
        let mut re = Extent::new(Scale::Linear);
        re.add(0.0);
        for (&t, &r) in fig.time_s.iter().zip(&residual_pct) {
            if t.is_finite() && t > 0.0 {
                re.add(r);
            }
        }
        Ok(Self {
            fig,
            residual_pct,
            x: xe.finish("time_s")?,
            y: ye.finish("measured")?,
            y_res: re.finish("residual")?,
        })
    }

    fn panel<'s>(&self, y: Axis, y_desc: &'s str, bottom: bool) -> Panel<'s> {
        Panel {
            x: self.x,
            y,
            x_desc: bottom.then_some("time (s)"),
            y_desc,
            caption: None,
            x_ticks: 10,
            y_ticks: if bottom { 4 } else { 7 },
            common_step: None,
            key_room: false,
        }
    }
}

impl Paint for TransientPlot<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<()> {
        let area = common::titled(root, self.fig.title)?;
        let h = area.dim_in_pixel().1 as i32;
        let (top, bottom) = area.split_vertically((h * 64) / 100);
        let (t, x) = (self.fig.time_s, &self.x);

        let mut chart = common::build_panel(&top, &self.panel(self.y, self.fig.y_label, false))?;
        let (data, fit) = (Mark::Marker(common::DATA), Mark::Line(common::FIT));
        let mut keys = vec![(data, "measured")];
        if !self.fig.fitted.is_empty() {
            draw::draw_series(&mut chart, t, self.fig.fitted, x, &self.y, fit)?;
            keys.push((fit, "fit"));
        }
        draw::draw_series(&mut chart, t, self.fig.measured, x, &self.y, data)?;
        let data_pts = draw::points(t, self.fig.measured, x, &self.y);
        let fit_pts = draw::points(t, self.fig.fitted, x, &self.y);
        draw::draw_legend(&chart, &keys, &[&data_pts, &fit_pts])?;

        let label = if self.fig.residual_scale.is_finite() && self.fig.residual_scale > 0.0 {
            "residual (% of step response)"
        } else {
            "residual (% of max)"
        };
        let panel = self.panel(self.y_res, label, true);
        let mut chart = common::build_panel(&bottom, &panel)?;
        draw::draw_zero_line(&mut chart, x, &self.y_res)?;
        if self.residual_pct.is_empty() {
            let plot = chart.plotting_area().strip_coord_spec();
            return draw::draw_note(&plot, "no fit given", None, 15.0);
        }
        let mark = Mark::LineMarker(common::DATA);
        draw::draw_series(&mut chart, t, &self.residual_pct, x, &self.y_res, mark)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::testutil::{check_png, check_svg, save};

    #[test]
    fn renders_both_formats() {
        // Galvanostatic step of 1 mA into the RC element (R = 50 ohm,
        // C = 20 µF): v(t) = I R (1 - exp(-t / RC)), analytic.
        let t: Vec<f64> = (0..40)
            .map(|i| 10f64.powf(-5.0 + 4.0 * i as f64 / 39.0))
            .collect();
        let exact: Vec<f64> = t.iter().map(|t| 0.05 * (1.0 - (-t / 1e-3).exp())).collect();
        let measured: Vec<f64> = exact
            .iter()
            .enumerate()
            .map(|(i, v)| v + 4e-4 * ((i as f64) * 1.7).sin())
            .collect();
        let fig = TransientFigure {
            residual_scale: 0.0,
            time_s: &t,
            measured: &measured,
            fitted: &exact,
            y_label: "voltage (V)",
            title: "Step response",
        };
        let png = render_transient(&fig, ImageFormat::Png).unwrap();
        check_png(&png, SIZE);
        save("transient.png", &png);
        let svg = render_transient(&fig, ImageFormat::Svg).unwrap();
        save("transient.svg", &svg);
        check_svg(&svg, &["time (s)", "voltage (V)", "residual (% of max)"]);
    }

    #[test]
    fn degenerate_inputs() {
        let empty = TransientFigure {
            residual_scale: 0.0,
            time_s: &[],
            measured: &[],
            fitted: &[],
            y_label: "voltage (V)",
            title: "",
        };
        let err = render_transient(&empty, ImageFormat::Png)
            .unwrap_err()
            .to_string();
        assert_eq!(err, "plot transient.png: nothing to plot (time_s is empty)");
        let only_zero = TransientFigure {
            residual_scale: 0.0,
            time_s: &[0.0, -1.0],
            measured: &[1.0, 2.0],
            ..empty
        };
        assert!(render_transient(&only_zero, ImageFormat::Svg).is_err());
        let single = TransientFigure {
            residual_scale: 0.0,
            time_s: &[1e-3],
            measured: &[0.2],
            ..empty
        };
        let flat = TransientFigure {
            residual_scale: 0.0,
            time_s: &[0.0, 1e-3, 1e-2, f64::NAN, 1e-1],
            measured: &[0.0, 0.0, 0.0, 0.0, f64::NAN],
            fitted: &[0.0, 0.0, 0.0, 0.0, 0.0],
            ..empty
        };
        for fig in [single, flat] {
            let png = render_transient(&fig, ImageFormat::Png).unwrap();
            check_png(&png, SIZE);
            render_transient(&fig, ImageFormat::Svg).unwrap();
        }
        save(
            "transient_single.png",
            &render_transient(&single, ImageFormat::Png).unwrap(),
        );
    }
}
