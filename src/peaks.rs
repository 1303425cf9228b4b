//! Peaks of a distribution of relaxation times and the resistance under each.
//!
//! A peak is a local maximum of gamma(ln tau). Its resistance is the area of
//! gamma between the minima that separate it from its neighbours (or the ends
//! of the grid), so the areas of all reported peaks add up to the total
//! polarisation resistance.
//!
//! Not every local maximum is a process. A regularised inversion ripples:
//! small maxima on the flank of a broad peak, or bumps at the level of the fit
//! residual. A maximum is merged into its neighbour (across the shallower of
//! its two separating minima) when any of these holds:
//!
//! - its height is below `min_height_rel` of the largest peak;
//! - its prominence (height above the higher separating minimum) is below
//!   `min_prominence_rel` of its own height;
//! - its area is below `min_area` (what the fit can resolve, set by the caller
//!   from the noise level) or below `min_area_rel` of the total area.
//!
//! The thresholds are common practice in peak picking (prominence as in
//! topographic peak analysis); their default values are our choice, checked
//! against the synthetic ladder in the tests.

/// Thresholds for reporting a maximum as a peak.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PeakOptions {
    /// Minimum height relative to the highest peak.
    pub min_height_rel: f64,
    /// Minimum prominence relative to the peak's own height.
    pub min_prominence_rel: f64,
    /// Minimum area relative to the total area under gamma.
    pub min_area_rel: f64,
    /// Minimum area in the distribution's unit (resolution of the fit).
    pub min_area: f64,
}

impl Default for PeakOptions {
    fn default() -> Self {
        Self {
            min_height_rel: 0.01,
            min_prominence_rel: 0.1,
            min_area_rel: 0.03,
            min_area: 0.0,
        }
    }
}

/// One reported peak.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Peak {
    /// Time constant at the maximum (s), refined by a parabola in ln tau.
    pub tau_s: f64,
    /// Characteristic frequency 1/(2 pi tau) (Hz).
    pub frequency_hz: f64,
    /// Area of the distribution between the separating minima, in its unit
    /// (ohm for a DRT: the process's resistance; siemens for the admittance
    /// distribution of a voltage step).
    pub area: f64,
    /// The distribution at the maximum (its unit per unit ln tau).
    pub height: f64,
    /// Lower end of the peak's region (s).
    pub tau_lo_s: f64,
    /// Upper end of the peak's region (s).
    pub tau_hi_s: f64,
}

/// Finds the peaks of `gamma` sampled on the uniform grid `ln_tau`
/// (at least 3 points), in ascending tau.
pub fn find_peaks(ln_tau: &[f64], gamma: &[f64], opts: &PeakOptions) -> Vec<Peak> {
    let n = gamma.len().min(ln_tau.len());
    if n < 3 {
        return Vec::new();
    }
    let g = &gamma[..n];
    // Local maxima (a plateau counts once, at its first point).
    let mut maxima: Vec<usize> = (1..n - 1)
        .filter(|&i| g[i] > g[i - 1] && g[i] >= g[i + 1] && g[i] > 0.0)
        .collect();
    let total = trapezoid(ln_tau, g, 0, n - 1);
    loop {
        if maxima.is_empty() {
            return Vec::new();
        }
        // Separating minima between consecutive maxima.
        let bounds = separators(g, &maxima);
        let highest = maxima.iter().map(|&i| g[i]).fold(0.0, f64::max);
        let mut worst: Option<(usize, f64)> = None;
        for (k, &i) in maxima.iter().enumerate() {
            let (lo, hi) = (bounds[k], bounds[k + 1]);
            let saddle = g[lo].max(g[hi]);
            let prominence = (g[i] - saddle) / g[i];
            let area = trapezoid(ln_tau, g, lo, hi);
            // Badness < 1 means the maximum fails a test.
            let badness = (g[i] / (opts.min_height_rel * highest))
                .min(prominence / opts.min_prominence_rel)
                .min(area / (opts.min_area_rel * total))
                .min(if opts.min_area > 0.0 {
                    area / opts.min_area
                } else {
                    f64::INFINITY
                });
            if badness < 1.0 && worst.is_none_or(|(_, b)| badness < b) {
                worst = Some((k, badness));
            }
        }
        let Some((k, _)) = worst else {
            return maxima
                .iter()
                .enumerate()
                .map(|(k, &i)| make_peak(ln_tau, g, i, bounds[k], bounds[k + 1]))
                .collect();
        };
        // Merge: drop the maximum; its region joins the neighbour across the
        // higher (shallower) separating minimum, which the recomputed
        // separators do automatically.
        maxima.remove(k);
    }
}

/// Index bounds of each maximum's region: grid ends and the minimum of gamma
/// between consecutive maxima.
fn separators(g: &[f64], maxima: &[usize]) -> Vec<usize> {
    let mut b = Vec::with_capacity(maxima.len() + 1);
    b.push(0);
    for w in maxima.windows(2) {
        let (a, c) = (w[0], w[1]);
        let m = (a..=c).min_by(|&x, &y| g[x].total_cmp(&g[y])).unwrap_or(a);
        b.push(m);
    }
    b.push(g.len() - 1);
    b
}

