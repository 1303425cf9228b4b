//! Uncertainty of a distribution: credible bands on gamma, intervals and a
//! confidence for every peak, and how many processes the data support.
//!
//! # The posterior
//!
//! The regularised problem `min_{x >= 0} ||A x - b||^2 + lambda x'Mx` is the
//! maximum of a posterior: a Gaussian likelihood with noise variance `s^2`
//! and a Gaussian prior `exp(-lambda x'Mx / (2 s^2))`, truncated to `x >= 0`
//! (G. Wahba, J. R. Statist. Soc. B 40, 364-372, 1978, for the Bayesian
//! reading of the penalty; J. Effat and F. Ciucci, Electrochim. Acta 247,
//! 1117-1129, 2017, for the truncated posterior of the DRT; from memory).
//! Its density is proportional to
//!
//! ```text
//! exp(-(x - m)' P (x - m) / 2) on x >= 0,   P = (A'A + lambda M) / s^2,
//! m = (A'A + lambda M)^-1 A'b
//! ```
//!
//! with `s^2 = ||A x - b||^2 / (rows - dof)` (Wahba's estimate). With the
//! adaptive penalty, `lambda M` is its last weighted penalty. The posterior
//! is sampled exactly by Hamiltonian Monte Carlo for truncated Gaussians
//! ([`crate::tmvn`]), in parallel chains with fixed seeds: the same draws
//! for any number of threads.
//!
//! # What is reported
//!
//! - `gamma_lo`, `gamma_hi`: the Bayesian interval of G. Wahba (J. R.
//!   Statist. Soc. B 45, 133-150, 1983) around the estimate,
//!   `gamma(tau) -/+ z sqrt(s^2 b(tau)' (A'A + lambda M)^-1 b(tau))`, with
//!   `b(tau)` the basis functions at tau and `z` the normal quantile of the
//!   level (1.645 for 90 %), the lower end clipped at zero. Its coverage
//!   of the true distribution, averaged over tau, is close to the level
//!   when lambda balances bias and variance (D. Nychka, J. Am. Statist.
//!   Assoc. 83, 1134-1143, 1988): the posterior variance stands in for the
//!   bias of the regularised estimate too. Measured: the 90 % interval
//!   covers the analytical distribution at 0.899 of the tau points inside
//!   the measured band over 100 realisations at 0.5 % noise
//!   (tests/bands.rs), 0.86 and 0.87 over 20 at 0.1 and 1 %
//!   (docs/uncertainty.md). The quantiles of the truncated posterior's draws
//!   themselves covered only 48 %: in flat stretches a curvature prior
//!   leaves offsets unpenalised, so the draws float above zero where the
//!   estimate and the truth are zero, and at peaks they are as narrow as
//!   the posterior, blind to the bias.
//! - For each peak of the estimate, over its region (between the minima
//!   that bound it): its area `R` with the same kind of interval (`R` is a
//!   linear functional of the coefficients), and from the draws of the
//!   truncated posterior the fraction of draws with a peak in the region
//!   (`confidence`) and the quantiles of that peak's tau.
//! - The distribution of the number of peaks per draw (the peak finder
//!   with the estimate's thresholds), and the number of the estimate's
//!   peaks whose confidence reaches [`BandOptions::support`].
//! - `resolution_decades`: the smallest separation of two equal narrow
//!   processes that the noise allows, `pi^2 / ln(1/noise)` in ln tau: the
//!   impedance and Laplace kernels damp a component of frequency `nu`
//!   (conjugate to ln tau) like `exp(-pi |nu|)`, so at a relative noise
//!   level `e` only `|nu| < ln(1/e) / pi` survive, and two lines closer
//!   than half a period of the highest of them, `pi / nu_max`, merge
//!   (J. G. McWhirter and E. R. Pike, J. Phys. A 11, 1729-1745, 1978; from
//!   memory). On the resolution ladder (docs/resolution-ladder.md): 0.62
//!   decade at 0.1 % noise (pairs resolved from 0.7 decade), 0.93 decade
//!   at 1 % (from 1 decade, mostly).

