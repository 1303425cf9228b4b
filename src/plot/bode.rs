//! Bode plot: magnitude, phase and fit residuals on a shared frequency axis.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::BodeFigure;
use super::ImageFormat;
use super::axis::{Axis, Extent, Scale};
use super::common::{self, Chart, DrawResult, Paint, Panel};
use super::draw::{self, Mark};
use crate::Result;

/// Three panels need more height than a single-panel figure.
const SIZE: (u32, u32) = (900, 860);
const STEM: &str = "bode";

/// Renders three stacked panels against frequency (log axis, label
/// `frequency (Hz)`, shared): |Z| in ohm on a log axis, the phase arg Z in
/// degrees (negative when capacitive) of data and fit, and the relative
/// residuals of the real and imaginary parts in percent.
///
/// Returns SVG text as bytes or an encoded PNG of 900 × 860 px. Fails with
/// [`Error::Plot`](crate::Error::Plot) (path `bode.svg` or `bode.png`) when
/// `frequency_hz` is empty, when a series that is given has a length other
/// than `frequency_hz`'s, or when no usable data point remains.
pub fn render_bode(fig: &BodeFigure, format: ImageFormat) -> Result<Vec<u8>> {
    let plot = BodePlot::new(fig).map_err(|m| common::plot_error(STEM, format, m))?;
    common::render(&plot, STEM, format, SIZE)
}

/// Derived series, one entry per frequency (or empty when not supplied).
struct BodePlot<'a> {
    fig: &'a BodeFigure<'a>,
    mag: Vec<f64>,
    phase: Vec<f64>,
    fit_mag: Vec<f64>,
    fit_phase: Vec<f64>,
    res_re_pct: Vec<f64>,
    res_im_pct: Vec<f64>,
    x: Axis,
    y_mag: Axis,
    y_phase: Axis,
    y_res: Axis,
}

pub(crate) fn magnitude(re: &[f64], im: &[f64]) -> Vec<f64> {
    re.iter().zip(im).map(|(a, b)| a.hypot(*b)).collect()
}

pub(crate) fn phase_deg(re: &[f64], im: &[f64]) -> Vec<f64> {
    re.iter()
        .zip(im)
        .map(|(a, b)| b.atan2(*a).to_degrees())
        .collect()
}

fn extent(scale: Scale, series: &[&[f64]]) -> Extent {
    let mut e = Extent::new(scale);
    series.iter().for_each(|s| e.add_all(s.iter().copied()));
    e
}

impl<'a> BodePlot<'a> {
    fn new(fig: &'a BodeFigure<'a>) -> DrawResult<Self> {
        let f = fig.frequency_hz;
        common::require("frequency_hz", f)?;
        common::same_len("z_re_ohm", fig.z_re_ohm, "frequency_hz", f)?;
        common::same_len("z_im_ohm", fig.z_im_ohm, "frequency_hz", f)?;
        common::same_len_or_empty("fit_re_ohm", fig.fit_re_ohm, "frequency_hz", f)?;
        common::same_len("fit_im_ohm", fig.fit_im_ohm, "fit_re_ohm", fig.fit_re_ohm)?;
        common::same_len_or_empty("residual_re_rel", fig.residual_re_rel, "frequency_hz", f)?;
        common::same_len_or_empty("residual_im_rel", fig.residual_im_rel, "frequency_hz", f)?;

        let mag = magnitude(fig.z_re_ohm, fig.z_im_ohm);
        let phase = phase_deg(fig.z_re_ohm, fig.z_im_ohm);
        let fit_mag = magnitude(fig.fit_re_ohm, fig.fit_im_ohm);
        let fit_phase = phase_deg(fig.fit_re_ohm, fig.fit_im_ohm);
        let pct = |v: &[f64]| v.iter().map(|r| 100.0 * r).collect::<Vec<_>>();
        let (res_re_pct, res_im_pct) = (pct(fig.residual_re_rel), pct(fig.residual_im_rel));

        let x = extent(Scale::Log, &[f]).finish("frequency_hz")?;
        let y_mag = extent(Scale::Log, &[&mag, &fit_mag]).finish("|Z|")?;
        let y_phase = extent(Scale::Linear, &[&phase, &fit_phase]).finish("phase")?;
        let mut res = extent(Scale::Linear, &[&res_re_pct, &res_im_pct]);
        res.add(0.0);
        let y_res = res.finish("residual")?;
        Ok(Self {
            fig,
            mag,
            phase,
            fit_mag,
            fit_phase,
            res_re_pct,
            res_im_pct,
            x,
            y_mag,
            y_phase,
            y_res,
        })
    }

    fn panel<'s>(&self, y: Axis, y_desc: &'s str, bottom: bool, key_room: bool) -> Panel<'s> {
        Panel {
            x: self.x,
            y,
            x_desc: bottom.then_some("frequency (Hz)"),
            y_desc,
            caption: None,
            x_ticks: 10,
            y_ticks: 5,
            common_step: None,
            key_room,
        }
    }

    /// Measured values as circles over the fit as a line.
    fn data_and_fit<'c, DB: DrawingBackend + 'c>(
        &self,
        chart: &mut Chart<'c, DB>,
        y: &Axis,
        data: &[f64],
        fit: &[f64],
    ) -> DrawResult<()> {
        let f = self.fig.frequency_hz;
        if !fit.is_empty() {
            draw::draw_series(chart, f, fit, &self.x, y, FIT_MARK)?;
        }
        draw::draw_series(chart, f, data, &self.x, y, DATA_MARK)
    }
}

const DATA_MARK: Mark = Mark::Marker(common::DATA);
const FIT_MARK: Mark = Mark::Line(common::FIT);

