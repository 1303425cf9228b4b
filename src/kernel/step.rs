//! Kernel of the DRT model of a step transient.
//!
//! A relaxation process of time constant tau answers a unit step with
//! `1 - exp(-t/tau)` (the voltage of a Voigt element R || C under a current
//! step, per ohm: textbook first-order network) and a relaxation, or the
//! current of a series R-C under a voltage step, with `exp(-t/tau)`. For one
//! basis function phi_j the model contributes
//!
//! $$ D_{ij} = \int \phi_j(y)\, e^{-t_i e^{-y}}\,dy, \qquad
//!    R_{ij} = \int \phi_j(y)\,\bigl(1 - e^{-t_i e^{-y}}\bigr)\,dy $$
//!
//! with `y = ln tau`. No closed form exists for a Gaussian or a hat in
//! `ln tau` (the hat leads to integrals of `ln(s) e^{-s}/s`), so both are
//! found by the basis quadrature of [`Basis::quadrature_offsets`]. The
//! integrand `exp(-t e^{-y})` is analytic and bounded by 1 in the strip
//! `|Im y| < pi/2` (there `Re(t e^{-y}) > 0`), the same strip as the impedance
//! kernel, so the trapezoid rule on the Gaussian converges at the same
//! exponential rate (Trefethen & Weideman 2014, SIAM Review 56(3), 385-458).
//!
//! # Averaging over a time bin
//! A row may stand for the mean of several samples (see
//! [`crate::io::transient`]). The mean of `f(t)` over samples with mean `t`
//! and variance `v` is `f(t) + f''(t) v / 2 + O(v^2)` (Taylor expansion about
//! the mean; the first-order term vanishes). For `f = exp(-t/tau)`,
//! `f'' = exp(-t/tau)/tau^2`, so with `x = t/tau` and `r = v/t^2` the decay
//! kernel becomes `e^{-x} (1 + r x^2 / 2)` and the rise kernel
//! `1 - e^{-x} (1 + r x^2 / 2)`. At 25 bins per decade (`r <= 8e-4`) the
//! neglected fourth-order term is below 1e-6 of the step.

use super::Basis;
use crate::linalg::Matrix;
use nalgebra::DMatrix;

/// Which response a column describes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum StepShape {
    /// `exp(-t/tau)`: relaxation, or current under a voltage step.
    Decay,
    /// `1 - exp(-t/tau)`: voltage under a current step.
    Rise,
}

/// Builds the `m x n` kernel (times x basis functions) for samples or bins
/// with mean times `time_s` (> 0) and within-bin time variances
/// `time_var_s2` (0 for single samples).
///
/// # Panics
/// When `time_s` and `time_var_s2` differ in length.
pub fn step_kernel(basis: &Basis, shape: StepShape, time_s: &[f64], time_var_s2: &[f64]) -> Matrix {
    assert_eq!(time_s.len(), time_var_s2.len(), "one time spread per time");
    Matrix(step_kernel_dense(basis, shape, time_s, time_var_s2))
}

