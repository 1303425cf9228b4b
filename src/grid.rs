//! Log-spaced grid of relaxation times and its extension past the measured band.
//!
//! The DRT is discretised on points uniformly spaced in `ln tau`. By default the
//! grid runs from one decade below `1/(2 pi f_max)` to one decade above
//! `1/(2 pi f_min)`: extending the quadrature range past the band reduces the
//! model error of the truncated Fredholm integral.
//!
//! # References
//! - P. C. Hansen, J. Hogue, G. Sander, R. Renaut, S. Popat (2013),
//!   "Kernel-based regularization for the inverse problem of the distribution of
//!   relaxation times", arXiv:1309.4498 (extension of the tau range).

use crate::{Error, Result};
use std::f64::consts::{LN_10, PI};

/// A grid uniform in `ln tau`, from `tau_min_s` to `tau_max_s` inclusive.
#[derive(Clone, Debug, PartialEq)]
pub struct TauGrid {
    ln_tau: Vec<f64>,
    step: f64,
}

impl TauGrid {
    /// Builds `n = round(decades * per_decade) + 1` points (at least 3) from
    /// `tau_min_s` to `tau_max_s`.
    ///
    /// Fails when the bounds are not positive, finite and ordered, or
    /// `per_decade` is not in `[1, 200]`.
    pub fn new(tau_min_s: f64, tau_max_s: f64, per_decade: f64) -> Result<Self> {
        if !(tau_min_s.is_finite() && tau_min_s > 0.0) {
            return Err(Error::Param {
                name: "tau-min",
                expected: "a positive time in seconds",
                value: tau_min_s,
            });
        }
        if !(tau_max_s.is_finite() && tau_max_s > tau_min_s) {
            return Err(Error::Param {
                name: "tau-max",
                expected: "a time in seconds greater than tau-min",
                value: tau_max_s,
            });
        }
        if !(per_decade.is_finite() && (1.0..=200.0).contains(&per_decade)) {
            return Err(Error::Param {
                name: "per-decade",
                expected: "between 1 and 200 points per decade",
                value: per_decade,
            });
        }
        let (lo, hi) = (tau_min_s.ln(), tau_max_s.ln());
        let decades = (hi - lo) / LN_10;
        let n = ((decades * per_decade).round() as usize + 1).max(3);
        if n > 4001 {
            return Err(Error::Config(format!(
                "the tau grid would have {n} points (more than 4001); narrow the range or lower --per-decade"
            )));
        }
        let step = (hi - lo) / (n - 1) as f64;
        let ln_tau = (0..n).map(|i| lo + step * i as f64).collect();
        Ok(Self { ln_tau, step })
    }

    /// The default grid for a spectrum measured from `f_min_hz` to `f_max_hz`:
    /// from `1/(2 pi f_max) / 10^extend` to `10^extend / (2 pi f_min)`.
    pub fn for_band(
        f_min_hz: f64,
        f_max_hz: f64,
        per_decade: f64,
        extend_decades: f64,
    ) -> Result<Self> {
        Self::for_tau_band(
            1.0 / (2.0 * PI * f_max_hz),
            1.0 / (2.0 * PI * f_min_hz),
            per_decade,
            extend_decades,
        )
    }

    /// The grid for a band of time constants the data resolve,
    /// `[tau_lo_s, tau_hi_s]`, extended by `extend_decades` on each side:
    /// from `tau_lo_s / 10^extend` to `tau_hi_s * 10^extend`. For a step
    /// transient the band runs from the first sample after the step to the
    /// record length.
    pub fn for_tau_band(
        tau_lo_s: f64,
        tau_hi_s: f64,
        per_decade: f64,
        extend_decades: f64,
    ) -> Result<Self> {
        if !(extend_decades.is_finite() && (0.0..=4.0).contains(&extend_decades)) {
            return Err(Error::Param {
                name: "extend-decades",
                expected: "between 0 and 4 decades",
                value: extend_decades,
            });
        }
        let ext = 10f64.powf(extend_decades);
        Self::new(tau_lo_s / ext, tau_hi_s * ext, per_decade)
    }

    /// Number of grid points.
    pub fn len(&self) -> usize {
        self.ln_tau.len()
    }

    /// Always false: a grid has at least three points.
    pub fn is_empty(&self) -> bool {
        self.ln_tau.is_empty()
    }

    /// Grid points as `ln(tau / 1 s)`.
    pub fn ln_tau(&self) -> &[f64] {
        &self.ln_tau
    }

    /// Grid points in seconds.
    pub fn tau_s(&self) -> Vec<f64> {
        self.ln_tau.iter().map(|y| y.exp()).collect()
    }

    /// Spacing in `ln tau` (natural-log units).
    pub fn step(&self) -> f64 {
        self.step
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_band_extends_one_decade_each_side() {
        let g = TauGrid::for_band(1e-2, 1e6, 10.0, 1.0).unwrap();
        let tau = g.tau_s();
        let lo = 1.0 / (2.0 * PI * 1e6) / 10.0;
        let hi = 10.0 / (2.0 * PI * 1e-2);
        assert!((tau[0] / lo - 1.0).abs() < 1e-12);
        assert!((tau[g.len() - 1] / hi - 1.0).abs() < 1e-12);
        // 10 decades at 10 per decade
        assert_eq!(g.len(), 101);
        assert!((g.step() - LN_10 / 10.0).abs() < 1e-12);
    }

    #[test]
    fn scaling_frequencies_shifts_the_grid() {
        let a = TauGrid::for_band(1.0, 1e4, 7.0, 1.0).unwrap();
        let b = TauGrid::for_band(3.0, 3e4, 7.0, 1.0).unwrap();
        assert_eq!(a.len(), b.len());
        for (x, y) in a.ln_tau().iter().zip(b.ln_tau()) {
            assert!((x - y - 3f64.ln()).abs() < 1e-12);
        }
    }

    #[test]
    fn rejects_bad_bounds() {
        assert!(TauGrid::new(0.0, 1.0, 10.0).is_err());
        assert!(TauGrid::new(1.0, 0.5, 10.0).is_err());
        assert!(TauGrid::new(1e-3, 1.0, 0.5).is_err());
        assert!(TauGrid::new(1e-3, 1.0, f64::NAN).is_err());
    }
}
