//! The distribution of relaxation times, γ against log τ.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::DrtFigure;
use super::ImageFormat;
use super::axis::{Axis, Extent, Scale};
use super::common::{self, DrawResult, Paint, Panel};
use super::draw::{self, Mark};
use crate::Result;

const SIZE: (u32, u32) = (900, 600);
const STEM: &str = "drt";

/// Renders γ against τ (log axis, label `tau (s)`), with each peak marked by
/// a dashed vertical line and a triangle on the curve. A band, when given,
/// is shaded behind the curve in a pale tint of its colour, is broken where
/// τ, `band_lo` or `band_hi` cannot be shown, and gets a legend entry.
///
/// Returns SVG text as bytes or an encoded PNG of 900 × 600 px. Fails with
/// [`Error::Plot`](crate::Error::Plot) (path `drt.svg` or `drt.png`) when
/// `tau_s` is empty, when `gamma` has a different length, when a band is
/// given and `band_lo` or `band_hi` has a different length, or when no pair
/// of positive τ and finite γ remains.
pub fn render_drt(fig: &DrtFigure, format: ImageFormat) -> Result<Vec<u8>> {
    let plot = DrtPlot::new(fig).map_err(|m| common::plot_error(STEM, format, m))?;
    common::render(&plot, STEM, format, SIZE)
}

struct DrtPlot<'a> {
    fig: &'a DrtFigure<'a>,
    x: Axis,
    y: Axis,
    /// Whether a band is drawn.
    band: bool,
}

impl<'a> DrtPlot<'a> {
    fn new(fig: &'a DrtFigure<'a>) -> DrawResult<Self> {
        common::require("tau_s", fig.tau_s)?;
        common::same_len("gamma", fig.gamma, "tau_s", fig.tau_s)?;
        let band = !(fig.band_lo.is_empty() && fig.band_hi.is_empty());
        if band {
            common::same_len("band_lo", fig.band_lo, "tau_s", fig.tau_s)?;
            common::same_len("band_hi", fig.band_hi, "tau_s", fig.tau_s)?;
        }
        let (mut xe, mut ye) = (Extent::new(Scale::Log), Extent::new(Scale::Linear));
        for (&t, &g) in fig.tau_s.iter().zip(fig.gamma) {
            if t.is_finite() && t > 0.0 && g.is_finite() {
                xe.add(t);
                ye.add(g);
            }
        }
        if xe.raw().is_none() {
            return Err("no point with positive finite tau_s and finite gamma to plot".into());
        }
        if band {
            for ((&t, &l), &h) in fig.tau_s.iter().zip(fig.band_lo).zip(fig.band_hi) {
                if Scale::Log.to_plot(t).is_some() {
                    ye.add(l);
                    ye.add(h);
                }
            }
        }
        // A distribution is read against its zero baseline.
        ye.add(0.0);
        xe.add_all(fig.peaks_tau_s.iter().copied());
        Ok(Self {
            fig,
            x: xe.finish("tau_s")?,
            y: ye.finish("gamma")?,
            band,
        })
    }
}

/// γ at plot coordinate `p` (log10 τ) on the curve `pts` sorted by x,
/// interpolated linearly in log τ; `None` outside the curve.
fn gamma_at(pts: &[(f64, f64)], p: f64) -> Option<f64> {
    let i = pts.partition_point(|q| q.0 < p);
    match (i.checked_sub(1).and_then(|j| pts.get(j)), pts.get(i)) {
        (Some(a), Some(b)) if b.0 > a.0 => Some(a.1 + (b.1 - a.1) * (p - a.0) / (b.0 - a.0)),
        (_, Some(b)) if (b.0 - p).abs() < 1e-12 => Some(b.1),
        (Some(a), _) if (a.0 - p).abs() < 1e-12 => Some(a.1),
        _ => None,
    }
}

