//! Discretisation and regularisation options common to every inversion.

use crate::grid::TauGrid;
use crate::kernel::BasisKind;
use crate::lambda::{LambdaChoice, LambdaGrid, LambdaRule};
use crate::peaks::PeakOptions;
use crate::pipeline::adaptive::AdaptiveOptions;
use crate::pipeline::bands::BandOptions;
use crate::solve::NnlsParams;
use crate::{Error, Result};

/// The default rule, chosen by the accuracy benchmark in `docs/lambda-rules.md`.
pub const DEFAULT_RULE: LambdaRule = LambdaRule::Discrepancy;

/// Discretisation and regularisation options common to every inversion.
/// See [`DrtOptions::default`] for the defaults.
#[derive(Clone, Debug, PartialEq)]
pub struct DrtOptions {
    /// Grid points per decade of tau.
    pub per_decade: f64,
    /// Decades by which the grid extends past the measured band on each side.
    pub extend_decades: f64,
    /// Override of the smallest tau (s).
    pub tau_min_s: Option<f64>,
    /// Override of the largest tau (s).
    pub tau_max_s: Option<f64>,
    /// Basis family.
    pub basis: BasisKind,
    /// Derivative order k of the penalty (0, 1 or 2).
    pub penalty_order: usize,
    /// How lambda is chosen.
    pub lambda: LambdaChoice,
    /// The grid searched by the rules (dimensionless lambda).
    pub lambda_grid: LambdaGrid,
    /// Lambda used instead of a rule's choice that ran off the bottom of
    /// the lambda grid (see docs/lambda-rules.md); an interior choice below
    /// it is kept.
    pub lambda_floor: f64,
    /// Also compute the curve of the cross-validation rule
    /// ([`LambdaRule::Recv`], two more lambda sweeps) when another rule
    /// decides. The curves of GCV, the L-curve and the discrepancy principle
    /// come from the same sweep and are always computed.
    pub all_curves: bool,
    /// Peak reporting thresholds (`min_area` is set from the fit when 0).
    pub peaks: PeakOptions,
    /// Output samples of gamma per grid step.
    pub oversample: usize,
    /// Weight of the prior against distribution mass beyond the measured
    /// band, relative to the data's scale (0 switches it off).
    pub extension_prior: f64,
    /// Tolerances and iteration limit of every NNLS solve.
    pub nnls: NnlsParams,
    /// Locally adaptive (uniform) penalty refining the global solution
    /// (the default since the resolution ladder of
    /// docs/resolution-ladder.md); `None` keeps the global penalty alone.
    pub adaptive: Option<AdaptiveOptions>,
    /// Uncertainty bands sampled from the posterior (`None`: none; the
    /// library default, since they cost about a hundred times the
    /// inversion; the command line asks for them unless `--bands off`).
    pub bands: Option<BandOptions>,
    /// Compute the effective number of parameters of the final solve
    /// ([`SolveInfo::dof`](super::SolveInfo), an influence-matrix trace).
    /// A batch that reports none of it may switch it off (then `dof` is
    /// NaN); the bands and the automatic series-term test compute what
    /// they need whatever this says.
    pub dof_trace: bool,
}

impl Default for DrtOptions {
    /// 10 points per decade, one decade of extension, Gaussian basis, ridge
    /// penalty (k = 0), lambda by [`DEFAULT_RULE`] over 1e-8..1e1 at 3 per
    /// decade with a floor of 1e-6, then the adaptive penalty with its
    /// default [`AdaptiveOptions`], 5 output samples per grid step, an
    /// extension prior of 1e-2 and the default [`NnlsParams`].
    fn default() -> Self {
        Self {
            per_decade: 10.0,
            extend_decades: 1.0,
            tau_min_s: None,
            tau_max_s: None,
            basis: BasisKind::Gaussian,
            penalty_order: 0,
            lambda: LambdaChoice::Rule(DEFAULT_RULE),
            lambda_grid: LambdaGrid {
                min: 1e-8,
                max: 1e1,
                per_decade: 3.0,
            },
            lambda_floor: 1e-6,
            all_curves: false,
            peaks: PeakOptions::default(),
            oversample: 5,
            extension_prior: 1e-2,
            nnls: NnlsParams::default(),
            adaptive: Some(AdaptiveOptions::default()),
            bands: None,
            dof_trace: true,
        }
    }
}

impl DrtOptions {
    /// Checks every option, naming the offending one.
    pub fn validate(&self) -> Result<()> {
        if self.penalty_order > 2 {
            return Err(Error::Param {
                name: "penalty-order",
                expected: "0, 1 or 2",
                value: self.penalty_order as f64,
            });
        }
        if let LambdaChoice::Fixed(v) = self.lambda
            && !(v.is_finite() && v > 0.0)
        {
            return Err(Error::Param {
                name: "lambda",
                expected: "a positive number or a rule name (gcv, lcurve, discrepancy, recv)",
                value: v,
            });
        }
        self.lambda_grid.validate()?;
        if !(self.lambda_floor.is_finite() && self.lambda_floor >= 0.0) {
            return Err(Error::Param {
                name: "lambda-floor",
                expected: "a non-negative number",
                value: self.lambda_floor,
            });
        }
        if !(self.extension_prior.is_finite() && self.extension_prior >= 0.0) {
            return Err(Error::Param {
                name: "extension-prior",
                expected: "a non-negative number",
                value: self.extension_prior,
            });
        }
        if !(1..=50).contains(&self.oversample) {
            return Err(Error::Param {
                name: "oversample",
                expected: "between 1 and 50",
                value: self.oversample as f64,
            });
        }
        Ok(())
    }

    /// The tau grid for a measured band of time constants
    /// `[tau_lo_s, tau_hi_s]`: extended by `extend_decades` on each side,
    /// then overridden at either end by `tau_min_s` / `tau_max_s`.
    pub fn grid(&self, tau_lo_s: f64, tau_hi_s: f64) -> Result<TauGrid> {
        let default =
            TauGrid::for_tau_band(tau_lo_s, tau_hi_s, self.per_decade, self.extend_decades)?;
        match (self.tau_min_s, self.tau_max_s) {
            (None, None) => Ok(default),
            (lo, hi) => {
                let d = default.tau_s();
                let (d_lo, d_hi) = (d[0], d[d.len() - 1]);
                // An override past the other, default end: name the
                // override, not the default the user never gave.
                if let (Some(lo), None) = (lo, hi)
                    && lo >= d_hi
                {
                    return Err(Error::Param {
                        name: "tau-min",
                        expected: "below the default tau-max (one decade above the slowest time \
                                   constant the data resolve; give --tau-max to move it)",
                        value: lo,
                    });
                }
                if let (None, Some(hi)) = (lo, hi)
                    && hi <= d_lo
                {
                    return Err(Error::Param {
                        name: "tau-max",
                        expected: "above the default tau-min (one decade below the fastest time \
                                   constant the data resolve; give --tau-min to move it)",
                        value: hi,
                    });
                }
                TauGrid::new(lo.unwrap_or(d_lo), hi.unwrap_or(d_hi), self.per_decade)
            }
        }
    }
}
