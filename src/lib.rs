//! taumap: the distribution of relaxation times (DRT) of an impedance spectrum
//! or a step transient.
//!
//! The model is a Fredholm integral equation of the first kind,
//!
//! $$ Z(\omega) = R_\infty + j\omega L + \int \frac{\gamma(\ln\tau)}{1 + j\omega\tau}\,d\ln\tau, $$
//!
//! with a non-negative gamma in ohm per unit ln tau. taumap discretises it on a
//! log-spaced grid, solves the Tikhonov-regularised non-negative least-squares
//! problem with an exact active-set solver, chooses the regularisation
//! parameter automatically, and reports peaks with their resistances. Step
//! transients (current steps, relaxations, voltage steps) go through the same
//! solver on time-domain kernels ([`pipeline::transient`]).
//!
//! # Module map
//! - [`io`]: CSV readers (line-aware errors, streaming for long transients)
//!   and atomic output writing.
//! - [`pipeline`]: the inversion pipeline: options, the prepared [`Plan`]
//!   (built once per measurement axis), the lambda choice and final solve,
//!   the shared result type [`Distribution`], and the spectrum and
//!   transient front ends ([`SpectrumPlan`], [`TransientPlan`]) with the
//!   log-time binning of transients.
//! - [`circuit`]: equivalent-circuit elements (impedance and analytical
//!   DRT of each).
//! - [`grid`]: the log-spaced tau grid.
//! - [`kernel`]: basis functions, quadrature, impedance and step kernels.
//! - [`solve`]: NNLS, the Tikhonov problem and (feature `osqp`) an
//!   independent QP backend; plain matrices only.
//! - [`lambda`]: rules for choosing lambda (GCV, L-curve, discrepancy, re-im CV).
//! - [`peaks`]: peak detection and per-peak resistance.
//! - [`report`]: output tables and the JSON summary.
//! - [`series`]: series of spectra: batch inversion on one grid, peak
//!   tracks, trends and Arrhenius fits.
//! - [`plot`] (feature `plot`): SVG and PNG figures.
//! - [`synth`] (feature `synth`): analytical elements for tests and the demo.
//! - [`linalg`]: the dense [`linalg::Matrix`] of the public API.
//!
//! The binary enables the `plot` and `synth` features (both on by
//! default); a library user who needs neither builds with
//! `default-features = false`.
//!
//! # Example
//! ```
//! use taumap::pipeline::{invert, InvertParams};
//! use taumap::io::Spectrum;
//! use taumap::synth::{log_frequencies, Element, Series};
//!
//! // A Voigt element R = 50 ohm, tau = 1 ms behind 10 ohm.
//! let cell = Series(vec![
//!     Element::Resistor { r_ohm: 10.0 },
//!     Element::Voigt { r_ohm: 50.0, tau_s: 1e-3 },
//! ]);
//! let f = log_frequencies(1e-1, 1e5, 10.0);
//! let (re, im) = cell.sample(&f);
//! let inv = invert(&Spectrum::new(f, re, im)?, &InvertParams::default())?;
//! assert_eq!(inv.drt.peaks.len(), 1);
//! assert!((inv.drt.peaks[0].tau_s.log10() + 3.0).abs() < 0.05);
//! assert!((inv.drt.total - 50.0).abs() < 0.5);
//! # Ok::<(), taumap::Error>(())
//! ```
#![warn(missing_docs)]

pub mod circuit;
pub mod error;
pub mod grid;
pub mod io;
pub mod kernel;
pub mod kk;
pub mod lambda;
pub mod linalg;
pub mod peaks;
pub mod pipeline;
#[cfg(feature = "plot")]
pub mod plot;
pub mod report;
pub mod series;
pub mod solve;
#[cfg(feature = "synth")]
pub mod synth;
pub mod tmvn;

pub use error::{Error, Result};
pub use pipeline::{Distribution, Plan, SpectrumPlan, TransientPlan};