use rayon::prelude::*;

use super::plan::PosteriorSource;
use crate::peaks::{Peak, PeakOptions, find_peaks};
use crate::tmvn::TruncatedNormal;

/// Settings of the uncertainty bands.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BandOptions {
    /// Draws kept, over all chains.
    pub draws: usize,
    /// Trajectories discarded at the start of each chain.
    pub burn_in: usize,
    /// Independent chains (run in parallel).
    pub chains: usize,
    /// Seed of the first chain; chain `c` uses stream `c`.
    pub seed: u64,
    /// Probability inside the band (0.9: from the 5 % to the 95 % quantile).
    pub level: f64,
    /// A peak is supported when at least this fraction of draws shows it.
    pub support: f64,
}

impl Default for BandOptions {
    /// 400 draws in 4 chains after 50 discarded trajectories each, seed 1,
    /// a 90 % band, support 0.9.
    fn default() -> Self {
        Self {
            draws: 400,
            burn_in: 50,
            chains: 4,
            seed: 1,
            level: 0.9,
            support: 0.9,
        }
    }
}

/// The interval of one peak of the estimate.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct PeakBand {
    /// Lower quantile of the draws' peak tau in the region (s).
    pub tau_lo_s: f64,
    /// Upper quantile of the draws' peak tau in the region (s).
    pub tau_hi_s: f64,
    /// Lower end of the interval of the area over the region (the
    /// distribution's unit): the estimate's area minus z times its
    /// posterior standard deviation, at least zero.
    pub r_lo: f64,
    /// Upper end: the area plus z times its standard deviation.
    pub r_hi: f64,
    /// Fraction of draws with a peak in the region.
    pub confidence: f64,
}

/// The bands of a distribution.
#[derive(Clone, Debug)]
pub struct Bands {
    /// The probability inside the band.
    pub level: f64,
    /// Lower band of gamma at every output point.
    pub gamma_lo: Vec<f64>,
    /// Upper band of gamma at every output point.
    pub gamma_hi: Vec<f64>,
    /// One per peak of the estimate, in the same order.
    pub peaks: Vec<PeakBand>,
    /// `(count, probability)`: how often a draw has that many peaks.
    pub count_probability: Vec<(usize, f64)>,
    /// Peaks of the estimate with a confidence of at least `support`.
    pub supported: usize,
    /// The confidence a supported peak needs.
    pub support: f64,
    /// Smallest resolvable separation of two equal processes (decades).
    pub resolution_decades: f64,
    /// Draws used.
    pub draws: usize,
}

/// The `q` quantile of `v` (sorted in place), by linear interpolation.
fn quantile(v: &mut [f64], q: f64) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(f64::total_cmp);
    let h = q.clamp(0.0, 1.0) * (v.len() - 1) as f64;
    let (i, f) = (h.floor() as usize, h - h.floor());
    if i + 1 < v.len() {
        v[i] + f * (v[i + 1] - v[i])
    } else {
        v[i]
    }
}

/// Trapezoid integral of `g` over `ln_tau` between two ln tau values.
fn area_between(ln_tau: &[f64], g: &[f64], lo: f64, hi: f64) -> f64 {
    ln_tau
        .windows(2)
        .zip(g.windows(2))
        .filter(|(t, _)| t[0] >= lo - 1e-12 && t[1] <= hi + 1e-12)
        .map(|(t, y)| 0.5 * (y[0] + y[1]) * (t[1] - t[0]))
        .sum()
}

