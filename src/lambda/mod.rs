//! Automatic choice of the regularisation parameter `lambda`.
//!
//! A [`LambdaPath`] holds constrained solutions along a log-spaced grid of
//! `lambda` values (warm-started from one to the next); each rule reads the
//! path and returns its curve and its choice:
//!
//! - [`gcv`]: generalised cross-validation, with the influence matrix of the
//!   free variables at the constrained solution;
//! - [`lcurve`]: the corner (maximum curvature) of the L-curve;
//! - [`discrepancy`]: Morozov's discrepancy principle with an estimated noise
//!   level;
//! - [`recv`]: real-imaginary cross-validation (fit one block of rows, predict
//!   the other).
//!
//! # References
//! - G. H. Golub, M. Heath, G. Wahba (1979), Technometrics 21(2), 215-223.
//! - P. C. Hansen, D. P. O'Leary (1993), SIAM J. Sci. Comput. 14(6), 1487-1503.
//! - V. A. Morozov (1966), Soviet Math. Dokl. 7, 414-417.
//! - A. Saccoccio, T. H. Wan, C. Chen, F. Ciucci (2014), "Optimal regularization
//!   in distribution of relaxation times applied to electrochemical impedance
//!   spectroscopy: ridge and lasso regression methods - a theoretical and
//!   experimental study", Electrochim. Acta 147, 470-482.

pub mod discrepancy;
pub mod gcv;
pub mod lcurve;
pub mod recv;

use crate::solve::{Tikhonov, TikhonovSolution};
use crate::{Error, Result};

/// A rule for choosing `lambda`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum LambdaRule {
    /// Generalised cross-validation.
    Gcv,
    /// L-curve maximum curvature.
    Lcurve,
    /// Discrepancy principle.
    Discrepancy,
    /// Real-imaginary cross-validation.
    Recv,
}

impl LambdaRule {
    /// All rules, in the order they are reported.
    pub const ALL: [LambdaRule; 4] = [
        LambdaRule::Gcv,
        LambdaRule::Lcurve,
        LambdaRule::Discrepancy,
        LambdaRule::Recv,
    ];

    /// Short name used on the command line and in outputs.
    pub fn name(self) -> &'static str {
        match self {
            LambdaRule::Gcv => "gcv",
            LambdaRule::Lcurve => "lcurve",
            LambdaRule::Discrepancy => "discrepancy",
            LambdaRule::Recv => "recv",
        }
    }

    /// Parses a rule name (case-insensitive).
    pub fn from_name(s: &str) -> Option<Self> {
        Self::ALL
            .into_iter()
            .find(|r| r.name().eq_ignore_ascii_case(s.trim()))
    }
}

impl std::fmt::Display for LambdaRule {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// How `lambda` is set.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum LambdaChoice {
    /// Chosen by a rule over the lambda grid.
    Rule(LambdaRule),
    /// Fixed by the user.
    Fixed(f64),
}

/// Every computed rule's curve over the lambda grid.
#[derive(Clone, Debug, serde::Serialize)]
pub struct LambdaCurves {
    /// The grid.
    pub lambda: Vec<f64>,
    /// `||A x - b||^2` at each grid point.
    pub residual_sq: Vec<f64>,
    /// Penalty `x'Mx` at each grid point.
    pub penalty_sq: Vec<f64>,
    /// Effective number of parameters (influence-matrix trace).
    pub dof: Vec<f64>,
    /// One curve per rule that was computed.
    pub rules: Vec<RuleCurve>,
}

/// A log-spaced grid of `lambda` values.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LambdaGrid {
    /// Smallest value.
    pub min: f64,
    /// Largest value.
    pub max: f64,
    /// Points per decade.
    pub per_decade: f64,
}

impl LambdaGrid {
    /// Checks the bounds.
    pub fn validate(&self) -> Result<()> {
        if !(self.min.is_finite() && self.min > 0.0) {
            return Err(Error::Param {
                name: "lambda-min",
                expected: "a positive number",
                value: self.min,
            });
        }
        if !(self.max.is_finite() && self.max > self.min) {
            return Err(Error::Param {
                name: "lambda-max",
                expected: "a number greater than lambda-min",
                value: self.max,
            });
        }
        if !(self.per_decade.is_finite() && (0.5..=50.0).contains(&self.per_decade)) {
            return Err(Error::Param {
                name: "lambda-per-decade",
                expected: "between 0.5 and 50",
                value: self.per_decade,
            });
        }
        Ok(())
    }

