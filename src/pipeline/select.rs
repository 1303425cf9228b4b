//! The choice of `lambda` and the final solve, the same for every kind of
//! measurement.

use super::adaptive;
use super::options::DrtOptions;
use super::result::{GridEdge, LambdaSelection, SolveInfo};
use crate::lambda::{self, LambdaChoice, LambdaCurves, LambdaPath, LambdaRule};
use crate::solve::{SolveStatus, Tikhonov, TikhonovSolution};

/// How bad a status is, for combining several solves into one report.
fn severity(s: SolveStatus) -> u8 {
    match s {
        SolveStatus::Converged => 0,
        SolveStatus::Degenerate => 1,
        SolveStatus::MaxIterations => 2,
        SolveStatus::Unbounded => 3,
        SolveStatus::NonFinite => 4,
    }
}

/// The worse of two statuses.
pub(crate) fn worst(a: SolveStatus, b: SolveStatus) -> SolveStatus {
    if severity(b) > severity(a) { b } else { a }
}

/// The final solve, how `lambda` was found, and the solver's diagnostics.
pub(crate) struct Selected {
    pub solution: TikhonovSolution,
    pub selection: LambdaSelection,
    pub info: SolveInfo,
    /// The noise level per equation that the discrepancy rule works with
    /// (scaled units, see [`noise_rms`]), when a rule traced the path and
    /// its GCV curve has a minimum; `None` for a fixed lambda.
    pub noise_rms: Option<f64>,
    /// The problem whose solution `solution` is, at `solution.lambda`:
    /// the global one, or the last weighted one of the adaptive penalty.
    pub problem: Tikhonov,
}

/// The noise level per equation (rms, in the scaled units of the problem)
/// that the discrepancy rule uses: Wahba's estimate
/// `sigma^2 = ||A x - b||^2 / (m - tr H)` at the minimum of the GCV curve
/// (see [`lambda::discrepancy::curve`] and [`lambda::gcv::noise_variance`]).
/// `None` when the GCV curve has no finite value.
fn noise_rms(path: &LambdaPath, rules: &[lambda::RuleCurve]) -> Option<f64> {
    let gcv = rules.iter().find(|c| c.rule == LambdaRule::Gcv)?;
    let i = lambda::argmin(&gcv.score)?;
    Some(lambda::gcv::noise_variance(path, i).sqrt())
}

