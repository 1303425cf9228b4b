//! What every inversion returns: one distribution type, one record of how
//! `lambda` was chosen, one record of how the solver fared.
//!
//! Spectra and step transients produce the same kind of result (a
//! non-negative distribution on a log tau grid, series terms, peaks, a lambda
//! choice, solver diagnostics); only the fit to the measurement differs
//! ([`crate::pipeline::SpectrumFit`], [`crate::pipeline::TransientFit`]).
//! Writers and plots take [`Distribution`] once for both.

use crate::grid::TauGrid;
use crate::lambda::{LambdaCurves, LambdaRule};
use crate::peaks::Peak;
use crate::solve::SolveStatus;

/// What a distribution is measured in.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum DistributionUnit {
    /// Ohm per unit ln tau: the impedance DRT (spectra, current steps,
    /// relaxations).
    Ohm,
    /// Siemens per unit ln tau: the admittance distribution (voltage steps).
    Siemens,
}

impl DistributionUnit {
    /// The unit's name as it appears in column names and JSON keys.
    pub fn name(self) -> &'static str {
        match self {
            DistributionUnit::Ohm => "ohm",
            DistributionUnit::Siemens => "siemens",
        }
    }
}

/// The end of the lambda grid that a rule's choice sits on.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum GridEdge {
    /// The smallest grid value (the data asked for less smoothing than the
    /// grid offers), or no choice at all (then the floor, or the smallest
    /// grid value, is used).
    Lower,
    /// The largest grid value (the rule wants more smoothing than the grid
    /// offers: the distribution is as flat as the grid allows).
    Upper,
}

/// How `lambda` was chosen.
#[derive(Clone, Debug)]
pub struct LambdaSelection {
    /// The `lambda` used (dimensionless, see [`crate::pipeline`]).
    pub lambda: f64,
    /// The rule that chose it, or `None` when fixed by the caller.
    pub rule: Option<LambdaRule>,
    /// The rule's own choice before the floor, `None` when fixed or when
    /// the rule found none.
    pub rule_choice: Option<f64>,
    /// Whether the rule's choice was raised to the floor.
    pub floored: bool,
    /// The grid end the rule's choice sits on, if any. A choice on the edge
    /// is not a minimum (or corner, or crossing) of the rule's curve: the
    /// rule did not find what it looks for inside the grid.
    pub grid_edge: Option<GridEdge>,
    /// Every computed rule's curve over the grid, when a rule was used.
    pub curves: Option<LambdaCurves>,
}

impl LambdaSelection {
    /// A sentence for the user when the choice deserves doubt, else `None`.
    /// A choice raised to the floor is the designed response to data that
    /// ask for no smoothing at all and gets none.
    pub fn warning(&self) -> Option<String> {
        let rule = self.rule?;
        let curves = self.curves.as_ref()?;
        let (lo, hi) = (curves.lambda.first()?, curves.lambda.last()?);
        match (self.rule_choice, self.grid_edge) {
            (None, _) => Some(format!(
                "the {rule} rule found no lambda on its grid ({lo:.0e} to {hi:.0e}); used {:.3e} \
                 (fix lambda or choose another rule)",
                self.lambda
            )),
            (Some(c), Some(GridEdge::Upper)) => Some(format!(
                "the {rule} rule chose lambda = {c:.3e}, the largest value of its grid: it asks \
                 for more smoothing than the grid allows; the data may be noisier than the rule \
                 estimates, or the model may not describe this measurement"
            )),
            (Some(c), Some(GridEdge::Lower)) if !self.floored => Some(format!(
                "the {rule} rule chose lambda = {c:.3e}, the smallest value of its grid: the \
                 distribution may be under-smoothed (ripple can show as small peaks)"
            )),
            _ => None,
        }
    }

    /// A sentence for the user when a bound, not the rule, decided lambda
    /// and no warning says so already: the rule's choice ran off the bottom
    /// of its grid and was raised to the floor (the data show no noise
    /// level, as noise-free or heavily averaged data do). `None` otherwise.
    pub fn note(&self) -> Option<String> {
        if !self.floored || self.warning().is_some() {
            return None;
        }
        let rule = self.rule?;
        let lo = self.curves.as_ref()?.lambda.first()?;
        Some(format!(
            "the {rule} rule ran off the bottom of its lambda grid ({lo:.0e}): the data show no \
             noise level; lambda raised to the floor {:.0e} (summary.json: lambda_floored; a \
             fixed --lambda to change it)",
            self.lambda
        ))
    }
}