    /// The grid values, ascending.
    pub fn values(&self) -> Vec<f64> {
        let decades = (self.max / self.min).log10();
        let n = ((decades * self.per_decade).round() as usize).max(2) + 1;
        let step = decades / (n - 1) as f64;
        (0..n)
            .map(|i| self.min * 10f64.powf(step * i as f64))
            .collect()
    }
}

/// One point of the path.
#[derive(Clone, Debug)]
pub struct PathPoint {
    /// The solution at this `lambda`.
    pub solution: TikhonovSolution,
    /// Trace of the influence matrix on the free set (effective parameters).
    pub dof: f64,
}

/// Constrained solutions along a grid of `lambda`.
#[derive(Clone, Debug)]
pub struct LambdaPath {
    /// Points in ascending `lambda`.
    pub points: Vec<PathPoint>,
    /// Number of equations of the problem.
    pub nrows: usize,
}

impl LambdaPath {
    /// Solves at every grid value, from the largest `lambda` down, each solve
    /// warm-started from the free set of the previous one (the first from
    /// `warm`).
    pub fn trace(problem: &Tikhonov, lambdas: &[f64], warm: &[usize]) -> Self {
        let mut points = problem.sweep(lambdas, warm, |solution| {
            let dof = problem.influence_trace(solution.lambda, &solution.free);
            PathPoint { solution, dof }
        });
        points.sort_by(|a, b| a.solution.lambda.total_cmp(&b.solution.lambda));
        Self {
            points,
            nrows: problem.nrows(),
        }
    }

    /// The `lambda` values.
    pub fn lambdas(&self) -> Vec<f64> {
        self.points.iter().map(|p| p.solution.lambda).collect()
    }
}

/// A rule's curve over the path and its choice.
#[derive(Clone, Debug, serde::Serialize)]
pub struct RuleCurve {
    /// Which rule.
    pub rule: LambdaRule,
    /// Score at each path point (`NaN` where undefined).
    pub score: Vec<f64>,
    /// The chosen `lambda` (refined between grid points), if the rule found one.
    pub chosen: Option<f64>,
}

/// Index of the smallest finite value.
pub(crate) fn argmin(v: &[f64]) -> Option<usize> {
    v.iter()
        .enumerate()
        .filter(|(_, x)| x.is_finite())
        .min_by(|a, b| a.1.total_cmp(b.1))
        .map(|(i, _)| i)
}

/// Refines an extremum at grid index `i` by fitting a parabola through the
/// neighbouring scores in `log10 lambda` (uniform spacing); returns `lambda`.
pub(crate) fn refine_parabola(lambdas: &[f64], score: &[f64], i: usize) -> f64 {
    if i == 0 || i + 1 >= lambdas.len() {
        return lambdas[i];
    }
    let (a, b, c) = (score[i - 1], score[i], score[i + 1]);
    if !(a.is_finite() && b.is_finite() && c.is_finite()) {
        return lambdas[i];
    }
    let denom = a - 2.0 * b + c;
    if denom.abs() < f64::MIN_POSITIVE {
        return lambdas[i];
    }
    let shift = (0.5 * (a - c) / denom).clamp(-0.5, 0.5);
    let (l0, l1) = (lambdas[i].log10(), lambdas[i + 1].log10());
    10f64.powf(l0 + shift * (l1 - l0))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn grid_is_log_spaced_and_inclusive() {
        let g = LambdaGrid {
            min: 1e-6,
            max: 1e2,
            per_decade: 2.0,
        };
        let v = g.values();
        assert_eq!(v.len(), 17);
        assert!((v[0] - 1e-6).abs() < 1e-18);
        assert!((v[16] / 1e2 - 1.0).abs() < 1e-12);
        assert!((v[1] / v[0] - 10f64.sqrt()).abs() < 1e-12);
    }

    #[test]
    fn rule_names_round_trip() {
        for r in LambdaRule::ALL {
            assert_eq!(LambdaRule::from_name(r.name()), Some(r));
        }
        assert_eq!(LambdaRule::from_name("GCV"), Some(LambdaRule::Gcv));
        assert_eq!(LambdaRule::from_name("auto"), None);
    }

    #[test]
    fn parabola_finds_vertex() {
        // score = (log10 lambda - 0.3)^2 on a unit grid
        let l: Vec<f64> = (-2..=2).map(|k| 10f64.powi(k)).collect();
        let s: Vec<f64> = (-2..=2).map(|k| (k as f64 - 0.3).powi(2)).collect();
        let i = argmin(&s).unwrap();
        assert_eq!(i, 2);
        assert!((refine_parabola(&l, &s, i).log10() - 0.3).abs() < 1e-12);
    }
}
#[cfg(test)]
mod reference_tests;