/// [`step_kernel`] as the inner matrix type.
pub(crate) fn step_kernel_dense(
    basis: &Basis,
    shape: StepShape,
    time_s: &[f64],
    time_var_s2: &[f64],
) -> DMatrix<f64> {
    debug_assert_eq!(time_s.len(), time_var_s2.len());
    let m = time_s.len();
    let n = basis.len();
    // e^{-u_k} once; then x = t e^{-y_j} e^{-u_k} needs one multiply per node.
    let nodes: Vec<(f64, f64)> = basis
        .quadrature_offsets()
        .iter()
        .map(|&(u, w)| ((-u).exp(), w))
        .collect();
    let mut k = DMatrix::zeros(m, n);
    for (j, &yj) in basis.centers().iter().enumerate() {
        let inv_tau = (-yj).exp();
        for i in 0..m {
            let t = time_s[i];
            let half_r = 0.5 * time_var_s2[i] / (t * t);
            let xt = t * inv_tau;
            let mut sum = 0.0;
            for &(e, w) in &nodes {
                let x = xt * e;
                // e^{-x} underflows to 0 beyond 745: fully relaxed.
                let ex = if x < 745.0 { (-x).exp() } else { 0.0 };
                let corr = half_r * x * x * ex;
                sum += w * match shape {
                    StepShape::Decay => ex + corr,
                    // 1 - e^{-x} loses digits for small x; expm1 keeps them.
                    StepShape::Rise if x < 0.5 => -(-x).exp_m1() - corr,
                    StepShape::Rise => 1.0 - ex - corr,
                };
            }
            k[(i, j)] = sum;
        }
    }
    k
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::grid::TauGrid;
    use crate::kernel::BasisKind;
    use crate::kernel::quadrature::gauss_legendre;

    fn times() -> Vec<f64> {
        (0..30)
            .map(|i| 10f64.powf(-6.0 + 0.25 * i as f64))
            .collect()
    }

    /// Independent reference: composite 20-point Gauss-Legendre over 400 panels.
    fn reference(basis: &Basis, j: usize, t: f64, shape: StepShape) -> f64 {
        let c = basis.centers()[j];
        let half = basis.half_support();
        let gl = gauss_legendre(20);
        let panels = 400;
        let h = 2.0 * half / panels as f64;
        let mut s = 0.0;
        for p in 0..panels {
            let a0 = c - half + p as f64 * h;
            for &(x, w) in &gl {
                let y = a0 + h * (x + 1.0) / 2.0;
                let d = (-t * (-y).exp()).exp();
                let f = match shape {
                    StepShape::Decay => d,
                    StepShape::Rise => 1.0 - d,
                };
                s += w * h / 2.0 * basis.shape(y - c) * f;
            }
        }
        s
    }

    #[test]
    fn kernel_matches_independent_quadrature() {
        let grid = TauGrid::new(1e-6, 1e2, 10.0).unwrap();
        let t = times();
        let zero = vec![0.0; t.len()];
        for kind in [BasisKind::Gaussian, BasisKind::Hat] {
            let basis = Basis::new(kind, &grid);
            for shape in [StepShape::Decay, StepShape::Rise] {
                let k = step_kernel(&basis, shape, &t, &zero);
                for j in [0, 23, 40, basis.len() - 1] {
                    for (i, &ti) in t.iter().enumerate() {
                        let want = reference(&basis, j, ti, shape);
                        assert!(
                            (k[(i, j)] - want).abs() < 1e-11 * basis.integral(),
                            "{kind} {shape:?} ({i},{j}): {} vs {want}",
                            k[(i, j)]
                        );
                    }
                }
            }
        }
    }

    /// Exponential integral E1 for x > 0: the series of Abramowitz & Stegun
    /// 5.1.11 for x <= 1, the continued fraction 5.1.22 (evaluated by the
    /// modified Lentz method, Numerical Recipes 3rd ed. section 6.3) above.
    fn e1(x: f64) -> f64 {
        if x <= 1.0 {
            let mut sum = 0.0;
            let mut term = 1.0;
            for k in 1..60 {
                term *= -x / k as f64;
                sum += term / k as f64;
            }
            -0.577_215_664_901_532_9 - x.ln() - sum
        } else {
            let tiny = 1e-300;
            let mut b = x + 1.0;
            let mut c = 1.0 / tiny;
            let mut d = 1.0 / b;
            let mut h = d;
            for i in 1..200 {
                let a = -((i * i) as f64);
                b += 2.0;
                d = 1.0 / (a * d + b);
                c = b + a / c;
                let del = c * d;
                h *= del;
                if (del - 1.0).abs() < 1e-16 {
                    break;
                }
            }
            h * (-x).exp()
        }
    }

    /// Hat functions sum to 1 between the first and last centre, so the row
    /// sums of the decay kernel are `integral_{y0}^{y1} exp(-t e^{-y}) dy =
    /// E1(t e^{-y1}) - E1(t e^{-y0})` (substitute s = t e^{-y}) plus the two
    /// linear tapers, integrated here by a fine midpoint rule.
    #[test]
    fn hat_partition_of_unity_gives_exponential_integral() {
        let grid = TauGrid::new(1e-5, 1e1, 10.0).unwrap();
        let basis = Basis::new(BasisKind::Hat, &grid);
        let t = times();
        let k = step_kernel(&basis, StepShape::Decay, &t, &vec![0.0; t.len()]);
        let (y0, y1, h) = (
            basis.centers()[0],
            basis.centers()[basis.len() - 1],
            basis.step(),
        );
        for (i, &ti) in t.iter().enumerate() {
            let g = |y: f64| (-ti * (-y).exp()).exp();
            let taper = |a: f64, up: bool| -> f64 {
                let n = 4000;
                let d = h / n as f64;
                (0..n)
                    .map(|s| {
                        let y = a + (s as f64 + 0.5) * d;
                        let wgt = if up { (y - a) / h } else { 1.0 - (y - a) / h };
                        wgt * g(y) * d
                    })
                    .sum()
            };
            let want = e1(ti * (-y1).exp()) - e1(ti * (-y0).exp())
                + taper(y0 - h, true)
                + taper(y1, false);
            let got: f64 = (0..k.ncols()).map(|j| k[(i, j)]).sum();
            assert!((got - want).abs() < 1e-7, "row {i}: {got} vs {want}");
        }
    }

    /// A very narrow basis function of unit area is a single time constant:
    /// its columns tend to exp(-t/tau) and 1 - exp(-t/tau).
    #[test]
    fn narrow_basis_function_tends_to_single_exponential() {
        let grid = TauGrid::new(1e-3 / 10f64.powf(0.5), 1e-3 * 10f64.powf(0.5), 200.0).unwrap();
        let basis = Basis::new(BasisKind::Gaussian, &grid);
        let t = times();
        let zero = vec![0.0; t.len()];
        let d = step_kernel(&basis, StepShape::Decay, &t, &zero);
        let r = step_kernel(&basis, StepShape::Rise, &t, &zero);
        let j = basis.len() / 2;
        let tau = basis.centers()[j].exp();
        for (i, &ti) in t.iter().enumerate() {
            let e = (-ti / tau).exp();
            assert!((d[(i, j)] / basis.integral() - e).abs() < 2e-4, "decay {i}");
            assert!(
                (r[(i, j)] / basis.integral() - (1.0 - e)).abs() < 2e-4,
                "rise {i}"
            );
        }
    }

    /// The bin correction reproduces the mean of exp(-t/tau) over 101
    /// uniformly spread samples of a 25-per-decade bin far better than the
    /// value at the mean time does.
    #[test]
    fn bin_correction_matches_sample_mean() {
        let grid = TauGrid::new(1e-3 / 10f64.powf(0.5), 1e-3 * 10f64.powf(0.5), 200.0).unwrap();
        let basis = Basis::new(BasisKind::Gaussian, &grid);
        let j = basis.len() / 2;
        let tau = basis.centers()[j].exp();
        let (a, b) = (2e-3, 2e-3 * 10f64.powf(1.0 / 25.0));
        let ts: Vec<f64> = (0..=100).map(|k| a + (b - a) * k as f64 / 100.0).collect();
        let mean = ts.iter().sum::<f64>() / ts.len() as f64;
        let var = ts.iter().map(|t| (t - mean).powi(2)).sum::<f64>() / ts.len() as f64;
        let want = ts.iter().map(|t| (-t / tau).exp()).sum::<f64>() / ts.len() as f64;
        let plain =
            step_kernel(&basis, StepShape::Decay, &[mean], &[0.0])[(0, j)] / basis.integral();
        let fixed =
            step_kernel(&basis, StepShape::Decay, &[mean], &[var])[(0, j)] / basis.integral();
        // Both carry the narrow basis function's own width error (~1e-4
        // relative); the bin error on top is what differs.
        let line = (-mean / tau).exp();
        let line_fixed = line * (1.0 + 0.5 * var / (tau * tau));
        assert!(
            (line_fixed - want).abs() < 2e-6 * want,
            "{line_fixed} vs {want}"
        );
        assert!((line - want).abs() > 1e-4 * want);
        assert!((fixed - plain - (line_fixed - line)).abs() < 1e-3 * (line_fixed - line));
    }
}
