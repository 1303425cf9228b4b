//! The inversion pipeline: measurement axis and options in, a prepared
//! [`Plan`], then one [`Distribution`] per response.
//!
//! ```text
//!   reader (crate::io)          front end                      shared back end
//!   Spectrum ───────────────▶ SpectrumPlan::new(f, params) ─┐
//!                                                            ├─▶ Plan: grid, basis, kernel,
//!   BinnedTransient ─(binning)▶ TransientPlan::new(rec, p) ─┘     penalty, prior, A'A
//!                                                                   │ per response:
//!                                                                   ▼
//!                                 select (lambda rule, final NNLS solve)
//!                                                                   │
//!                                                                   ▼
//!                    Inversion { drt: Distribution, fit: SpectrumFit | TransientFit }
//!                                                                   │
//!                                          crate::report (CSV, JSON), crate::plot
//! ```
//!
//! - [`options`]: [`DrtOptions`], the discretisation and regularisation
//!   settings every inversion shares.
//! - [`plan`]: [`Plan`], the prepared problem on one measurement axis,
//!   the extension prior and the sampled distribution.
//! - `select`: the choice of lambda and the final solve (crate-internal).
//! - [`adaptive`]: the locally adaptive (uniform) penalty that refines the
//!   global solution.
//! - [`result`]: [`Distribution`], [`LambdaSelection`], [`SolveInfo`], the
//!   one result type of every inversion.
//! - [`spectrum`]: the spectrum front end ([`SpectrumPlan`], [`invert`]).
//! - [`transient`](mod@transient): the step-transient front end
//!   ([`TransientPlan`], [`invert_transient`]).
//! - [`binning`]: log-time binning of long transients.
//!
//! Scaling: the unknowns are solved in units of the response's largest
//! magnitude (max |Re Z| of a spectrum, the largest change of a transient), so
//! `lambda` is dimensionless and comparable between measurements.

pub mod adaptive;
pub mod bands;
pub mod binning;
pub mod options;
pub mod plan;
pub mod result;
pub(crate) mod select;
pub mod spectrum;
pub mod transient;

pub use crate::lambda::{LambdaChoice, LambdaCurves, LambdaRule};
pub use options::{DEFAULT_RULE, DrtOptions};
pub use plan::{Plan, sample_distribution};
pub use result::{
    Distribution, DistributionUnit, GridEdge, Inversion, LambdaSelection, SeriesTerms, SolveInfo,
    WarmStart,
};
pub use spectrum::{
    CapacitanceMode, InductanceMode, InvertParams, LR_THRESHOLD, SpectrumFit, SpectrumInversion,
    SpectrumPlan, Weighting, invert, looks_inductive,
};
pub use transient::{
    BaselineSource, StepKind, TRANSIENT_PER_DECADE, TransientFit, TransientInversion,
    TransientParams, TransientPlan, invert_transient,
};