/// Diagnostics of the solves behind one distribution.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct SolveInfo {
    /// Active-set iterations of the final solve.
    pub iterations: usize,
    /// How the final solve ended; a failure anywhere on the lambda path
    /// that shaped the choice (iteration limit, non-finite values,
    /// unboundedness) is reported here too.
    pub status: SolveStatus,
    /// The worst status along the lambda path (`converged` when fixed).
    pub path_status: SolveStatus,
    /// Largest violation of the optimality (KKT) conditions of the final
    /// solve, in the units of the scaled normal equations.
    pub kkt_residual: f64,
    /// Diagonal shift applied to a singular subproblem of the final solve
    /// (0 when none).
    pub shift: f64,
    /// Number of equations (2 per frequency of a spectrum, 1 per time bin of
    /// a transient).
    pub equations: usize,
    /// Number of unknowns.
    pub unknowns: usize,
    /// Effective number of parameters at the final lambda.
    pub dof: f64,
    /// Weighted solves of the adaptive penalty (`None`: global penalty
    /// only).
    pub adaptive_iterations: Option<usize>,
    /// The adaptive iteration stopped on its change tolerance (false: on
    /// its iteration limit; also false without the adaptive penalty).
    pub adaptive_converged: bool,
    /// The relative change `||x_new - x|| / ||x_new||` of the coefficients
    /// in the last adaptive solve (`None`: global penalty). The refinement
    /// stops after [`AdaptiveOptions::max_iter`](super::adaptive::AdaptiveOptions)
    /// solves by design; this says how settled it was (on the resolution
    /// ladder: median 0.8 %, 90 % of spectra below 4 %).
    pub adaptive_change_rel: Option<f64>,
}

impl SolveInfo {
    /// A sentence for the user when the final solve (or the lambda path that
    /// chose it) did not simply converge, else `None`.
    pub fn warning(&self) -> Option<String> {
        Some(match self.status {
            SolveStatus::Converged => return None,
            SolveStatus::Degenerate => format!(
                "a singular subproblem of the solver needed a diagonal shift of {:.1e}: the \
                 result is optimal for the shifted problem (KKT residual {:.1e})",
                self.shift, self.kkt_residual
            ),
            SolveStatus::MaxIterations => format!(
                "the active-set solver stopped at its iteration limit (path: {}); the result is \
                 its last feasible iterate, not the optimum (KKT residual {:.1e})",
                status_name(self.path_status),
                self.kkt_residual
            ),
            SolveStatus::Unbounded => "the regularised problem is unbounded (an unknown the \
                 data and the penalty do not fix); the result is not a solution"
                .to_string(),
            SolveStatus::NonFinite => "the problem holds values that are not finite (overflow \
                 or underflow of the data's scale); the distribution is empty"
                .to_string(),
        })
    }
}

fn status_name(s: SolveStatus) -> &'static str {
    match s {
        SolveStatus::Converged => "converged",
        SolveStatus::Degenerate => "degenerate",
        SolveStatus::MaxIterations => "iteration limit",
        SolveStatus::Unbounded => "unbounded",
        SolveStatus::NonFinite => "non-finite",
    }
}

/// A non-negative distribution of relaxation times and what came with it,
/// in physical units.
#[derive(Clone, Debug)]
pub struct Distribution {
    /// Ohm (impedance DRT) or siemens (admittance distribution).
    pub unit: DistributionUnit,
    /// The discretisation grid (basis centres).
    pub grid: TauGrid,
    /// Basis coefficients, in [`Self::unit`].
    pub coeffs: Vec<f64>,
    /// Output tau samples (s), ascending; `oversample` per grid step.
    pub tau_s: Vec<f64>,
    /// The distribution at `tau_s`, in [`Self::unit`] per unit ln tau.
    pub gamma: Vec<f64>,
    /// Integral of the distribution: R_pol (ohm) or the total decaying
    /// conductance G_pol (siemens).
    pub total: f64,
    /// The terms in series with the distribution.
    pub series: SeriesTerms,
    /// Reported peaks, ascending tau; areas in [`Self::unit`].
    pub peaks: Vec<Peak>,
    /// The fit's resolution in [`Self::unit`]: a peak of smaller area cannot
    /// be told from the residual (used as the peaks' `min_area`).
    pub min_area: f64,
    /// RMS of the relative residual, as a fraction (defined by the front
    /// end: relative to |Z| for spectra, to the step response for
    /// transients).
    pub residual_rms_rel: f64,
    /// How lambda was chosen.
    pub lambda: LambdaSelection,
    /// Solver diagnostics.
    pub info: SolveInfo,
    /// Doubts about the input or the result worth showing the user; empty
    /// when none.
    pub warnings: Vec<String>,
    /// The free set of the final solve, to warm-start the next response of
    /// a series on the same plan.
    pub warm_start: WarmStart,
    /// Uncertainty bands, when asked for ([`super::DrtOptions::bands`]).
    pub bands: Option<super::bands::Bands>,
}

/// The terms of the model in series with the distribution.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct SeriesTerms {
    /// The instantaneous term in [`Distribution::unit`]: the series
    /// resistance R_inf (ohm), or the steady conductance G_inf (siemens) of
    /// a voltage step; `None` when the data cannot fix it (a relaxation
    /// without a pre-step baseline).
    pub instantaneous: Option<f64>,
    /// Series inductance (H), when modelled.
    pub inductance_h: Option<f64>,
    /// Series capacitance (F), when modelled; infinite when the fit found
    /// none.
    pub series_capacitance_f: Option<f64>,
}

/// A starting point for the active-set solver: the unknowns (plan columns)
/// that were positive in a neighbouring solution. Pass
/// [`Distribution::warm_start`] of one response to the next of a series.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct WarmStart {
    /// Indices of the positive unknowns, ascending.
    pub free: Vec<usize>,
}

/// A distribution together with its fit to the measurement.
#[derive(Clone, Debug)]
pub struct Inversion<F> {
    /// The distribution, series terms aside.
    pub drt: Distribution,
    /// The fit to the measurement and the series terms of its model.
    pub fit: F,
}