/// Chooses `lambda` as `opts` asks and solves at it with the global
/// penalty, warm-started from `warm` (a free set of a neighbouring
/// solution, or empty); [`refine`] applies the adaptive penalty after.
///
/// `cv_split` holds the two blocks of rows that the cross-validation rule
/// ([`LambdaRule::Recv`]) fits against each other: the real and imaginary
/// equations of a spectrum, alternate samples of a transient.
pub(crate) fn select(
    problem: &Tikhonov,
    opts: &DrtOptions,
    cv_split: (&[usize], &[usize]),
    warm: &[usize],
) -> Selected {
    let mut start: Vec<usize> = warm.to_vec();
    let mut path_status = SolveStatus::Converged;
    let mut noise = None;
    let selection = match opts.lambda {
        LambdaChoice::Fixed(v) => LambdaSelection {
            lambda: v,
            rule: None,
            rule_choice: None,
            floored: false,
            grid_edge: None,
            curves: None,
        },
        LambdaChoice::Rule(rule) => {
            let lambdas = opts.lambda_grid.values();
            let path = LambdaPath::trace(problem, &lambdas, warm);
            path_status = path.points.iter().fold(SolveStatus::Converged, |s, p| {
                worst(s, p.solution.info.status)
            });
            // The rules that read the path cost nothing more; the
            // cross-validation rule needs two more sweeps, so its curve is
            // computed only when it decides or when every curve is asked for.
            let rules: Vec<_> = LambdaRule::ALL
                .into_iter()
                .filter(|r| *r != LambdaRule::Recv || rule == LambdaRule::Recv || opts.all_curves)
                .map(|r| match r {
                    LambdaRule::Gcv => lambda::gcv::curve(&path),
                    LambdaRule::Lcurve => lambda::lcurve::curve(&path),
                    LambdaRule::Discrepancy => lambda::discrepancy::curve(&path),
                    LambdaRule::Recv => {
                        lambda::recv::curve(problem, cv_split.0, cv_split.1, &lambdas)
                    }
                })
                .collect();
            noise = noise_rms(&path, &rules);
            let rule_choice = rules.iter().find(|c| c.rule == rule).and_then(|c| c.chosen);
            let (lo, hi) = (lambdas[0], lambdas[lambdas.len() - 1]);
            // The refinement never leaves the grid; a choice within a
            // millionth of a decade of an end is on it.
            let grid_edge = match rule_choice {
                None => Some(GridEdge::Lower),
                Some(c) if c <= lo * (1.0 + 1e-6) => Some(GridEdge::Lower),
                Some(c) if c >= hi * (1.0 - 1e-6) => Some(GridEdge::Upper),
                Some(_) => None,
            };
            let chosen = rule_choice.unwrap_or(opts.lambda_floor.max(lo));
            // The floor replaces only a choice that ran off the bottom of the
            // grid (the drift of GCV on noise-free data); an interior choice
            // below it is the data's own (a long, densely sampled record
            // whose bins average thousands of samples) and is kept.
            let floored = chosen < opts.lambda_floor && grid_edge == Some(GridEdge::Lower);
            let used = if floored { opts.lambda_floor } else { chosen };
            // Warm-start the final solve from the nearest grid point.
            if let Some(p) = path.points.iter().min_by(|a, b| {
                (a.solution.lambda / used)
                    .ln()
                    .abs()
                    .total_cmp(&(b.solution.lambda / used).ln().abs())
            }) {
                start.clone_from(&p.solution.free);
            }
            LambdaSelection {
                lambda: used,
                rule: Some(rule),
                rule_choice,
                floored,
                grid_edge,
                curves: Some(LambdaCurves {
                    lambda: lambdas,
                    residual_sq: path.points.iter().map(|p| p.solution.residual_sq).collect(),
                    penalty_sq: path.points.iter().map(|p| p.solution.penalty_sq).collect(),
                    dof: path.points.iter().map(|p| p.dof).collect(),
                    rules,
                }),
            }
        }
    };
    let solution = problem.solve(selection.lambda, &start);
    let dof = if opts.dof_trace || opts.bands.is_some() {
        problem.influence_trace(selection.lambda, &solution.free)
    } else {
        f64::NAN
    };
    // A degenerate subproblem at a tiny lambda of the path does not taint
    // the final answer; an iteration limit or a non-finite value does.
    let mut status = solution.info.status;
    if severity(path_status) >= severity(SolveStatus::MaxIterations) {
        status = worst(status, path_status);
    }
    let info = SolveInfo {
        iterations: solution.info.iterations,
        status,
        path_status,
        kkt_residual: solution.info.kkt_residual,
        shift: solution.info.shift,
        equations: problem.nrows(),
        unknowns: problem.ncols(),
        dof,
        adaptive_iterations: None,
        adaptive_converged: false,
        adaptive_change_rel: None,
    };
    Selected {
        solution,
        selection,
        info,
        noise_rms: noise,
        problem: problem.clone(),
    }
}

/// Refines a global selection by the uniform penalty of
/// [`DrtOptions::adaptive`] on the first `n_gamma` unknowns (the basis
/// coefficients); without it, returns `global` as it is. The lambda
/// selection (rule, curves, floor) stays the global one: it is where the
/// refinement starts and what its residual is anchored to.
pub(crate) fn refine(
    problem: &Tikhonov,
    global: Selected,
    opts: &DrtOptions,
    n_gamma: usize,
) -> Selected {
    let Some(a) = &opts.adaptive else {
        return global;
    };
    // The residual of the global solution is a noise level to anchor to,
    // unless the rule's choice ran off the bottom of the grid: then the
    // data showed none (GCV on exact data). A choice on the top edge still
    // has a real residual (heavy noise, or a model that misses), and
    // without the anchor the weights would feed on it.
    let anchor = global.selection.grid_edge != Some(GridEdge::Lower);
    let refined = adaptive::refine(problem, n_gamma, &global.solution, a, anchor);
    let solution = refined.solution;
    // Every solve counts: the global one's status and its path's serious
    // failures, and the worst of the weighted solves.
    let status = worst(global.info.status, refined.status);
    let info = SolveInfo {
        iterations: solution.info.iterations,
        status,
        kkt_residual: solution.info.kkt_residual,
        shift: solution.info.shift,
        dof: if opts.dof_trace || opts.bands.is_some() {
            refined
                .problem
                .influence_trace(solution.lambda, &solution.free)
        } else {
            f64::NAN
        },
        adaptive_iterations: Some(refined.iterations),
        adaptive_converged: refined.converged,
        adaptive_change_rel: (refined.iterations > 0).then_some(refined.change_rel),
        ..global.info
    };
    Selected {
        solution,
        info,
        problem: refined.problem,
        ..global
    }
}
