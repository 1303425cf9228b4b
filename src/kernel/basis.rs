//! Basis functions for gamma(ln tau) and their exact penalty Gram matrices.
//!
//! gamma(y) = sum_j x_j phi_j(y), y = ln tau, with one basis function centred on
//! each grid point `y_j`:
//!
//! - **Gaussian radial basis functions** phi_j(y) = exp(-(eps (y - y_j))^2), the
//!   discretisation of Wan, Saccoccio, Chen, Ciucci (2015), "Influence of the
//!   discretization methods on the distribution of relaxation times
//!   deconvolution: implementing radial basis functions with DRTtools",
//!   Electrochim. Acta 184, 483-499. The width is tied to the grid spacing:
//!   the full width at half maximum is [`GAUSSIAN_FWHM_STEPS`] grid steps, so
//!   eps = 2 sqrt(ln 2) / (FWHM).
//! - **Piecewise-linear hat functions** phi_j(y) = max(0, 1 - |y - y_j| / dy).
//!
//! Both are translates of one shape on a uniform grid, so the penalty Gram
//! matrix depends only on `y_i - y_j`, and kernel quadrature can use one set of
//! offsets for every column.

use super::quadrature::gauss_legendre;
use crate::grid::TauGrid;
use crate::linalg::Matrix;
use crate::{Error, Result};
use nalgebra::DMatrix;
use std::f64::consts::PI;

/// Full width at half maximum of a Gaussian basis function, in grid steps.
///
/// Chosen so that neighbouring functions overlap enough to represent a smooth
/// DRT without visible scalloping, while a single Voigt line is still drawn no
/// wider than 0.15 decade at 10 points per decade (our choice).
pub const GAUSSIAN_FWHM_STEPS: f64 = 1.5;

/// The family of basis functions.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum BasisKind {
    /// Gaussian radial basis functions (default).
    Gaussian,
    /// Piecewise-linear hat functions.
    Hat,
}

impl std::fmt::Display for BasisKind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            BasisKind::Gaussian => "gaussian",
            BasisKind::Hat => "hat",
        })
    }
}

/// A basis on a [`TauGrid`].
#[derive(Clone, Debug)]
pub struct Basis {
    kind: BasisKind,
    centers: Vec<f64>,
    step: f64,
    eps: f64,
}

impl Basis {
    /// One basis function per grid point.
    pub fn new(kind: BasisKind, grid: &TauGrid) -> Self {
        let step = grid.step();
        let eps = 2.0 * 2f64.ln().sqrt() / (GAUSSIAN_FWHM_STEPS * step);
        Self {
            kind,
            centers: grid.ln_tau().to_vec(),
            step,
            eps,
        }
    }

    /// The basis family.
    pub fn kind(&self) -> BasisKind {
        self.kind
    }

    /// Number of basis functions.
    pub fn len(&self) -> usize {
        self.centers.len()
    }

    /// True when there are no basis functions (never for a valid grid).
    pub fn is_empty(&self) -> bool {
        self.centers.is_empty()
    }

    /// Centres `y_j = ln tau_j`.
    pub fn centers(&self) -> &[f64] {
        &self.centers
    }

    /// Grid spacing in `ln tau`.
    pub fn step(&self) -> f64 {
        self.step
    }

    /// Gaussian shape parameter `eps` (per unit `ln tau`).
    pub fn eps(&self) -> f64 {
        self.eps
    }

    /// phi(u) for an offset `u = y - y_j`.
    pub fn shape(&self, u: f64) -> f64 {
        match self.kind {
            BasisKind::Gaussian => (-(self.eps * u).powi(2)).exp(),
            BasisKind::Hat => (1.0 - u.abs() / self.step).max(0.0),
        }
    }

    /// Half-width of the region outside which phi is negligible (< 1e-18) or zero.
    pub fn half_support(&self) -> f64 {
        match self.kind {
            BasisKind::Gaussian => 6.5 / self.eps,
            BasisKind::Hat => self.step,
        }
    }

    /// Integral of one basis function over `ln tau`: sqrt(pi)/eps or dy.
    pub fn integral(&self) -> f64 {
        match self.kind {
            BasisKind::Gaussian => PI.sqrt() / self.eps,
            BasisKind::Hat => self.step,
        }
    }

    /// Integral of the square of one basis function, `integral phi_j^2 dy`:
    /// sqrt(pi/2)/eps (Gaussian) or 2 dy/3 (hat); the diagonal of `gram(0)`.
    pub fn self_overlap(&self) -> f64 {
        match self.kind {
            BasisKind::Gaussian => (PI / 2.0).sqrt() / self.eps,
            BasisKind::Hat => 2.0 * self.step / 3.0,
        }
    }

