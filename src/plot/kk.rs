//! Residuals of a Kramers-Kronig validity test against frequency.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::ImageFormat;
use super::KkFigure;
use super::axis::{Axis, Extent, Scale};
use super::common::{self, DrawResult, Paint, Panel};
use super::draw::{self, Mark};
use crate::Result;

const SIZE: (u32, u32) = (900, 600);
const STEM: &str = "kk";

const REAL: Mark = Mark::LineMarker(common::DATA);
const IMAG: Mark = Mark::LineMarker(common::ACCENT);
const BAND_COLOR: RGBColor = common::FIT;
const BAND: Mark = Mark::Band(BAND_COLOR);
const NOISE: Mark = Mark::ThinDashed(common::INK);

/// Renders the relative residuals of the real part (line and circles in
/// the data colour) and of the imaginary part (in the accent colour) in
/// percent against frequency (log axis, label `frequency (Hz)`), over a
/// shaded band of ± `point_limit_rel` and between dashed lines at
/// ± `noise_rel`, each drawn only when finite and positive. The vertical
/// range covers zero, the band, the noise lines and every finite residual.
///
/// Returns SVG text as bytes or an encoded PNG of 900 × 600 px. Fails with
/// [`Error::Plot`](crate::Error::Plot) (path `kk.svg` or `kk.png`) when
/// `frequency_hz` is empty, when a residual series has a length other than
/// `frequency_hz`'s, or when no positive finite frequency remains.
pub fn render_kk(fig: &KkFigure, format: ImageFormat) -> Result<Vec<u8>> {
    let plot = KkPlot::new(fig).map_err(|m| common::plot_error(STEM, format, m))?;
    common::render(&plot, STEM, format, SIZE)
}

struct KkPlot<'a> {
    fig: &'a KkFigure<'a>,
    res_re_pct: Vec<f64>,
    res_im_pct: Vec<f64>,
    /// Half-width of the shaded band in percent, if one is drawn.
    band_pct: Option<f64>,
    /// Noise level in percent, if its lines are drawn.
    noise_pct: Option<f64>,
    x: Axis,
    y: Axis,
}

/// `100 v` when that is finite and positive.
fn positive_pct(v: f64) -> Option<f64> {
    let p = 100.0 * v;
    (p.is_finite() && p > 0.0).then_some(p)
}

impl<'a> KkPlot<'a> {
    fn new(fig: &'a KkFigure<'a>) -> DrawResult<Self> {
        let f = fig.frequency_hz;
        common::require("frequency_hz", f)?;
        common::same_len("residual_re_rel", fig.residual_re_rel, "frequency_hz", f)?;
        common::same_len("residual_im_rel", fig.residual_im_rel, "frequency_hz", f)?;

        let pct = |v: &[f64]| v.iter().map(|r| 100.0 * r).collect::<Vec<_>>();
        let (res_re_pct, res_im_pct) = (pct(fig.residual_re_rel), pct(fig.residual_im_rel));
        let band_pct = positive_pct(fig.point_limit_rel);
        let noise_pct = positive_pct(fig.noise_rel);

        let mut xe = Extent::new(Scale::Log);
        xe.add_all(f.iter().copied());
        let mut ye = Extent::new(Scale::Linear);
        // Only residuals at a plottable frequency are shown, so only those
        // set the range.
        for (i, &fi) in f.iter().enumerate() {
            if Scale::Log.to_plot(fi).is_some() {
                ye.add(res_re_pct[i]);
                ye.add(res_im_pct[i]);
            }
        }
        ye.add(0.0);
        for h in band_pct.into_iter().chain(noise_pct) {
            ye.add(h);
            ye.add(-h);
        }
        Ok(Self {
            fig,
            res_re_pct,
            res_im_pct,
            band_pct,
            noise_pct,
            x: xe.finish("frequency_hz")?,
            y: ye.finish("residual")?,
        })
    }
}