fn trapezoid(x: &[f64], y: &[f64], lo: usize, hi: usize) -> f64 {
    (lo..hi)
        .map(|i| 0.5 * (y[i] + y[i + 1]) * (x[i + 1] - x[i]))
        .sum()
}

fn make_peak(ln_tau: &[f64], g: &[f64], i: usize, lo: usize, hi: usize) -> Peak {
    // Parabola through the three samples around the maximum (uniform grid).
    let (a, b, c) = (g[i - 1], g[i], g[i + 1]);
    let denom = a - 2.0 * b + c;
    let shift = if denom < 0.0 {
        (0.5 * (a - c) / denom).clamp(-0.5, 0.5)
    } else {
        0.0
    };
    let h = ln_tau[i + 1] - ln_tau[i];
    let y = ln_tau[i] + shift * h;
    let peak_value = b - 0.25 * (a - c) * shift;
    let tau_s = y.exp();
    Peak {
        tau_s,
        frequency_hz: 1.0 / (2.0 * std::f64::consts::PI * tau_s),
        area: trapezoid(ln_tau, g, lo, hi),
        height: peak_value,
        tau_lo_s: ln_tau[lo].exp(),
        tau_hi_s: ln_tau[hi].exp(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn grid(n: usize, lo: f64, hi: f64) -> Vec<f64> {
        (0..n)
            .map(|i| lo + (hi - lo) * i as f64 / (n - 1) as f64)
            .collect()
    }

    fn gauss(y: f64, c: f64, s: f64, a: f64) -> f64 {
        a * (-(y - c).powi(2) / (2.0 * s * s)).exp()
    }

    #[test]
    fn two_separated_gaussians_give_their_areas() {
        let y = grid(801, -10.0, 10.0);
        // areas a * s * sqrt(2 pi): 5 and 2
        let s = 0.5;
        let a1 = 5.0 / (s * (2.0 * std::f64::consts::PI).sqrt());
        let a2 = 2.0 / (s * (2.0 * std::f64::consts::PI).sqrt());
        let g: Vec<f64> = y
            .iter()
            .map(|&v| gauss(v, -3.0, s, a1) + gauss(v, 3.3, s, a2))
            .collect();
        let p = find_peaks(&y, &g, &PeakOptions::default());
        assert_eq!(p.len(), 2);
        assert!((p[0].tau_s.ln() + 3.0).abs() < 1e-3);
        assert!((p[1].tau_s.ln() - 3.3).abs() < 1e-3);
        assert!((p[0].area - 5.0).abs() < 1e-6);
        assert!((p[1].area - 2.0).abs() < 1e-6);
        assert!((p[0].height - a1).abs() < 1e-3 * a1);
    }

    #[test]
    fn ripple_on_a_flank_is_merged() {
        let y = grid(401, -5.0, 5.0);
        let g: Vec<f64> = y
            .iter()
            .map(|&v| {
                gauss(v, 0.0, 1.0, 1.0) + 0.01 * (8.0 * v).sin().max(0.0) * (v > 1.0) as u8 as f64
            })
            .collect();
        let p = find_peaks(&y, &g, &PeakOptions::default());
        assert_eq!(p.len(), 1, "{p:?}");
        // the ripple's area joins the main peak: the total is preserved
        let total = trapezoid(&y, &g, 0, y.len() - 1);
        assert!((p[0].area - total).abs() < 1e-12);
    }

    #[test]
    fn tiny_peak_is_dropped_and_resolution_floor_applies() {
        let y = grid(401, -8.0, 8.0);
        let g: Vec<f64> = y
            .iter()
            .map(|&v| gauss(v, -3.0, 0.4, 1.0) + gauss(v, 3.0, 0.4, 0.005))
            .collect();
        assert_eq!(find_peaks(&y, &g, &PeakOptions::default()).len(), 1);
        let g2: Vec<f64> = y
            .iter()
            .map(|&v| gauss(v, -3.0, 0.4, 1.0) + gauss(v, 3.0, 0.4, 0.3))
            .collect();
        assert_eq!(find_peaks(&y, &g2, &PeakOptions::default()).len(), 2);
        let strict = PeakOptions {
            min_area: 0.5,
            ..PeakOptions::default()
        };
        assert_eq!(find_peaks(&y, &g2, &strict).len(), 1);
    }

    #[test]
    fn flat_or_empty_input_gives_no_peaks() {
        let y = grid(10, 0.0, 1.0);
        assert!(find_peaks(&y, &[0.0; 10], &PeakOptions::default()).is_empty());
        assert!(find_peaks(&y[..2], &[1.0, 2.0], &PeakOptions::default()).is_empty());
    }
}
