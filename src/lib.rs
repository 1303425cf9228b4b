//! taumap: distribution of relaxation times (DRT) from impedance spectra.
#![warn(missing_docs)]

pub mod error;
pub mod io;
pub mod plot;
#[cfg(feature = "osqp")]
pub mod osqp_backend;

pub use error::{Error, Result};
