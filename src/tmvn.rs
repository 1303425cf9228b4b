//! Exact sampling of a multivariate normal truncated to the non-negative
//! orthant, for the posterior uncertainty bands of a non-negative Tikhonov
//! (DRT) solution.
//!
//! The target density is
//!
//! $$ p(x) \propto \exp\big(-\tfrac12 (x - m)^\top P (x - m)\big), \qquad x_i \ge 0 \text{ for every } i, $$
//!
//! with a symmetric positive definite precision P (for a Tikhonov posterior,
//! the Hessian of the penalised least-squares objective divided by the
//! noise variance) and the unconstrained mean m.
//!
//! # Method
//! Exact Hamiltonian Monte Carlo of A. Pakman and L. Paninski, "Exact
//! Hamiltonian Monte Carlo for truncated multivariate Gaussians",
//! J. Comput. Graph. Statist. 23 (2014) 518-542.
//!
//! With the Cholesky factor P = L L', the change of variables
//! x = m + L^{-T} z whitens the target: z ~ N(0, I) restricted to the
//! polyhedron f_i' z + g_i >= 0, where f_i' is row i of L^{-T} and g_i = m_i.
//! Under the Hamiltonian H = (z'z + y'y)/2 (y the velocity) the equations
//! of motion z'' = -z have the exact solution
//!
//! $$ z(t) = a \sin t + b \cos t, \qquad b = z(0),\ a = \dot z(0). $$
//!
//! Every trajectory starts from the last point with a fresh Gaussian
//! velocity a ~ N(0, I) and runs for time pi/2. Along it, constraint i reads
//! u_i sin t + w_i cos t + g_i >= 0 with u_i = f_i' a and w_i = f_i' b, so its
//! first hitting time is found analytically. The particle moves to the
//! earliest hit j, where the velocity is reflected on the wall,
//!
//! $$ \dot z \leftarrow \dot z - 2\,\frac{f_j^\top \dot z}{\lVert f_j \rVert^2}\, f_j, $$
//!
//! and the motion continues for the time left. The end point of the
//! trajectory is the next draw; there is no accept/reject step, since the
//! dynamics are exact.
//!
//! # Implementation
//! The same motion is followed in the original coordinates, which needs no
//! z at all: x(t) = m + (x(0) - m) cos t + v sin t with the velocity
//! v = L^{-T} a ~ N(0, P^{-1}) (one triangular solve per trajectory), and the
//! reflection on wall j becomes v <- v - 2 (v_j / S_jj) S e_j with
//! S = P^{-1} = L^{-T} L^{-1}. The columns of S are the products
//! L^{-T} f_j of the constraint rows, and S_jj = |f_j|^2, so they are
//! precomputed once and a wall hit costs O(n).
//!
//! The hitting time of wall i needs no trigonometry: with s = tan(t/2),
//!
//! $$ x_i(t)\,(1 + s^2) = (2 m_i - x_i)\,s^2 + 2 v_i\,s + x_i, $$
//!
//! (x_i, v_i the values at the start of the segment), and the first wall
//! contact is the smallest positive root of this quadratic in s, solved in
//! the cancellation-free form. A segment of duration T needs
//! s <= tan(T/2) <= 1.
//!
//! Round-off: the coordinate of the wall just hit is set to exactly 0, and
//! any coordinate that round-off leaves slightly below 0 is set to 0 before
//! the next search (in these coordinates the state is x and v alone, so
//! this keeps it consistent). A coordinate at 0 counts as hitting its wall
//! at once only when its velocity points outward; a "hit" whose arrival
//! velocity round-off has turned inward (a grazing touch) is not reflected.
//! Every draw is therefore non-negative exactly. A trajectory that reaches
//! 10 000 wall hits stops where it is and keeps that (feasible) point; so
//! does one that comes to rest on a wall pulling it outward (a measure-zero
//! event that no reflection can resolve).
//!
//! # Cost
//! A trajectory costs one triangular solve (O(n^2)) for its velocity plus
//! one O(n) pass per wall hit (move, reflect, search the next hit; most
//! coordinates are ruled out by a bound without a square root). The number
//! of hits per trajectory is set by the geometry: it grows when the
//! unconstrained mean lies far outside the orthant and when neighbouring
//! coordinates are strongly anti-correlated (narrow wedges between walls in
//! the whitened space), as in weakly regularised, ill-conditioned DRT
//! posteriors, where hundreds to thousands of hits per trajectory occur.

