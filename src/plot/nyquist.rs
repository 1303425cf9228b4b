//! Complex-plane (Nyquist) plot with equal scales on both axes.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::ImageFormat;
use super::NyquistFigure;
use super::axis::{self, Axis, Extent, Scale};
use super::common::{self, DrawResult, Paint, Panel};
use super::draw::{self, Mark};
use crate::Result;

const SIZE: (u32, u32) = (900, 600);
const STEM: &str = "nyquist";

/// Widens one of two ranges so both get the same data units per pixel.
///
/// `x` spans `width_px` pixels and `y` spans `height_px`. The range with the
/// smaller units-per-pixel is widened about its centre to the larger one, so
/// that a circle in data space is drawn as a circle. Each returned range
/// contains its input and is ordered `(low, high)`. Inputs are returned
/// (ordered) unchanged when a pixel size is zero or both ranges are empty.
pub fn equal_scale_ranges(
    x: (f64, f64),
    y: (f64, f64),
    width_px: u32,
    height_px: u32,
) -> ((f64, f64), (f64, f64)) {
    let order = |(a, b): (f64, f64)| if a <= b { (a, b) } else { (b, a) };
    let (x, y) = (order(x), order(y));
    if width_px == 0 || height_px == 0 {
        return (x, y);
    }
    let (w, h) = (f64::from(width_px), f64::from(height_px));
    let per_px = ((x.1 - x.0) / w).max((y.1 - y.0) / h);
    if !(per_px.is_finite() && per_px > 0.0) {
        return (x, y);
    }
    let widen = |(lo, hi): (f64, f64), px: f64| {
        let mid = 0.5 * (lo + hi);
        let half = 0.5 * per_px * px;
        // `min`/`max` keep the input inside despite rounding of `mid ± half`.
        ((mid - half).min(lo), (mid + half).max(hi))
    };
    (widen(x, w), widen(y, h))
}

/// Renders −Z″ against Z′ (labels `Z' (ohm)` and `-Z'' (ohm)`), measured
/// values as circles and the fit as a line, with the same ohm-per-pixel
/// scale on both axes. The imaginary axis always includes zero.
///
/// Returns SVG text as bytes or an encoded PNG of 900 × 600 px. Fails with
/// [`Error::Plot`](crate::Error::Plot) (path `nyquist.svg` or `nyquist.png`)
/// when the data are empty, when real and imaginary parts differ in length,
/// or when no finite data point remains.
pub fn render_nyquist(fig: &NyquistFigure, format: ImageFormat) -> Result<Vec<u8>> {
    let plot = NyquistPlot::new(fig).map_err(|m| common::plot_error(STEM, format, m))?;
    common::render(&plot, STEM, format, SIZE)
}

struct NyquistPlot<'a> {
    fig: &'a NyquistFigure<'a>,
    /// −Z″ of the data and of the fit, the quantities actually drawn.
    data_up: Vec<f64>,
    fit_up: Vec<f64>,
    x: (f64, f64),
    y: (f64, f64),
}

impl<'a> NyquistPlot<'a> {
    fn new(fig: &'a NyquistFigure<'a>) -> DrawResult<Self> {
        common::require("z_re_ohm", fig.z_re_ohm)?;
        common::same_len("z_im_ohm", fig.z_im_ohm, "z_re_ohm", fig.z_re_ohm)?;
        common::same_len("fit_im_ohm", fig.fit_im_ohm, "fit_re_ohm", fig.fit_re_ohm)?;
        let data_up: Vec<f64> = fig.z_im_ohm.iter().map(|v| -v).collect();
        let fit_up: Vec<f64> = fig.fit_im_ohm.iter().map(|v| -v).collect();
        let (x, y) = nyquist_ranges([
            (fig.z_re_ohm, data_up.as_slice()),
            (fig.fit_re_ohm, fit_up.as_slice()),
        ])?;
        Ok(Self {
            fig,
            data_up,
            fit_up,
            x,
            y,
        })
    }
}