impl Paint for BodePlot<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<()> {
        let area = common::titled(root, self.fig.title)?;
        // Heights chosen so that the three plotting areas come out equal:
        // the top and bottom panels carry a 20 px key strip, and the bottom
        // one the shared axis labels (48 px more than the others).
        let h = area.dim_in_pixel().1 as i32;
        let unit = (h - 20 - 68) / 3;
        let parts = area.split_by_breakpoints([] as [i32; 0], [unit + 20, 2 * unit + 20]);
        let [a_mag, a_phase, a_res] = parts.as_slice() else {
            return Err(format!("expected 3 panel areas, got {}", parts.len()));
        };

        let mut chart =
            common::build_panel(a_mag, &self.panel(self.y_mag, "|Z| (ohm)", false, true))?;
        self.data_and_fit(&mut chart, &self.y_mag, &self.mag, &self.fit_mag)?;
        let mut keys = vec![(DATA_MARK, "measured")];
        if !self.fit_mag.is_empty() {
            keys.push((FIT_MARK, "fit"));
        }
        draw::draw_keys_above(a_mag, &chart, &keys)?;

        let panel = self.panel(self.y_phase, "phase (deg)", false, false);
        let mut chart = common::build_panel(a_phase, &panel)?;
        draw::draw_zero_line(&mut chart, &self.x, &self.y_phase)?;
        self.data_and_fit(&mut chart, &self.y_phase, &self.phase, &self.fit_phase)?;

        let panel = self.panel(self.y_res, "residual (%)", true, true);
        let mut chart = common::build_panel(a_res, &panel)?;
        draw::draw_zero_line(&mut chart, &self.x, &self.y_res)?;
        let f = self.fig.frequency_hz;
        let series = [
            (
                &self.res_re_pct,
                Mark::LineMarker(common::DATA),
                "real part",
            ),
            (
                &self.res_im_pct,
                Mark::LineMarker(common::ACCENT),
                "imaginary part",
            ),
        ];
        let mut keys = Vec::new();
        for (values, mark, label) in series {
            if !values.is_empty() {
                draw::draw_series(&mut chart, f, values, &self.x, &self.y_res, mark)?;
                keys.push((mark, label));
            }
        }
        if keys.is_empty() {
            let plot = chart.plotting_area().strip_coord_spec();
            draw::draw_note(&plot, "no residuals given", None, 15.0)
        } else {
            draw::draw_keys_above(a_res, &chart, &keys)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::testutil::{check_png, check_svg, rc_arc, save};

    #[test]
    fn renders_both_formats() {
        let (f, re, im) = rc_arc();
        // A fit off by a smooth few-percent error, so residuals are visible.
        let err: Vec<f64> = f.iter().map(|x| 0.02 * (x.log10()).sin()).collect();
        let fit_re: Vec<f64> = re.iter().zip(&err).map(|(v, e)| v * (1.0 + e)).collect();
        let fit_im: Vec<f64> = im.iter().zip(&err).map(|(v, e)| v * (1.0 - e)).collect();
        let res_re: Vec<f64> = err.iter().map(|e| -e).collect();
        let fig = BodeFigure {
            frequency_hz: &f,
            z_re_ohm: &re,
            z_im_ohm: &im,
            fit_re_ohm: &fit_re,
            fit_im_ohm: &fit_im,
            residual_re_rel: &res_re,
            residual_im_rel: &err,
            title: "RC element",
        };
        let png = render_bode(&fig, ImageFormat::Png).unwrap();
        check_png(&png, SIZE);
        save("bode.png", &png);
        let svg = render_bode(&fig, ImageFormat::Svg).unwrap();
        save("bode.svg", &svg);
        check_svg(
            &svg,
            &[
                "frequency (Hz)",
                "|Z| (ohm)",
                "phase (deg)",
                "residual (%)",
                "10⁵",
            ],
        );
    }

    #[test]
    fn degenerate_inputs() {
        let empty = BodeFigure {
            frequency_hz: &[],
            z_re_ohm: &[],
            z_im_ohm: &[],
            fit_re_ohm: &[],
            fit_im_ohm: &[],
            residual_re_rel: &[],
            residual_im_rel: &[],
            title: "",
        };
        let err = render_bode(&empty, ImageFormat::Png)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot bode.png: nothing to plot (frequency_hz is empty)"
        );
        let bad_fit = BodeFigure {
            frequency_hz: &[1.0, 2.0],
            z_re_ohm: &[1.0, 1.0],
            z_im_ohm: &[0.0, 0.0],
            fit_re_ohm: &[1.0],
            fit_im_ohm: &[1.0],
            ..empty
        };
        let err = render_bode(&bad_fit, ImageFormat::Svg)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot bode.svg: fit_re_ohm has 1 values but frequency_hz has 2"
        );

        // One point, then a flat spectrum with NaN, zero and negative entries.
        let single = BodeFigure {
            frequency_hz: &[50.0],
            z_re_ohm: &[10.0],
            z_im_ohm: &[-1.0],
            ..empty
        };
        let flat = BodeFigure {
            frequency_hz: &[1.0, 10.0, f64::NAN, -5.0, 100.0],
            z_re_ohm: &[5.0, 5.0, 5.0, 5.0, 0.0],
            z_im_ohm: &[0.0, 0.0, 0.0, 0.0, 0.0],
            residual_re_rel: &[0.0, 0.0, 0.0, 0.0, f64::NAN],
            ..empty
        };
        for fig in [single, flat] {
            let png = render_bode(&fig, ImageFormat::Png).unwrap();
            check_png(&png, SIZE);
            render_bode(&fig, ImageFormat::Svg).unwrap();
        }
        save(
            "bode_degenerate.png",
            &render_bode(&flat, ImageFormat::Png).unwrap(),
        );
    }
}