use std::f64::consts::{FRAC_PI_2, PI};

use nalgebra::{DMatrix, DVector};
use rand::{Rng, RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;

use crate::{Error, Result};

/// Duration of one trajectory: pi/2, as in Pakman and Paninski (2014). In
/// the absence of walls, x(pi/2) = m + v is a fresh independent draw.
const TRAJECTORY_TIME: f64 = FRAC_PI_2;

/// Wall hits allowed in one trajectory before it is stopped where it is.
const MAX_WALL_HITS: usize = 10_000;

/// Largest asymmetry |P_ij - P_ji| accepted, relative to max |P_ij|.
const SYMMETRY_TOL: f64 = 1e-10;

/// A multivariate normal truncated to the non-negative orthant.
///
/// Target: density proportional to exp(-(x - m)' P (x - m) / 2) on x >= 0
/// (every coordinate).
#[derive(Debug, Clone)]
pub struct TruncatedNormal {
    n: usize,
    /// The unconstrained mean m.
    mean: Vec<f64>,
    /// Cholesky factor L of P (P = L L'), column-major: column i, entries
    /// `i * n + k` for k >= i, is row i of L'.
    chol: Vec<f64>,
    /// S = P^{-1}, column-major (column j is S e_j = L^{-T} f_j).
    cov: Vec<f64>,
}

fn data_err(msg: String) -> Error {
    Error::Data(format!("truncated normal: {msg}"))
}

impl TruncatedNormal {
    /// Fails (crate::Error::Data with a clear message) when P is not
    /// square, sizes differ, or P is not positive definite (Cholesky fails)
    /// or holds non-finite values. P must be symmetric up to round-off
    /// (relative asymmetry at most 1e-10); its symmetric part is used.
    pub fn new(precision: DMatrix<f64>, mean: DVector<f64>) -> Result<Self> {
        let (rows, cols) = precision.shape();
        if rows != cols {
            return Err(data_err(format!(
                "the precision matrix is {rows} x {cols}, not square"
            )));
        }
        let n = rows;
        if n == 0 {
            return Err(data_err("the precision matrix is empty".into()));
        }
        if mean.len() != n {
            return Err(data_err(format!(
                "the mean has {} entries but the precision matrix is {n} x {n}",
                mean.len()
            )));
        }
        if let Some(k) = precision.iter().position(|v| !v.is_finite()) {
            return Err(data_err(format!(
                "the precision matrix holds a non-finite value ({}) at row {}, column {}",
                precision[k],
                k % n,
                k / n
            )));
        }
        if let Some(i) = mean.iter().position(|v| !v.is_finite()) {
            return Err(data_err(format!(
                "the mean holds a non-finite value ({}) at index {i}",
                mean[i]
            )));
        }
        let scale = precision.amax();
        for j in 0..n {
            for i in j + 1..n {
                let (a, b) = (precision[(i, j)], precision[(j, i)]);
                if (a - b).abs() > SYMMETRY_TOL * scale {
                    return Err(data_err(format!(
                        "the precision matrix is not symmetric: P[{i},{j}] = {a}, P[{j},{i}] = {b}"
                    )));
                }
            }
        }
        let sym = (&precision + precision.transpose()) * 0.5;
        let not_pd = || {
            data_err(
                "the precision matrix is not positive definite (its Cholesky factorisation fails)"
                    .into(),
            )
        };
        let chol = sym.cholesky().ok_or_else(not_pd)?;
        let l = chol.l();
        let cov = chol.inverse();
        if l.iter().chain(cov.iter()).any(|v| !v.is_finite())
            || (0..n).any(|i| !(l[(i, i)] > 0.0 && cov[(i, i)] > 0.0))
        {
            return Err(not_pd());
        }
        Ok(Self {
            n,
            mean: mean.as_slice().to_vec(),
            chol: l.as_slice().to_vec(),
            cov: cov.as_slice().to_vec(),
        })
    }

    /// Number of coordinates n.
    pub fn dim(&self) -> usize {
        self.n
    }

    /// `draws` samples after `burn_in` discarded trajectories, from `chains`
    /// independent chains run in parallel with rayon, each started at
    /// `start` (must be feasible: all >= 0; exact zeros are allowed). Chain c
    /// uses a ChaCha8 generator seeded from `seed` on stream c. Draws are
    /// returned chain by chain in chain order, so the result is identical
    /// for any number of rayon threads. `draws` is split as evenly as
    /// possible across chains (the first `draws % chains` chains take one
    /// more); a chain with no draws is not run. Every returned coordinate is
    /// non-negative.
    ///
    /// Fails (crate::Error::Data) when `start` has the wrong length, holds a
    /// negative or non-finite value, or `chains` is 0.
    pub fn sample(
        &self,
        start: &[f64],
        draws: usize,
        burn_in: usize,
        chains: usize,
        seed: u64,
    ) -> Result<Vec<Vec<f64>>> {
        self.sample_counted(start, draws, burn_in, chains, seed)
            .map(|(d, _)| d)
    }

    /// [`Self::sample`] that also returns how many trajectories were stopped
    /// early (wall-hit cap or a particle at rest on a wall).
    fn sample_counted(
        &self,
        start: &[f64],
        draws: usize,
        burn_in: usize,
        chains: usize,
        seed: u64,
    ) -> Result<(Vec<Vec<f64>>, usize)> {
        if start.len() != self.n {
            return Err(data_err(format!(
                "the start point has {} entries, the distribution has {} coordinates",
                start.len(),
                self.n
            )));
        }
        if let Some(i) = start.iter().position(|v| !(v.is_finite() && *v >= 0.0)) {
            return Err(data_err(format!(
                "the start point must be finite and >= 0 in every coordinate, entry {i} is {}",
                start[i]
            )));
        }
        if chains == 0 {
            return Err(data_err("at least one chain is needed".into()));
        }
        // -0.0 becomes +0.0.
        let x0: Vec<f64> = start
            .iter()
            .map(|&v| if v == 0.0 { 0.0 } else { v })
            .collect();
        let per_chain: Vec<usize> = (0..chains)
            .map(|c| draws / chains + usize::from(c < draws % chains))
            .collect();
        let runs: Vec<(Vec<Vec<f64>>, usize)> = per_chain
            .par_iter()
            .enumerate()
            .map(|(c, &k)| self.run_chain(&x0, k, burn_in, seed, c as u64))
            .collect();
        let stopped = runs.iter().map(|r| r.1).sum();
        let out = runs.into_iter().flat_map(|r| r.0).collect();
        Ok((out, stopped))
    }

    /// One chain: `burn_in` discarded trajectories, then `draws` kept.
    fn run_chain(
        &self,
        start: &[f64],
        draws: usize,
        burn_in: usize,
        seed: u64,
        stream: u64,
    ) -> (Vec<Vec<f64>>, usize) {
        if draws == 0 {
            return (Vec::new(), 0);
        }
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        rng.set_stream(stream);
        let mut x = start.to_vec();
        let mut v = vec![0.0; self.n];
        let mut white = vec![0.0; self.n];
        let mut stopped = 0;
        let mut out = Vec::with_capacity(draws);
        for k in 0..burn_in + draws {
            fill_normal(&mut rng, &mut white);
            self.velocity(&white, &mut v);
            if !self.trajectory(&mut x, &mut v) {
                stopped += 1;
            }
            if k >= burn_in {
                out.push(x.clone());
            }
        }
        (out, stopped)
    }

    /// v = L^{-T} a (back substitution on L'), so v ~ N(0, P^{-1}) for
    /// a ~ N(0, I).
    fn velocity(&self, a: &[f64], v: &mut [f64]) {
        let n = self.n;
        for i in (0..n).rev() {
            let col = &self.chol[i * n..(i + 1) * n];
            let s: f64 = col[i + 1..]
                .iter()
                .zip(&v[i + 1..])
                .map(|(l, y)| l * y)
                .sum();
            v[i] = (a[i] - s) / col[i];
        }
    }

    /// One trajectory of duration pi/2 from (x, v); x ends at the new draw.
    /// Returns false when it was stopped early (cap or at rest on a wall).
    ///
    /// A wall hit costs one pass over the coordinates, which moves them to
    /// the hit, reflects the velocity and searches the next hit.
    fn trajectory(&self, x: &mut [f64], v: &mut [f64]) -> bool {
        let n = self.n;
        let (x, v, m) = (&mut x[..n], &mut v[..n], &self.mean[..n]);
        let mut remaining = TRAJECTORY_TIME;
        let mut s_max = (0.5 * remaining).tan();
        let mut best_s = f64::INFINITY;
        let mut best_j = usize::MAX;
        for i in 0..n {
            x[i] = onto_orthant(x[i]);
            let s = first_crossing(x[i], v[i], m[i], best_s.min(s_max));
            if s < best_s {
                best_s = s;
                best_j = i;
            }
        }
        let mut hits = 0usize;
        loop {
            if best_s > s_max {
                let (sin, cos) = remaining.sin_cos();
                advance(x, v, m, cos, sin);
                return true;
            }
            if hits == MAX_WALL_HITS {
                return false;
            }
            hits += 1;
            let (s, j) = (best_s, best_j);
            let d = 1.0 + s * s;
            let (cos, sin) = ((1.0 - s * s) / d, 2.0 * s / d);
            remaining = (remaining - 2.0 * s.atan()).max(0.0);
            s_max = (0.5 * remaining).tan();
            // Velocity of coordinate j on arrival at its wall: negative,
            // unless round-off turned a grazing touch into a hit.
            let vj = v[j] * cos - (x[j] - m[j]) * sin;
            if vj == 0.0 {
                // At rest on a wall that pulls outward: no reflection can
                // turn it back (a measure-zero event).
                advance(x, v, m, cos, sin);
                x[j] = 0.0;
                return false;
            }
            let coef = if vj < 0.0 {
                2.0 * vj / self.cov[j * n + j]
            } else {
                0.0
            };
            let col = &self.cov[j * n..(j + 1) * n];
            best_s = f64::INFINITY;
            best_j = usize::MAX;
            for i in 0..n {
                let dx = x[i] - m[i];
                let mut xi = m[i] + dx * cos + v[i] * sin;
                let mut vi = v[i] * cos - dx * sin - coef * col[i];
                if i == j {
                    xi = 0.0;
                    vi = vj.abs();
                } else {
                    xi = onto_orthant(xi);
                }
                x[i] = xi;
                v[i] = vi;
                let s = first_crossing(xi, vi, m[i], best_s.min(s_max));
                if s < best_s {
                    best_s = s;
                    best_j = i;
                }
            }
        }
    }
}

/// Harmonic motion about m for a time t given as (cos t, sin t); round-off
/// below 0 is set to 0.
fn advance(x: &mut [f64], v: &mut [f64], m: &[f64], cos: f64, sin: f64) {
    for ((xi, vi), mi) in x.iter_mut().zip(v.iter_mut()).zip(m) {
        let dx = *xi - mi;
        *xi = mi + dx * cos + *vi * sin;
        *vi = *vi * cos - dx * sin;
        *xi = onto_orthant(*xi);
    }
}

/// x when positive, else +0.0 (round-off below the wall, and -0.0).
fn onto_orthant(x: f64) -> f64 {
    if x > 0.0 { x } else { 0.0 }
}

/// First wall contact of x(t) = c + (x0 - c) cos t + v0 sin t, as
/// s = tan(t/2) (t in [0, pi)), for x0 >= 0. Returns infinity when there is
/// no contact with s <= `lim`; a contact beyond `lim` may be returned too.
/// With s, x(t) (1 + s^2) = (2c - x0) s^2 + 2 v0 s + x0 =: Q(s).
fn first_crossing(x0: f64, v0: f64, c: f64, lim: f64) -> f64 {
    if x0 == 0.0 {
        // On the wall: leaving at once when moving outward (or at rest with
        // the pull towards m pointing outward); otherwise the other root of
        // 2 s (c s + v0) = 0, positive only when c < 0.
        if v0 < 0.0 || (v0 == 0.0 && c < 0.0) {
            return 0.0;
        }
        return if c < 0.0 { -v0 / c } else { f64::INFINITY };
    }
    let a = 2.0 * c - x0;
    // On [0, lim], Q(s) >= x0 + 2 min(v0, 0) lim + min(a, 0) lim^2: no
    // root there when that bound is positive (the common case, no sqrt).
    if x0 + (2.0 * v0.min(0.0) + a.min(0.0) * lim) * lim > 0.0 {
        return f64::INFINITY;
    }
    let disc = v0 * v0 - a * x0;
    if disc < 0.0 {
        return f64::INFINITY;
    }
    // Roots q / a and x0 / q of Q (no cancellation).
    let q = -(v0 + disc.sqrt().copysign(v0));
    let mut best = f64::INFINITY;
    for r in [q / a, x0 / q] {
        if r > 0.0 && r < best {
            best = r;
        }
    }
    best
}

/// Fills `out` with standard normal deviates by the Box-Muller transform
/// (G. E. P. Box, M. E. Muller (1958), Ann. Math. Statist. 29(2), 610-611),
/// using both deviates of each pair.
fn fill_normal(rng: &mut impl Rng, out: &mut [f64]) {
    for pair in out.chunks_mut(2) {
        let u1: f64 = 1.0 - rng.random::<f64>();
        let u2: f64 = rng.random::<f64>();
        let r = (-2.0 * u1.ln()).sqrt();
        let (s, c) = (2.0 * PI * u2).sin_cos();
        pair[0] = r * c;
        if let Some(p) = pair.get_mut(1) {
            *p = r * s;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Standard normal density.
    fn phi(x: f64) -> f64 {
        (-0.5 * x * x).exp() / (2.0 * PI).sqrt()
    }

    /// erfc(x) for x >= 0 by M. Abramowitz, I. A. Stegun, Handbook of
    /// Mathematical Functions (1964), formula 7.1.26 (|error| <= 1.5e-7).
    fn erfc_pos(x: f64) -> f64 {
        let t = 1.0 / (1.0 + 0.327_591_1 * x);
        let poly = t
            * (0.254_829_592
                + t * (-0.284_496_736
                    + t * (1.421_413_741 + t * (-1.453_152_027 + t * 1.061_405_429))));
        poly * (-x * x).exp()
    }

    /// Upper tail 1 - Phi(x) of the standard normal.
    fn upper_tail(x: f64) -> f64 {
        let e = 0.5 * erfc_pos(x.abs() / 2f64.sqrt());
        if x >= 0.0 { e } else { 1.0 - e }
    }

    fn mean_of(draws: &[Vec<f64>], i: usize) -> f64 {
        draws.iter().map(|d| d[i]).sum::<f64>() / draws.len() as f64
    }

    fn cov_of(draws: &[Vec<f64>], i: usize, j: usize) -> f64 {
        let (mi, mj) = (mean_of(draws, i), mean_of(draws, j));
        draws.iter().map(|d| (d[i] - mi) * (d[j] - mj)).sum::<f64>() / (draws.len() - 1) as f64
    }

    /// Standard error of the mean of `stat` over the draws, by batch means:
    /// the spread of the means of consecutive batches of `batch` draws,
    /// divided by the square root of their number (J. M. Flegal, M. Haran,
    /// G. L. Jones (2008), Statist. Sci. 23(2), 250-260). Each chain's
    /// length must be a multiple of `batch`, so no batch spans two chains.
    fn batch_se(draws: &[Vec<f64>], batch: usize, stat: impl Fn(&[Vec<f64>]) -> f64) -> f64 {
        let means: Vec<f64> = draws.chunks_exact(batch).map(&stat).collect();
        let k = means.len() as f64;
        let mean = means.iter().sum::<f64>() / k;
        let var = means.iter().map(|b| (b - mean).powi(2)).sum::<f64>() / (k - 1.0);
        (var / k).sqrt()
    }

    fn all_feasible(draws: &[Vec<f64>]) -> bool {
        draws.iter().flatten().all(|v| *v >= 0.0)
    }

    #[test]
    fn tail_helper_matches_known_quantiles() {
        // 1 - Phi(1.959964) = 0.025 and 1 - Phi(-1) = 0.841345 (standard
        // normal table, from memory).
        assert!((upper_tail(1.959_964) - 0.025).abs() < 1e-6);
        assert!((upper_tail(-1.0) - 0.841_345).abs() < 1e-6);
    }

    #[test]
    fn one_dimension_matches_closed_form() {
        // Mean m + s lambda and variance s^2 (1 + a lambda - lambda^2) with
        // a = -m/s, lambda = phi(a) / (1 - Phi(a)): N. L. Johnson, S. Kotz,
        // N. Balakrishnan, Continuous Univariate Distributions, vol. 1
        // (1994), truncated normal.
        let n_draws = 20_000; // 4 chains of 5000, 80 batches of 250
        for &(m, s, seed) in &[(1.0, 1.0, 11u64), (-1.0, 0.5, 12u64)] {
            let a: f64 = -m / s;
            let lambda = phi(a) / upper_tail(a);
            let want_mean = m + s * lambda;
            let want_var = s * s * (1.0 + a * lambda - lambda * lambda);
            let tn = TruncatedNormal::new(
                DMatrix::from_element(1, 1, 1.0 / (s * s)),
                DVector::from_element(1, m),
            )
            .unwrap();
            assert_eq!(tn.dim(), 1);
            let (d, stopped) = tn.sample_counted(&[0.0], n_draws, 20, 4, seed).unwrap();
            assert_eq!(d.len(), n_draws);
            assert_eq!(stopped, 0);
            assert!(all_feasible(&d));
            let (mean, var) = (mean_of(&d, 0), cov_of(&d, 0, 0));
            let se_mean = batch_se(&d, 250, |b| mean_of(b, 0));
            let se_var = batch_se(&d, 250, |b| cov_of(b, 0, 0));
            // The standard errors must be small for the checks to mean
            // anything: within 4 times the value for independent draws
            // (serial correlation near a wall inflates them, about 2.7
            // times for m = -1, s = 0.5).
            assert!(se_mean < 4.0 * (want_var / n_draws as f64).sqrt());
            assert!(se_var < 4.0 * want_var * (2.0 / n_draws as f64).sqrt());
            assert!(
                (mean - want_mean).abs() < 5.0 * se_mean,
                "m = {m}, s = {s}: mean {mean} against {want_mean} (se {se_mean})"
            );
            assert!(
                (var - want_var).abs() < 5.0 * se_var,
                "m = {m}, s = {s}: variance {var} against {want_var} (se {se_var})"
            );
        }
    }

    #[test]
    fn far_from_the_wall_is_the_plain_normal() {
        // With m = 50 and standard deviations near 1 the walls are out of
        // reach, so each trajectory ends at m + v with v ~ N(0, P^{-1}):
        // independent draws, whose mean and covariance must match m and
        // P^{-1} within five standard errors.
        let cov = DMatrix::from_row_slice(3, 3, &[1.0, 0.5, 0.2, 0.5, 2.0, -0.3, 0.2, -0.3, 0.5]);
        let p = cov.clone().try_inverse().unwrap();
        let p = (&p + p.transpose()) * 0.5;
        let m = DVector::from_element(3, 50.0);
        let tn = TruncatedNormal::new(p, m).unwrap();
        let n_draws = 6000;
        let (d, stopped) = tn
            .sample_counted(&[50.0, 49.0, 51.0], n_draws, 5, 3, 7)
            .unwrap();
        assert_eq!(stopped, 0);
        let nf = n_draws as f64;
        for i in 0..3 {
            let se = (cov[(i, i)] / nf).sqrt();
            let got = mean_of(&d, i);
            assert!((got - 50.0).abs() < 5.0 * se, "mean {i}: {got}");
            for j in 0..3 {
                let se = ((cov[(i, i)] * cov[(j, j)] + cov[(i, j)].powi(2)) / nf).sqrt();
                let got = cov_of(&d, i, j);
                assert!(
                    (got - cov[(i, j)]).abs() < 5.0 * se,
                    "cov[{i},{j}]: {got} against {}",
                    cov[(i, j)]
                );
            }
        }
    }

    /// Correlated 2-D case near the corner: sd 1, rho = -0.9.
    fn corner_case() -> (TruncatedNormal, [f64; 2], [[f64; 2]; 2]) {
        let rho = -0.9;
        let cov = DMatrix::from_row_slice(2, 2, &[1.0, rho, rho, 1.0]);
        let p = cov.try_inverse().unwrap();
        let p = (&p + p.transpose()) * 0.5;
        let m = [0.3, -0.2];
        let prec = [[p[(0, 0)], p[(0, 1)]], [p[(1, 0)], p[(1, 1)]]];
        let tn = TruncatedNormal::new(p, DVector::from_column_slice(&m)).unwrap();
        (tn, m, prec)
    }

    /// E[x_1], E[x_2] of the 2-D truncated density by the midpoint rule on
    /// [0, 8]^2 (the density beyond 8 is below exp(-30)).
    fn corner_reference(m: [f64; 2], p: [[f64; 2]; 2]) -> [f64; 2] {
        let k = 1600;
        let h = 8.0 / k as f64;
        let (mut z, mut s1, mut s2) = (0.0, 0.0, 0.0);
        for i in 0..k {
            let x1 = (i as f64 + 0.5) * h;
            let d1 = x1 - m[0];
            for j in 0..k {
                let x2 = (j as f64 + 0.5) * h;
                let d2 = x2 - m[1];
                let q = p[0][0] * d1 * d1 + 2.0 * p[0][1] * d1 * d2 + p[1][1] * d2 * d2;
                let w = (-0.5 * q).exp();
                z += w;
                s1 += w * x1;
                s2 += w * x2;
            }
        }
        [s1 / z, s2 / z]
    }

    #[test]
    fn correlated_corner_matches_quadrature() {
        let (tn, m, p) = corner_case();
        let want = corner_reference(m, p);
        // 4 chains of 4000, 80 batches of 200.
        let (d, stopped) = tn.sample_counted(&[0.0, 0.0], 16_000, 50, 4, 3).unwrap();
        assert_eq!(stopped, 0);
        assert!(all_feasible(&d), "a draw left the orthant");
        for (i, &w) in want.iter().enumerate() {
            let got = mean_of(&d, i);
            let se = batch_se(&d, 200, |b| mean_of(b, i));
            assert!(se < 0.01, "mean {i}: standard error {se}");
            assert!(
                (got - w).abs() < 5.0 * se,
                "mean {i}: {got} against quadrature {w} (se {se})"
            );
        }
    }

    #[test]
    fn same_seed_same_draws_for_any_thread_count() {
        let (tn, _, _) = corner_case();
        let run = |threads: usize, seed: u64| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| tn.sample(&[0.5, 0.5], 10, 5, 4, seed).unwrap())
        };
        let one = run(1, 42);
        let two = run(2, 42);
        assert_eq!(one.len(), 10);
        assert_eq!(one, two);
        assert_ne!(one, run(2, 43));
        // Chain order: 10 draws over 4 chains are 3, 3, 2, 2; chain 0 alone
        // gives the first three.
        let first = tn.sample(&[0.5, 0.5], 3, 5, 1, 42).unwrap();
        assert_eq!(first[..], one[..3]);
        assert_ne!(one[3], first[0]);
    }

    #[test]
    fn bad_input_is_an_error() {
        let m2 = DVector::from_element(2, 1.0);
        let msg = |r: Result<TruncatedNormal>| match r {
            Err(Error::Data(s)) => s,
            other => panic!("expected a data error, got {other:?}"),
        };
        let indefinite = DMatrix::from_row_slice(2, 2, &[1.0, 2.0, 2.0, 1.0]);
        assert!(msg(TruncatedNormal::new(indefinite, m2.clone())).contains("positive definite"));
        let rect = DMatrix::from_element(2, 3, 1.0);
        assert!(msg(TruncatedNormal::new(rect, m2.clone())).contains("not square"));
        let eye3 = DMatrix::identity(3, 3);
        assert!(msg(TruncatedNormal::new(eye3, m2.clone())).contains("mean has 2"));
        let mut nan = DMatrix::identity(2, 2);
        nan[(1, 0)] = f64::NAN;
        assert!(msg(TruncatedNormal::new(nan, m2.clone())).contains("non-finite"));
        let skew = DMatrix::from_row_slice(2, 2, &[2.0, 0.5, -0.5, 2.0]);
        assert!(msg(TruncatedNormal::new(skew, m2.clone())).contains("not symmetric"));

        let tn = TruncatedNormal::new(DMatrix::identity(2, 2), m2).unwrap();
        for (start, chains) in [
            (&[1.0, -1e-3][..], 1),
            (&[1.0][..], 1),
            (&[1.0, f64::NAN][..], 1),
            (&[1.0, 1.0][..], 0),
        ] {
            match tn.sample(start, 5, 0, chains, 1) {
                Err(Error::Data(s)) => assert!(s.starts_with("truncated normal:"), "{s}"),
                other => panic!("start {start:?}, chains {chains}: got {other:?}"),
            }
        }
        // Exact zeros, including -0.0, are feasible starts.
        let d = tn.sample(&[0.0, -0.0], 5, 0, 2, 1).unwrap();
        assert_eq!(d.len(), 5);
    }
}