    /// gamma(y) = sum_j x_j phi_j(y) at the points `y`.
    pub fn evaluate(&self, coeffs: &[f64], y: &[f64]) -> Vec<f64> {
        debug_assert_eq!(coeffs.len(), self.len());
        let reach = self.half_support();
        y.iter()
            .map(|&yy| match self.reach(yy, reach) {
                Some((lo, hi)) => (lo..=hi)
                    .map(|j| coeffs[j] * self.shape(yy - self.centers[j]))
                    .sum(),
                None => 0.0,
            })
            .collect()
    }

    /// The range `lo..=hi` of basis functions whose centres lie within
    /// about `reach` of `y` (centres are uniform, so only those are
    /// visited), or `None` when there are none.
    pub(crate) fn reach(&self, y: f64, reach: f64) -> Option<(usize, usize)> {
        let lo = ((y - reach - self.centers[0]) / self.step).floor().max(0.0) as usize;
        let hi = (((y + reach - self.centers[0]) / self.step).ceil() as isize)
            .clamp(-1, self.len() as isize - 1);
        (hi >= 0).then_some((lo, hi as usize))
    }

    /// Quadrature offsets `(u_k, w_k)` such that for smooth `g`,
    /// `integral phi_j(y) g(y) dy ~= sum_k w_k g(y_j + u_k)`. The weights include
    /// the basis shape.
    ///
    /// Gaussian: trapezoid rule with step `h = min(0.55/eps, 0.1)` over
    /// `|u| <= 6/eps` (the Gaussian is below e^-36 beyond). The kernels
    /// 1/(1 + w^2 tau^2) are analytic in a strip of half-width pi/2 around the
    /// real `ln tau` axis, so the rule converges exponentially (Trefethen &
    /// Weideman 2014): for a Gaussian weight the error behaves like
    /// exp(-pi^2/(h eps)^2), about 1e-14 at h eps = 0.55. Hat: 16-point
    /// Gauss-Legendre on each linear piece (exact up to the analytic kernel's
    /// Taylor remainder, far below 1e-14 for pieces narrower than one decade).
    pub fn quadrature_offsets(&self) -> Vec<(f64, f64)> {
        match self.kind {
            BasisKind::Gaussian => {
                let h = (0.55 / self.eps).min(0.1);
                let half = 6.0 / self.eps;
                let k_max = (half / h).ceil() as i64;
                (-k_max..=k_max)
                    .map(|k| {
                        let u = k as f64 * h;
                        (u, h * self.shape(u))
                    })
                    .collect()
            }
            BasisKind::Hat => {
                let gl = gauss_legendre(16);
                let half = self.step / 2.0;
                let mut out = Vec::with_capacity(32);
                for centre in [-half, half] {
                    for &(t, w) in &gl {
                        let u = centre + half * t;
                        out.push((u, w * half * self.shape(u)));
                    }
                }
                out
            }
        }
    }

    /// Exact Gram matrix of the `order`-th derivative:
    /// `M_ij = integral phi_i^(k)(y) phi_j^(k)(y) dy` over the real line.
    ///
    /// Gaussian, with `C(d) = integral phi(y) phi(y + d) dy = sqrt(pi/2)/eps
    /// exp(-eps^2 d^2 / 2)`: `M_ij = (-1)^k C^(2k)(y_i - y_j)`, evaluated with
    /// Hermite polynomials (d^n/dd^n e^{-s d^2} = (-sqrt s)^n H_n(sqrt s d) e^{-s d^2}).
    /// Hat: the linear finite-element mass matrix `dy [2/3, 1/6]` (k = 0) and
    /// stiffness matrix `(1/dy) [2, -1]` (k = 1); k = 2 does not exist for
    /// piecewise-linear functions (their second derivative is a sum of Dirac
    /// deltas) and is refused.
    pub fn gram(&self, order: usize) -> Result<Matrix> {
        self.gram_dense(order).map(Matrix)
    }