/// The standard normal quantile of probability `p` (0 < p < 1), by
/// bisection on the distribution function (A&S 26.2.17 for the normal
/// tail, absolute error below 7.5e-8).
pub fn normal_quantile(p: f64) -> f64 {
    let cdf = |x: f64| {
        let t = 1.0 / (1.0 + 0.231_641_9 * x.abs());
        let poly = t
            * (0.319_381_530
                + t * (-0.356_563_782
                    + t * (1.781_477_937 + t * (-1.821_255_978 + t * 1.330_274_429))));
        let tail = (-0.5 * x * x).exp() / (2.0 * std::f64::consts::PI).sqrt() * poly;
        if x >= 0.0 { 1.0 - tail } else { tail }
    };
    let (mut lo, mut hi) = (-10.0, 10.0);
    for _ in 0..80 {
        let mid = 0.5 * (lo + hi);
        if cdf(mid) < p {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// `pi^2 / ln(1/noise)` in decades (see the module documentation); the
/// noise level is clamped to 1e-12..0.5.
pub fn resolution_decades(noise_rel: f64) -> f64 {
    let e = noise_rel.clamp(1e-12, 0.5);
    std::f64::consts::PI.powi(2) / (1.0 / e).ln() / std::f64::consts::LN_10
}

/// Samples the posterior of `src` and summarises it (see the module
/// documentation). `n_gamma` leading unknowns are the basis coefficients;
/// `scale` turns them into the distribution's unit; `evaluate` samples a
/// coefficient vector on `ln_tau`; `peaks` are the estimate's, found with
/// `peak_opts`; `noise_rel` is the fit's relative residual (the noise
/// level for the resolution).
#[allow(clippy::too_many_arguments)]
pub(crate) fn sample(
    src: &PosteriorSource,
    n_gamma: usize,
    scale: f64,
    evaluate: &(dyn Fn(&[f64]) -> Vec<f64> + Sync),
    ln_tau: &[f64],
    peaks: &[Peak],
    peak_opts: &PeakOptions,
    noise_rel: f64,
    opts: &BandOptions,
) -> Result<Bands, String> {
    let rows = src.problem.nrows() as f64;
    let s2 = src.residual_sq / (rows - src.dof).max(1.0);
    if !(s2.is_finite() && s2 > 0.0) {
        return Err("the fit has no residual to estimate the noise from".into());
    }
    let q = src.problem.normal_equations(src.lambda).0;
    let atb = nalgebra::DVector::from_column_slice(src.problem.normal_rhs());
    let n = q.nrows();
    // The unconstrained mean; a tiny ridge keeps a semidefinite penalty (the
    // adaptive one has none on the series terms) factorable.
    let jitter = 1e-12 * (0..n).map(|i| q[(i, i)]).sum::<f64>() / n.max(1) as f64;
    let mut qj = q.clone();
    for i in 0..n {
        qj[(i, i)] += jitter;
    }
    let chol = qj
        .clone()
        .cholesky()
        .ok_or("the posterior precision is not positive definite")?;
    let mean = chol.solve(&atb);
    let target = TruncatedNormal::new(qj / s2, mean).map_err(|e| e.to_string())?;
    let start: Vec<f64> = src.x.iter().map(|v| v.max(0.0)).collect();
    let draws = target
        .sample(&start, opts.draws, opts.burn_in, opts.chains, opts.seed)
        .map_err(|e| e.to_string())?;
    // The peaks of every draw.
    let drawn: Vec<Vec<Peak>> = draws
        .par_iter()
        .map(|x| {
            let coeffs: Vec<f64> = x[..n_gamma].iter().map(|v| v * scale).collect();
            find_peaks(ln_tau, &evaluate(&coeffs), peak_opts)
        })
        .collect();
    let k = drawn.len();
    let (lo_q, hi_q) = ((1.0 - opts.level) / 2.0, (1.0 + opts.level) / 2.0);
    let z = normal_quantile(hi_q);
    // The basis functions at the output points, scaled to the
    // distribution's unit: column j is gamma of the unit coefficient j.
    let points = ln_tau.len();
    let basis: Vec<Vec<f64>> = (0..n_gamma)
        .map(|j| {
            let mut e = vec![0.0; n_gamma];
            e[j] = scale;
            evaluate(&e)
        })
        .collect();
    let b = nalgebra::DMatrix::from_fn(points, n_gamma, |i, j| basis[j][i]);
    let cov = chol.inverse().view((0, 0), (n_gamma, n_gamma)).into_owned() * s2;
    let estimate_coeffs: Vec<f64> = src.x[..n_gamma].iter().map(|v| v * scale).collect();
    let estimate = evaluate(&estimate_coeffs);
    let bc = &b * &cov;
    let (mut gamma_lo, mut gamma_hi) = (Vec::with_capacity(points), Vec::with_capacity(points));
    for (i, g) in estimate.iter().enumerate() {
        let sd = bc.row(i).dot(&b.row(i)).max(0.0).sqrt();
        gamma_lo.push((g - z * sd).max(0.0));
        gamma_hi.push(g + z * sd);
    }
    let peak_bands: Vec<PeakBand> = peaks
        .iter()
        .map(|p| {
            let (lo, hi) = (p.tau_lo_s.ln(), p.tau_hi_s.ln());
            // The area over the region as weights on the output points
            // (trapezoid rule), then on the coefficients.
            let mut w = nalgebra::DVector::zeros(points);
            for i in 0..points.saturating_sub(1) {
                if ln_tau[i] >= lo - 1e-12 && ln_tau[i + 1] <= hi + 1e-12 {
                    let h = 0.5 * (ln_tau[i + 1] - ln_tau[i]);
                    w[i] += h;
                    w[i + 1] += h;
                }
            }
            let wc = b.transpose() * &w;
            let r_sd = (wc.dot(&(&cov * &wc))).max(0.0).sqrt();
            let r = area_between(ln_tau, &estimate, lo, hi);
            let mut taus: Vec<f64> = drawn
                .iter()
                .filter_map(|d| {
                    d.iter()
                        .filter(|q| (lo..=hi).contains(&q.tau_s.ln()))
                        .max_by(|a, b| a.height.total_cmp(&b.height))
                        .map(|q| q.tau_s)
                })
                .collect();
            let confidence = taus.len() as f64 / k.max(1) as f64;
            PeakBand {
                tau_lo_s: quantile(&mut taus, lo_q),
                tau_hi_s: quantile(&mut taus, hi_q),
                r_lo: (r - z * r_sd).max(0.0),
                r_hi: r + z * r_sd,
                confidence,
            }
        })
        .collect();
    let mut counts = std::collections::BTreeMap::new();
    for d in &drawn {
        *counts.entry(d.len()).or_insert(0usize) += 1;
    }
    let count_probability = counts
        .into_iter()
        .map(|(c, n)| (c, n as f64 / k.max(1) as f64))
        .collect();
    let supported = peak_bands
        .iter()
        .filter(|b| b.confidence >= opts.support)
        .count();
    Ok(Bands {
        level: opts.level,
        gamma_lo,
        gamma_hi,
        peaks: peak_bands,
        count_probability,
        supported,
        support: opts.support,
        resolution_decades: resolution_decades(noise_rel),
        draws: k,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantiles_interpolate() {
        let mut v = vec![3.0, 1.0, 2.0, 4.0, 5.0];
        assert_eq!(quantile(&mut v, 0.5), 3.0);
        assert_eq!(quantile(&mut v, 0.0), 1.0);
        assert_eq!(quantile(&mut v, 1.0), 5.0);
        assert!((quantile(&mut v, 0.1) - 1.4).abs() < 1e-12);
    }

    /// Standard normal quantiles (A&S table 26.1): 1.6449 at 0.95, 1.9600
    /// at 0.975, 0 at 0.5.
    #[test]
    fn normal_quantiles() {
        assert!((normal_quantile(0.95) - 1.644_854).abs() < 1e-5);
        assert!((normal_quantile(0.975) - 1.959_964).abs() < 1e-5);
        assert!(normal_quantile(0.5).abs() < 1e-6);
        assert!((normal_quantile(0.05) + 1.644_854).abs() < 1e-5);
    }

    /// pi^2 / ln(1000) / ln(10) = 0.620 decade at 0.1 % noise, 0.931 at 1 %.
    #[test]
    fn resolution_follows_the_log_of_the_noise() {
        assert!((resolution_decades(1e-3) - 0.6204).abs() < 1e-3);
        assert!((resolution_decades(1e-2) - 0.9306).abs() < 1e-3);
    }
}
