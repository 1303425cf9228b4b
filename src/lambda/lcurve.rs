//! L-curve corner.

use super::{LambdaPath, LambdaRule, RuleCurve, refine_parabola};

/// Signed curvature of the L-curve `(log ||Ax - b||, log sqrt(x'Mx))` as a
/// function of `log lambda`, by central differences on the (uniform) grid:
///
/// $$ \kappa = \frac{\rho' \eta'' - \rho'' \eta'}{(\rho'^2 + \eta'^2)^{3/2}} $$
///
/// with `rho = log ||r||`, `eta = log ||x||_M`. The corner is the point of
/// largest positive curvature (the curve turns from its steep branch, small
/// `lambda`, to its flat branch).
///
/// Source: P. C. Hansen, D. P. O'Leary (1993), "The use of the L-curve in the
/// regularization of discrete ill-posed problems", SIAM J. Sci. Comput. 14(6),
/// 1487-1503, doi:10.1137/0914086, section 3.
///
/// Deviation: derivatives by finite differences along the computed
/// (constrained) path rather than from the SVD; end points have no curvature.
pub fn curve(path: &LambdaPath) -> RuleCurve {
    let n = path.points.len();
    let rho: Vec<f64> = path
        .points
        .iter()
        .map(|p| 0.5 * p.solution.residual_sq.max(f64::MIN_POSITIVE).ln())
        .collect();
    let eta: Vec<f64> = path
        .points
        .iter()
        .map(|p| 0.5 * p.solution.penalty_sq.max(f64::MIN_POSITIVE).ln())
        .collect();
    let mut score = vec![f64::NAN; n];
    for i in 1..n.saturating_sub(1) {
        let (r1, r2) = (
            (rho[i + 1] - rho[i - 1]) / 2.0,
            rho[i + 1] - 2.0 * rho[i] + rho[i - 1],
        );
        let (e1, e2) = (
            (eta[i + 1] - eta[i - 1]) / 2.0,
            eta[i + 1] - 2.0 * eta[i] + eta[i - 1],
        );
        let speed = (r1 * r1 + e1 * e1).powf(1.5);
        if speed > 1e-300 {
            score[i] = (r1 * e2 - r2 * e1) / speed;
        }
    }
    let lambdas = path.lambdas();
    let best = score
        .iter()
        .enumerate()
        .filter(|(_, k)| k.is_finite() && **k > 0.0)
        .max_by(|a, b| a.1.total_cmp(b.1))
        .map(|(i, _)| i);
    let chosen = best.map(|i| {
        let neg: Vec<f64> = score.iter().map(|k| -k).collect();
        refine_parabola(&lambdas, &neg, i)
    });
    RuleCurve {
        rule: LambdaRule::Lcurve,
        score,
        chosen,
    }
}
