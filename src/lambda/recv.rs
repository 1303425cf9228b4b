//! Real-imaginary cross-validation: fit one block of equations, predict the other.

use super::{LambdaRule, RuleCurve, argmin, refine_parabola};
use crate::solve::Tikhonov;
use crate::solve::nnls::{NnlsParams, nnls_dense};
use nalgebra::DVector;

/// Cross-validation score between two blocks of rows (for a spectrum: the
/// real-part and the imaginary-part equations):
///
/// $$ CV(\lambda) = \lVert A_I x^{R}_\lambda - b_I \rVert^2
///               + \lVert A_R x^{I}_\lambda - b_R \rVert^2 $$
///
/// where `x^R` is the regularised solution fitted to the real block alone and
/// `x^I` the one fitted to the imaginary block alone. For a Kramers-Kronig
/// consistent spectrum both parts carry the same DRT, so the `lambda` that
/// best predicts one part from the other is a good compromise.
///
/// Source: A. Saccoccio, T. H. Wan, C. Chen, F. Ciucci (2014), "Optimal
/// regularization in distribution of relaxation times applied to
/// electrochemical impedance spectroscopy: ridge and lasso regression methods -
/// a theoretical and experimental study", Electrochim. Acta 147, 470-482,
/// doi:10.1016/j.electacta.2014.09.058.
///
/// Deviation: unknowns that one block cannot see (all-zero columns in it: the
/// series resistance for the imaginary block, an inductance or series
/// capacitance for the real block) are re-fitted, non-negatively, on the
/// predicted block before its error is measured; the score is divided by the
/// number of equations.
pub fn curve(problem: &Tikhonov, rows_a: &[usize], rows_b: &[usize], lambdas: &[f64]) -> RuleCurve {
    let a_err = one_way(problem, rows_a, rows_b, lambdas);
    let b_err = one_way(problem, rows_b, rows_a, lambdas);
    let m = (rows_a.len() + rows_b.len()) as f64;
    let score: Vec<f64> = a_err.iter().zip(&b_err).map(|(x, y)| (x + y) / m).collect();
    let chosen = argmin(&score).map(|i| refine_parabola(lambdas, &score, i));
    RuleCurve {
        rule: LambdaRule::Recv,
        score,
        chosen,
    }
}

/// Fits on `fit_rows`, returns the squared prediction error on `test_rows` for
/// every `lambda` (path warm-started from the largest value down).
fn one_way(
    problem: &Tikhonov,
    fit_rows: &[usize],
    test_rows: &[usize],
    lambdas: &[f64],
) -> Vec<f64> {
    let fit = problem.rows(fit_rows);
    let test = problem.rows(test_rows);
    let n = problem.ncols();
    let hidden: Vec<usize> = (0..n)
        .filter(|&j| {
            fit.design_dense().column(j).amax() == 0.0 && test.design_dense().column(j).amax() > 0.0
        })
        .collect();
    let h = test.design_dense().select_columns(&hidden);
    let hth = h.tr_mul(&h);
    fit.sweep(lambdas, &[], |s| {
        let pred = DVector::from_vec(test.predict(&s.x));
        let r: DVector<f64> = DVector::from_column_slice(test.rhs()) - pred;
        if hidden.is_empty() {
            r.norm_squared()
        } else {
            let y = nnls_dense(&hth, h.tr_mul(&r).as_slice(), &[], &NnlsParams::default()).x;
            (r - &h * DVector::from_vec(y)).norm_squared()
        }
    })
}
