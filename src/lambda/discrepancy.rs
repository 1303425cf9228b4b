//! Morozov's discrepancy principle.

use super::{LambdaPath, LambdaRule, RuleCurve, gcv};

/// Ratio `||A x - b||^2 / (m sigma^2)` at each path point, and the largest
/// `lambda` at which it does not exceed 1.
///
/// The principle: choose the smoothest solution whose residual is as large as
/// the noise, `||A x_lambda - b||^2 = m sigma^2`.
///
/// Source: V. A. Morozov (1966), "On the solution of functional equations by the
/// method of regularization", Soviet Math. Dokl. 7, 414-417.
///
/// Deviation: the noise level is not known in advance; `sigma^2` is estimated
/// from the GCV-optimal point of the path with Wahba's estimator
/// (see [`gcv::noise_variance`]). The crossing is interpolated linearly in
/// `log lambda` and `log ratio`.
pub fn curve(path: &LambdaPath) -> RuleCurve {
    let g = gcv::curve(path);
    let lambdas = path.lambdas();
    let Some(i_gcv) = super::argmin(&g.score) else {
        return RuleCurve {
            rule: LambdaRule::Discrepancy,
            score: vec![f64::NAN; lambdas.len()],
            chosen: None,
        };
    };
    let sigma2 = gcv::noise_variance(path, i_gcv).max(f64::MIN_POSITIVE);
    curve_with_variance(path, sigma2)
}

/// As [`curve`], with a known noise variance per equation.
pub fn curve_with_variance(path: &LambdaPath, sigma2: f64) -> RuleCurve {
    let m = path.nrows as f64;
    let lambdas = path.lambdas();
    let score: Vec<f64> = path
        .points
        .iter()
        .map(|p| p.solution.residual_sq / (m * sigma2))
        .collect();
    // Residual grows with lambda: take the last grid point still below 1.
    let mut chosen = None;
    for i in (0..score.len()).rev() {
        if score[i] <= 1.0 {
            chosen = Some(if i + 1 < score.len() && score[i + 1] > 1.0 {
                let (a, b) = (score[i].max(1e-300).ln(), score[i + 1].ln());
                let t = if (b - a).abs() > 0.0 {
                    (0.0 - a) / (b - a)
                } else {
                    0.0
                };
                let (la, lb) = (lambdas[i].ln(), lambdas[i + 1].ln());
                (la + t.clamp(0.0, 1.0) * (lb - la)).exp()
            } else {
                lambdas[i]
            });
            break;
        }
    }
    RuleCurve {
        rule: LambdaRule::Discrepancy,
        score,
        chosen,
    }
}
