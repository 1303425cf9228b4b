//! Fixed quadrature rules used to build kernel matrices.
//!
//! # References
//! - G. H. Golub, J. H. Welsch (1969), "Calculation of Gauss quadrature rules",
//!   Math. Comp. 23, 221-230 (Gauss-Legendre nodes; here found by Newton's
//!   method on the Legendre recurrence, as in Abramowitz & Stegun 25.4.29).
//! - L. N. Trefethen, J. A. C. Weideman (2014), "The exponentially convergent
//!   trapezoidal rule", SIAM Review 56(3), 385-458 (trapezoid rule on smooth,
//!   rapidly decaying integrands).

use std::f64::consts::PI;

/// Gauss-Legendre nodes and weights on `[-1, 1]` for `n >= 1` points.
///
/// Exact for polynomials of degree `2n - 1`.
pub fn gauss_legendre(n: usize) -> Vec<(f64, f64)> {
    let n = n.max(1);
    let mut out = Vec::with_capacity(n);
    for i in 0..n {
        // Initial guess (Tricomi), then Newton on P_n.
        let mut x = (PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
        let mut dp = 1.0;
        for _ in 0..100 {
            let (mut p0, mut p1) = (1.0, x);
            for k in 2..=n {
                let k = k as f64;
                let p2 = ((2.0 * k - 1.0) * x * p1 - (k - 1.0) * p0) / k;
                p0 = p1;
                p1 = p2;
            }
            let pn = if n == 1 { x } else { p1 };
            let pn1 = if n == 1 { 1.0 } else { p0 };
            dp = n as f64 * (x * pn - pn1) / (x * x - 1.0);
            let dx = pn / dp;
            x -= dx;
            if dx.abs() < 1e-15 {
                break;
            }
        }
        let w = 2.0 / ((1.0 - x * x) * dp * dp);
        out.push((x, w));
    }
    out.sort_by(|a, b| a.0.total_cmp(&b.0));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gauss_legendre_integrates_polynomials_exactly() {
        for n in [1usize, 2, 5, 12, 20] {
            let rule = gauss_legendre(n);
            let wsum: f64 = rule.iter().map(|p| p.1).sum();
            assert!((wsum - 2.0).abs() < 1e-13, "n={n}");
            // x^(2n-2) integrates to 2/(2n-1)
            let d = 2 * n - 2;
            let s: f64 = rule.iter().map(|(x, w)| w * x.powi(d as i32)).sum();
            assert!((s - 2.0 / (d as f64 + 1.0)).abs() < 1e-13, "n={n}");
        }
    }

    #[test]
    fn two_point_rule_matches_table() {
        // Abramowitz & Stegun table 25.4: nodes +-1/sqrt(3), weights 1.
        let r = gauss_legendre(2);
        assert!((r[1].0 - 1.0 / 3f64.sqrt()).abs() < 1e-15);
        assert!((r[0].1 - 1.0).abs() < 1e-14);
    }
}