impl Paint for KkPlot<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<()> {
        let (f, x, y) = (self.fig.frequency_hz, &self.x, &self.y);
        let area = common::titled(root, self.fig.title)?;
        let panel = Panel {
            x: self.x,
            y: self.y,
            x_desc: Some("frequency (Hz)"),
            y_desc: "residual (%)",
            caption: None,
            x_ticks: 10,
            y_ticks: 7,
            common_step: None,
            key_room: true,
        };
        let mut chart = common::build_panel(&area, &panel)?;
        let mut keys = vec![(REAL, "real part"), (IMAG, "imaginary part")];
        if let Some(h) = self.band_pct {
            draw::draw_hband(&mut chart, x, (-h, h), BAND_COLOR)?;
            keys.push((BAND, "allowed band"));
        }
        draw::draw_zero_line(&mut chart, x, y)?;
        if let Some(h) = self.noise_pct {
            draw::draw_hline(&mut chart, x, h, NOISE)?;
            draw::draw_hline(&mut chart, x, -h, NOISE)?;
            keys.push((NOISE, "noise level"));
        }
        draw::draw_series(&mut chart, f, &self.res_re_pct, x, y, REAL)?;
        draw::draw_series(&mut chart, f, &self.res_im_pct, x, y, IMAG)?;
        draw::draw_keys_above(&area, &chart, &keys)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::testutil::{check_png, check_svg, rc_arc, save};

    /// Residuals of a smooth few-tenths-of-a-percent misfit on the RC arc's
    /// frequencies, with one point leaving the band.
    fn residuals() -> (Vec<f64>, Vec<f64>, Vec<f64>) {
        let (f, _, _) = rc_arc();
        let re: Vec<f64> = f.iter().map(|x| 0.004 * x.log10().sin()).collect();
        let mut im: Vec<f64> = f.iter().map(|x| -0.003 * x.log10().cos()).collect();
        im[20] = 0.025;
        (f, re, im)
    }