/// The padded ranges of Z' and -Z'' (the latter with 0) over the finite
/// points of every `(z_re, minus_z_im)` series, for a Nyquist panel
/// ([`nyquist_panel`]).
pub(crate) fn nyquist_ranges<'s>(
    series: impl IntoIterator<Item = (&'s [f64], &'s [f64])>,
) -> DrawResult<((f64, f64), (f64, f64))> {
    let (mut xe, mut ye) = (Extent::new(Scale::Linear), Extent::new(Scale::Linear));
    for (re, up) in series {
        for (&a, &b) in re.iter().zip(up) {
            if a.is_finite() && b.is_finite() {
                xe.add(a);
                ye.add(b);
            }
        }
    }
    let x = xe
        .raw()
        .ok_or("no impedance point with finite real and imaginary parts")?;
    ye.add(0.0);
    let y = ye.raw().ok_or("no finite imaginary part")?;
    let (x, y) = (
        axis::pad(Scale::Linear, x.0, x.1),
        axis::pad(Scale::Linear, y.0, y.1),
    );
    if !(x.1 - x.0).is_finite() || !(y.1 - y.0).is_finite() {
        return Err("impedance values are too large to plot".into());
    }
    Ok((x, y))
}

/// The panel of a Nyquist plot in `area`: Z' against -Z'' on linear axes
/// with the data ranges `x` and `y` widened to equal scales (one ohm is
/// as long on both axes) and one tick step for both.
pub(crate) fn nyquist_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    x: (f64, f64),
    y: (f64, f64),
) -> DrawResult<Panel<'static>> {
    let linear = |(lo, hi): (f64, f64)| Axis {
        scale: Scale::Linear,
        lo,
        hi,
    };
    let mut panel = Panel {
        x: linear(x),
        y: linear(y),
        x_desc: Some("Z' (ohm)"),
        y_desc: "-Z'' (ohm)",
        caption: None,
        x_ticks: 10,
        y_ticks: 7,
        common_step: None,
        key_room: false,
    };
    let (w, h) = common::plot_size(area, &panel)?;
    let (x, y) = equal_scale_ranges(x, y, w, h);
    let step = axis::nice_step(x.1 - x.0, 10).max(axis::nice_step(y.1 - y.0, 7));
    panel.x = linear(x);
    panel.y = linear(y);
    panel.common_step = Some(step);
    Ok(panel)
}

impl Paint for NyquistPlot<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<()> {
        let area = common::titled(root, self.fig.title)?;
        let panel = nyquist_panel(&area, self.x, self.y)?;
        let mut chart = common::build_panel(&area, &panel)?;
        let (x, y) = (&panel.x, &panel.y);
        draw::draw_zero_line(&mut chart, x, y)?;
        let (data, fit) = (Mark::Marker(common::DATA), Mark::Line(common::FIT));
        let mut keys = vec![(data, "measured")];
        let fig = self.fig;
        if !fig.fit_re_ohm.is_empty() {
            draw::draw_series(&mut chart, fig.fit_re_ohm, &self.fit_up, x, y, fit)?;
            keys.push((fit, "fit"));
        }
        draw::draw_series(&mut chart, fig.z_re_ohm, &self.data_up, x, y, data)?;
        let data_pts = draw::points(fig.z_re_ohm, &self.data_up, x, y);
        let fit_pts = draw::points(fig.fit_re_ohm, &self.fit_up, x, y);
        draw::draw_legend(&chart, &keys, &[&data_pts, &fit_pts])
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::testutil::{check_png, check_svg, rc_arc, save};

    fn assert_equal_scale(x: (f64, f64), y: (f64, f64), w: u32, h: u32) {
        let sx = (x.1 - x.0) / f64::from(w);
        let sy = (y.1 - y.0) / f64::from(h);
        assert!((sx - sy).abs() <= 1e-12 * sx.max(sy), "{sx} vs {sy}");
    }