    /// [`Basis::gram`] as the inner matrix type.
    pub(crate) fn gram_dense(&self, order: usize) -> Result<DMatrix<f64>> {
        let n = self.len();
        match (self.kind, order) {
            (BasisKind::Gaussian, 0..=2) => {
                let s = self.eps * self.eps / 2.0;
                let a = (PI / 2.0).sqrt() / self.eps;
                Ok(DMatrix::from_fn(n, n, |i, j| {
                    let d = (i as f64 - j as f64) * self.step;
                    let e = a * (-s * d * d).exp();
                    let d2 = d * d;
                    match order {
                        0 => e,
                        1 => e * (2.0 * s - 4.0 * s * s * d2),
                        _ => e * (16.0 * s.powi(4) * d2 * d2 - 48.0 * s.powi(3) * d2 + 12.0 * s * s),
                    }
                }))
            }
            (BasisKind::Hat, 0) => Ok(DMatrix::from_fn(n, n, |i, j| match i.abs_diff(j) {
                0 => self.step * 2.0 / 3.0,
                1 => self.step / 6.0,
                _ => 0.0,
            })),
            (BasisKind::Hat, 1) => Ok(DMatrix::from_fn(n, n, |i, j| match i.abs_diff(j) {
                0 => 2.0 / self.step,
                1 => -1.0 / self.step,
                _ => 0.0,
            })),
            (BasisKind::Hat, 2) => Err(Error::Config(
                "penalty order 2 needs a smooth basis: the second derivative of hat functions is not square-integrable (use --basis gaussian or --penalty-order 0 or 1)".into(),
            )),
            _ => Err(Error::Param {
                name: "penalty-order",
                expected: "0, 1 or 2",
                value: order as f64,
            }),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn basis(kind: BasisKind) -> Basis {
        Basis::new(kind, &TauGrid::new(1e-4, 1e0, 10.0).unwrap())
    }

    /// Brute-force integral of phi_i^(k) phi_j^(k) by finite differences and a
    /// fine trapezoid rule: an independent check of the closed forms.
    fn brute_gram(b: &Basis, i: usize, j: usize, k: usize) -> f64 {
        let h = b.step() / 400.0;
        let deriv = |c: f64, y: f64| -> f64 {
            let f = |y: f64| b.shape(y - c);
            let e = 1e-4;
            match k {
                0 => f(y),
                1 => (f(y + e) - f(y - e)) / (2.0 * e),
                _ => (f(y + e) - 2.0 * f(y) + f(y - e)) / (e * e),
            }
        };
        let (ci, cj) = (b.centers()[i], b.centers()[j]);
        let lo = ci.min(cj) - 8.0 * b.half_support();
        let hi = ci.max(cj) + 8.0 * b.half_support();
        let n = ((hi - lo) / h) as usize;
        (0..n)
            .map(|s| {
                let y = lo + (s as f64 + 0.5) * h;
                deriv(ci, y) * deriv(cj, y) * h
            })
            .sum()
    }

    #[test]
    fn gaussian_gram_matches_brute_force() {
        let b = basis(BasisKind::Gaussian);
        for k in 0..=2 {
            let m = b.gram(k).unwrap();
            for (i, j) in [(10, 10), (10, 11), (10, 12), (5, 9)] {
                let want = brute_gram(&b, i, j, k);
                let scale = m[(i, i)].abs();
                assert!(
                    (m[(i, j)] - want).abs() < 2e-4 * scale,
                    "k={k} ({i},{j}): {} vs {want}",
                    m[(i, j)]
                );
            }
        }
    }

    #[test]
    fn hat_gram_matches_brute_force() {
        let b = basis(BasisKind::Hat);
        for k in 0..=1 {
            let m = b.gram(k).unwrap();
            for (i, j) in [(10, 10), (10, 11), (10, 12)] {
                let want = brute_gram(&b, i, j, k);
                assert!(
                    (m[(i, j)] - want).abs() < 1e-3 * m[(i, i)].abs(),
                    "k={k} ({i},{j})"
                );
            }
        }
        assert!(b.gram(2).is_err());
    }

    #[test]
    fn integrals_and_quadrature_weights_agree() {
        for kind in [BasisKind::Gaussian, BasisKind::Hat] {
            let b = basis(kind);
            let q: f64 = b.quadrature_offsets().iter().map(|p| p.1).sum();
            assert!((q / b.integral() - 1.0).abs() < 1e-12, "{kind}");
        }
    }

    #[test]
    fn self_overlap_is_the_gram_diagonal() {
        for kind in [BasisKind::Gaussian, BasisKind::Hat] {
            let b = basis(kind);
            let m = b.gram(0).unwrap();
            assert!((b.self_overlap() / m[(7, 7)] - 1.0).abs() < 1e-14, "{kind}");
            let quad: f64 = b
                .quadrature_offsets()
                .iter()
                .map(|&(u, w)| w * b.shape(u))
                .sum();
            // The trapezoid step suits phi times a smooth kernel; phi^2 is
            // narrower (width eps*sqrt 2), so the rule is only ~1e-7 accurate here.
            assert!((b.self_overlap() / quad - 1.0).abs() < 1e-6, "{kind}");
        }
    }

    #[test]
    fn evaluate_matches_direct_sum() {
        let b = basis(BasisKind::Gaussian);
        let coeffs: Vec<f64> = (0..b.len())
            .map(|j| (j as f64 * 0.37).sin().abs())
            .collect();
        let y = [b.centers()[3] + 0.05, b.centers()[20], b.centers()[0] - 1.0];
        let fast = b.evaluate(&coeffs, &y);
        for (yy, f) in y.iter().zip(fast) {
            let direct: f64 = (0..b.len())
                .map(|j| coeffs[j] * b.shape(yy - b.centers()[j]))
                .sum();
            assert!((f - direct).abs() < 1e-12);
        }
    }
}
