//! Generalised cross-validation.

use super::{LambdaPath, LambdaRule, RuleCurve, argmin, refine_parabola};

/// Generalised cross-validation score for each point of the path.
///
/// $$ V(\lambda) = \frac{m \lVert A x_\lambda - b \rVert^2}
///                      {\left[m - \operatorname{tr} H_\lambda\right]^2} $$
///
/// where `H_λ` is the influence matrix and `m` the number of equations.
///
/// Source: G. H. Golub, M. Heath, G. Wahba (1979), "Generalized cross-validation
/// as a method for choosing a good ridge parameter", Technometrics 21(2),
/// 215-223, doi:10.1080/00401706.1979.10489751, eq. (1.4): the same value,
/// `(1/m)||r||^2 / [(1/m) tr(I - H)]^2`, written without the factors 1/m.
///
/// Deviation: with active non-negativity bounds `H_λ` is built on the free set
/// only (bound variables are held at zero and do not respond to the data).
pub fn curve(path: &LambdaPath) -> RuleCurve {
    let m = path.nrows as f64;
    let score: Vec<f64> = path
        .points
        .iter()
        .map(|p| {
            let denom = m - p.dof;
            if denom > 0.5 {
                m * p.solution.residual_sq / (denom * denom)
            } else {
                f64::NAN
            }
        })
        .collect();
    let lambdas = path.lambdas();
    let chosen = argmin(&score).map(|i| refine_parabola(&lambdas, &score, i));
    RuleCurve {
        rule: LambdaRule::Gcv,
        score,
        chosen,
    }
}

/// Noise variance estimate from a point of the path,
/// `sigma^2 = ||A x - b||^2 / (m - tr H)`.
///
/// Source: G. Wahba (1983), "Bayesian 'confidence intervals' for the
/// cross-validated smoothing spline", J. R. Statist. Soc. B 45(1), 133-150, eq. (3.1).
pub fn noise_variance(path: &LambdaPath, index: usize) -> f64 {
    let p = &path.points[index];
    let denom = (path.nrows as f64 - p.dof).max(1.0);
    p.solution.residual_sq / denom
}