    #[test]
    fn equal_scale_property() {
        let cases = [
            ((0.0, 50.0), (0.0, 25.0), 800, 480),
            ((0.0, 1.0), (-30.0, 30.0), 800, 480),
            ((10.0, 10.5), (0.0, 0.1), 300, 900),
            ((-2.0, 2.0), (1e3, 1e3 + 4.0), 100, 100),
            ((5.0, 1.0), (2.0, -2.0), 640, 480),
        ];
        for (x, y, w, h) in cases {
            let (ex, ey) = equal_scale_ranges(x, y, w, h);
            assert_equal_scale(ex, ey, w, h);
            let (xl, xh) = (x.0.min(x.1), x.0.max(x.1));
            let (yl, yh) = (y.0.min(y.1), y.0.max(y.1));
            assert!(ex.0 <= xl && ex.1 >= xh && ey.0 <= yl && ey.1 >= yh);
        }
        // Zero pixels or zero-width data: returned as given.
        assert_eq!(
            equal_scale_ranges((0.0, 1.0), (0.0, 2.0), 0, 10),
            ((0.0, 1.0), (0.0, 2.0))
        );
        assert_eq!(
            equal_scale_ranges((1.0, 1.0), (2.0, 2.0), 10, 10),
            ((1.0, 1.0), (2.0, 2.0))
        );
    }

    #[test]
    fn renders_both_formats() {
        let (_, re, im) = rc_arc();
        let fit_re: Vec<f64> = re.iter().map(|v| v * 1.01).collect();
        let fit_im: Vec<f64> = im.iter().map(|v| v * 0.99).collect();
        let fig = NyquistFigure {
            z_re_ohm: &re,
            z_im_ohm: &im,
            fit_re_ohm: &fit_re,
            fit_im_ohm: &fit_im,
            title: "RC element",
        };
        let png = render_nyquist(&fig, ImageFormat::Png).unwrap();
        check_png(&png, SIZE);
        save("nyquist.png", &png);
        let svg = render_nyquist(&fig, ImageFormat::Svg).unwrap();
        save("nyquist.svg", &svg);
        // The SVG backend escapes apostrophes.
        check_svg(
            &svg,
            &["Z&apos; (ohm)", "-Z&apos;&apos; (ohm)", "measured", "fit"],
        );
    }

    #[test]
    fn degenerate_inputs() {
        let empty = NyquistFigure {
            z_re_ohm: &[],
            z_im_ohm: &[],
            fit_re_ohm: &[],
            fit_im_ohm: &[],
            title: "",
        };
        let err = render_nyquist(&empty, ImageFormat::Png)
            .unwrap_err()
            .to_string();
        assert_eq!(err, "plot nyquist.png: nothing to plot (z_re_ohm is empty)");
        let short = NyquistFigure {
            z_re_ohm: &[1.0, 2.0],
            z_im_ohm: &[1.0],
            ..empty
        };
        let err = render_nyquist(&short, ImageFormat::Svg)
            .unwrap_err()
            .to_string();
        assert_eq!(
            err,
            "plot nyquist.svg: z_im_ohm has 1 values but z_re_ohm has 2"
        );

        let single = NyquistFigure {
            z_re_ohm: &[10.0],
            z_im_ohm: &[0.0],
            ..empty
        };
        let flat = NyquistFigure {
            z_re_ohm: &[3.0, 3.0, f64::NAN, 3.0],
            z_im_ohm: &[-1.0, -1.0, -1.0, f64::NAN],
            ..empty
        };
        let zeros = NyquistFigure {
            z_re_ohm: &[0.0, 0.0],
            z_im_ohm: &[0.0, 0.0],
            ..empty
        };
        for fig in [single, flat, zeros] {
            let png = render_nyquist(&fig, ImageFormat::Png).unwrap();
            check_png(&png, SIZE);
            render_nyquist(&fig, ImageFormat::Svg).unwrap();
        }
        save(
            "nyquist_degenerate.png",
            &render_nyquist(&flat, ImageFormat::Png).unwrap(),
        );
    }
}