impl Paint for DrtPlot<'_> {
    fn paint<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<()> {
        let (fig, x, y) = (self.fig, &self.x, &self.y);
        let area = common::titled(root, fig.title)?;
        let panel = Panel {
            x: self.x,
            y: self.y,
            x_desc: Some("tau (s)"),
            y_desc: fig.y_label,
            caption: None,
            x_ticks: 10,
            y_ticks: 7,
            common_step: None,
            key_room: false,
        };
        let mut chart = common::build_panel(&area, &panel)?;
        let curve = Mark::Line(common::DATA);
        let mut keys = vec![(curve, "distribution")];
        // Edges of the band, for the legend to keep clear of.
        let mut edges = Vec::new();
        if self.band {
            let (lo, hi) = (fig.band_lo, fig.band_hi);
            draw::draw_area_between(&mut chart, fig.tau_s, (lo, hi), (x, y), common::DATA)?;
            keys.push((Mark::Band(common::DATA), fig.band_label));
            edges.push(draw::points(fig.tau_s, lo, x, y));
            edges.push(draw::points(fig.tau_s, hi, x, y));
        }
        draw::draw_zero_line(&mut chart, x, y)?;
        draw::draw_series(&mut chart, fig.tau_s, fig.gamma, x, y, curve)?;

        let mut sorted = draw::points(fig.tau_s, fig.gamma, x, y);
        sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
        let peak = Mark::Dashed(common::ACCENT);
        let mut peak_key = false;
        for p in fig
            .peaks_tau_s
            .iter()
            .filter_map(|&t| Scale::Log.to_plot(t))
        {
            if !peak_key {
                keys.push((peak, "peak"));
                peak_key = true;
            }
            draw::draw_vline(&mut chart, p, y, peak)?;
            if let Some(g) = gamma_at(&sorted, p) {
                let marker = TriangleMarker::new((p, g), 7, common::ACCENT.filled());
                chart
                    .draw_series(std::iter::once(marker))
                    .map_err(common::de)?;
            }
        }
        let mut avoid: Vec<&[(f64, f64)]> = vec![&sorted];
        avoid.extend(edges.iter().map(Vec::as_slice));
        draw::draw_legend(&chart, &keys, &avoid)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::testutil::{check_png, check_svg, save};

    /// One RC element, R = 50 ohm, C = 20 µF, as a narrow log-normal bump.
    fn bump() -> (Vec<f64>, Vec<f64>) {
        let tau: Vec<f64> = (0..80)
            .map(|i| 10f64.powf(-6.0 + 7.0 * i as f64 / 79.0))
            .collect();
        let peak = (50.0f64 * 20e-6).log10();
        let gamma = tau
            .iter()
            .map(|t| 20.0 * (-((t.log10() - peak) / 0.3).powi(2)).exp())
            .collect();
        (tau, gamma)
    }

    #[test]
    fn renders_both_formats() {
        let (tau, gamma) = bump();
        let fig = DrtFigure {
            tau_s: &tau,
            gamma: &gamma,
            y_label: "gamma (ohm)",
            peaks_tau_s: &[1e-3],
            band_lo: &[],
            band_hi: &[],
            band_label: "",
            title: "RC element, R = 50 ohm, C = 20 uF",
        };
        let png = render_drt(&fig, ImageFormat::Png).unwrap();
        check_png(&png, SIZE);
        save("drt.png", &png);
        let svg = render_drt(&fig, ImageFormat::Svg).unwrap();
        save("drt.svg", &svg);
        check_svg(&svg, &["tau (s)", "gamma (ohm)", "10⁻³"]);
    }

    /// The bump with a band from 0.7 γ - 1 to 1.3 γ + 1, as a 90 % band.
    fn banded<'a>(
        tau: &'a [f64],
        gamma: &'a [f64],
        band: &'a (Vec<f64>, Vec<f64>),
    ) -> DrtFigure<'a> {
        DrtFigure {
            tau_s: tau,
            gamma,
            y_label: "gamma (ohm)",
            peaks_tau_s: &[1e-3],
            band_lo: &band.0,
            band_hi: &band.1,
            band_label: "90 % band",
            title: "RC element with its band",
        }
    }

    fn band_of(gamma: &[f64]) -> (Vec<f64>, Vec<f64>) {
        (
            gamma.iter().map(|g| 0.7 * g - 1.0).collect(),
            gamma.iter().map(|g| 1.3 * g + 1.0).collect(),
        )
    }

    /// Filled polygons in SVG text (the band's areas).
    fn polygons(svg: &[u8]) -> usize {
        std::str::from_utf8(svg)
            .expect("SVG is UTF-8")
            .matches("<polygon")
            .count()
    }

    #[test]
    fn renders_with_band() {
        let (tau, gamma) = bump();
        let band = band_of(&gamma);
        let fig = banded(&tau, &gamma, &band);
        let png = render_drt(&fig, ImageFormat::Png).unwrap();
        check_png(&png, SIZE);
        save("drt_band.png", &png);
        let svg = render_drt(&fig, ImageFormat::Svg).unwrap();
        save("drt_band.svg", &svg);
        check_svg(&svg, &["90 % band", "distribution", "peak"]);
        // One area for the band plus the peak triangle.
        assert_eq!(polygons(&svg), 2);

        // The y range covers the band: γ peaks at 20, the band reaches
        // 1.3 * 20 + 1 = 27 and goes down to -1 in the tails.
        let plot = DrtPlot::new(&fig).unwrap();
        assert!(plot.band);
        assert!(plot.y.hi > 27.0 && plot.y.hi < 28.5, "hi {}", plot.y.hi);
        assert!(plot.y.lo < -1.0 && plot.y.lo > -3.0, "lo {}", plot.y.lo);

        // Without the band: no area, no key, and a range set by γ alone.
        let plain = DrtFigure {
            band_lo: &[],
            band_hi: &[],
            ..fig
        };
        let plot = DrtPlot::new(&plain).unwrap();
        assert!(!plot.band);
        assert!(plot.y.hi < 22.0, "hi {}", plot.y.hi);
        let svg = render_drt(&plain, ImageFormat::Svg).unwrap();
        assert_eq!(polygons(&svg), 1);
        assert!(!std::str::from_utf8(&svg).unwrap().contains("90 % band"));
    }

    #[test]
    fn band_length_must_match() {
        let (tau, gamma) = bump();
        let band = band_of(&gamma);
        let short = DrtFigure {
            band_lo: &band.0[..3],
            ..banded(&tau, &gamma, &band)
        };
        let err = render_drt(&short, ImageFormat::Svg)
            .unwrap_err()
            .to_string();
        assert_eq!(err, "plot drt.svg: band_lo has 3 values but tau_s has 80");

        let one_sided = DrtFigure {
            band_hi: &[],
            ..banded(&tau, &gamma, &band)
        };
        let err = render_drt(&one_sided, ImageFormat::Png)
            .unwrap_err()
            .to_string();
        assert_eq!(err, "plot drt.png: band_hi has 0 values but tau_s has 80");
    }

    #[test]
    fn band_with_gaps_renders() {
        let (tau, gamma) = bump();
        let mut band = band_of(&gamma);
        // A NaN in the middle of each edge and an infinite upper edge at
        // the start: the area splits in two (indices 1..40 and 41..80).
        band.0[40] = f64::NAN;
        band.1[0] = f64::INFINITY;
        let fig = banded(&tau, &gamma, &band);
        let png = render_drt(&fig, ImageFormat::Png).unwrap();
        check_png(&png, SIZE);
        save("drt_band_gaps.png", &png);
        let svg = render_drt(&fig, ImageFormat::Svg).unwrap();
        check_svg(&svg, &["90 % band"]);
        assert_eq!(polygons(&svg), 3);
        // The infinite edge does not stretch the range.
        let plot = DrtPlot::new(&fig).unwrap();
        assert!(plot.y.hi < 28.5, "hi {}", plot.y.hi);

        // An all-NaN band draws nothing but still renders.
        let nan = vec![f64::NAN; tau.len()];
        let empty_band = DrtFigure {
            band_lo: &nan,
            band_hi: &nan,
            ..fig
        };
        let svg = render_drt(&empty_band, ImageFormat::Svg).unwrap();
        assert_eq!(polygons(&svg), 1);
    }

    #[test]
    fn degenerate_inputs() {
        let empty = DrtFigure {
            tau_s: &[],
            gamma: &[],
            y_label: "gamma (ohm)",
            peaks_tau_s: &[],
            band_lo: &[],
            band_hi: &[],
            band_label: "",
            title: "",
        };
        let err = render_drt(&empty, ImageFormat::Png)
            .unwrap_err()
            .to_string();
        assert_eq!(err, "plot drt.png: nothing to plot (tau_s is empty)");

        let mismatch = DrtFigure {
            gamma: &[1.0],
            tau_s: &[1.0, 2.0],
            ..empty
        };
        let err = render_drt(&mismatch, ImageFormat::Svg)
            .unwrap_err()
            .to_string();
        assert_eq!(err, "plot drt.svg: gamma has 1 values but tau_s has 2");

        let nan = [f64::NAN, f64::NAN];
        let all_nan = DrtFigure {
            tau_s: &[1.0, 2.0],
            gamma: &nan,
            ..empty
        };
        assert!(render_drt(&all_nan, ImageFormat::Png).is_err());

        let single = DrtFigure {
            tau_s: &[1e-3],
            gamma: &[4.0],
            peaks_tau_s: &[1e-3, f64::NAN, -1.0],
            ..empty
        };
        for f in [ImageFormat::Png, ImageFormat::Svg] {
            render_drt(&single, f).unwrap();
        }
        let flat = DrtFigure {
            tau_s: &[1e-3, 1e-3, f64::NAN, 0.0, 1e-3],
            gamma: &[0.0, 0.0, 1.0, 1.0, f64::INFINITY],
            ..empty
        };
        let png = render_drt(&flat, ImageFormat::Png).unwrap();
        check_png(&png, SIZE);
        save("drt_degenerate.png", &png);
    }
}