    fn figure<'a>(f: &'a [f64], re: &'a [f64], im: &'a [f64]) -> KkFigure<'a> {
        KkFigure {
            frequency_hz: f,
            residual_re_rel: re,
            residual_im_rel: im,
            point_limit_rel: 0.015,
            noise_rel: 0.005,
            title: "Kramers-Kronig test",
        }
    }

    #[test]
    fn renders_both_formats() {
        let (f, re, im) = residuals();
        let fig = figure(&f, &re, &im);
        let png = render_kk(&fig, ImageFormat::Png).unwrap();
        check_png(&png, SIZE);
        save("kk.png", &png);
        let svg = render_kk(&fig, ImageFormat::Svg).unwrap();
        save("kk.svg", &svg);
        check_svg(
            &svg,
            &[
                "frequency (Hz)",
                "residual (%)",
                "real part",
                "imaginary part",
                "allowed band",
                "noise level",
                "10⁵",
            ],
        );
    }

    #[test]
    fn range_covers_band_noise_and_residuals() {
        let (f, re, im) = residuals();
        let fig = figure(&f, &re, &im);
        let plot = KkPlot::new(&fig).unwrap();
        // Residuals reach +2.5 % (im[20]) and about -0.4 %; the band ±1.5 %.
        assert!(plot.y.contains(2.5) && plot.y.contains(-1.5));
        assert!(plot.y.hi < 2.8, "top {}", plot.y.hi);
        assert!(plot.y.lo > -1.8, "bottom {}", plot.y.lo);
        let near = |v: Option<f64>, want: f64| v.is_some_and(|v| (v - want).abs() < 1e-12);
        assert!(near(plot.band_pct, 1.5), "band {:?}", plot.band_pct);
        assert!(near(plot.noise_pct, 0.5), "noise {:?}", plot.noise_pct);

        // A band wider than every residual still fits entirely in view.
        let wide = KkFigure {
            point_limit_rel: 0.2,
            ..fig
        };
        let plot = KkPlot::new(&wide).unwrap();
        assert!(plot.y.contains(20.0) && plot.y.contains(-20.0));

        // No band and no noise lines for zero, negative or NaN levels, and
        // their keys are not drawn.
        let bare = KkFigure {
            point_limit_rel: 0.0,
            noise_rel: f64::NAN,
            ..fig
        };
        let plot = KkPlot::new(&bare).unwrap();
        assert_eq!((plot.band_pct, plot.noise_pct), (None, None));
        let svg = render_kk(&bare, ImageFormat::Svg).unwrap();
        check_svg(&svg, &["real part", "imaginary part"]);
        let text = String::from_utf8(svg).unwrap();
        assert!(!text.contains("allowed band") && !text.contains("noise level"));
        let negative = KkFigure {
            point_limit_rel: -0.01,
            noise_rel: f64::INFINITY,
            ..fig
        };
        let plot = KkPlot::new(&negative).unwrap();
        assert_eq!((plot.band_pct, plot.noise_pct), (None, None));
    }

    #[test]
    fn degenerate_inputs() {
        let empty = KkFigure {
            frequency_hz: &[],
            residual_re_rel: &[],
            residual_im_rel: &[],
            point_limit_rel: 0.01,
            noise_rel: 0.002,
            title: "",
        };
        let err = render_kk(&empty, ImageFormat::Png).unwrap_err().to_string();
        assert_eq!(err, "plot kk.png: nothing to plot (frequency_hz is empty)");

        let short_re = KkFigure {
            frequency_hz: &[1.0, 2.0],
            residual_re_rel: &[0.0],
            residual_im_rel: &[0.0, 0.0],
            ..empty
        };
        let err = render_kk(&short_re, ImageFormat::Svg)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot kk.svg: residual_re_rel has 1 values but frequency_hz has 2"
        );
        let long_im = KkFigure {
            residual_re_rel: &[0.0, 0.0],
            residual_im_rel: &[0.0, 0.0, 0.0],
            ..short_re
        };
        let err = render_kk(&long_im, ImageFormat::Png)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot kk.png: residual_im_rel has 3 values but frequency_hz has 2"
        );

        let no_frequency = KkFigure {
            frequency_hz: &[f64::NAN, -1.0],
            residual_re_rel: &[0.0, 0.0],
            residual_im_rel: &[0.0, 0.0],
            ..empty
        };
        let err = render_kk(&no_frequency, ImageFormat::Svg)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot kk.svg: no positive finite frequency_hz values to plot on a log axis"
        );

        // NaN and infinite entries are skipped, also in the range: the
        // residual 0.5 (50 %) sits at a NaN frequency and is not shown.
        let gappy = KkFigure {
            frequency_hz: &[1.0, 10.0, f64::NAN, 1e3, 1e4],
            residual_re_rel: &[0.001, f64::NAN, 0.5, -0.002, f64::INFINITY],
            residual_im_rel: &[f64::NAN, 0.003, 0.0, f64::NAN, -0.001],
            ..empty
        };
        let plot = KkPlot::new(&gappy).unwrap();
        assert!(plot.y.hi < 2.0, "top {}", plot.y.hi);
        let single = KkFigure {
            frequency_hz: &[50.0],
            residual_re_rel: &[0.0],
            residual_im_rel: &[0.0],
            point_limit_rel: 0.0,
            noise_rel: 0.0,
            ..empty
        };
        let all_nan = KkFigure {
            residual_re_rel: &[f64::NAN, f64::NAN],
            residual_im_rel: &[f64::NAN, f64::NAN],
            frequency_hz: &[1.0, 2.0],
            ..empty
        };
        for fig in [gappy, single, all_nan] {
            let png = render_kk(&fig, ImageFormat::Png).unwrap();
            check_png(&png, SIZE);
            render_kk(&fig, ImageFormat::Svg).unwrap();
        }
        save(
            "kk_degenerate.png",
            &render_kk(&gappy, ImageFormat::Png).unwrap(),
        );
    }
}
