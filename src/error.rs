//! The crate's single error type.
//!
//! Every variant carries what a user needs to find and fix the problem: the
//! file, the 1-based line and field, and the offending text. The binary prints
//! `error: {}` and exits with code 2.

use std::path::PathBuf;

/// Errors returned by taumap's readers, parameter checks and solvers.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// A line of an input file could not be used.
    #[error("{}:{line}: {msg}", .path.display())]
    Parse {
        /// The input file.
        path: PathBuf,
        /// 1-based line number in the file.
        line: usize,
        /// What is wrong, quoting the offending text.
        msg: String,
    },
    /// Reading or writing a file failed.
    #[error("{}: {source}", .path.display())]
    Io {
        /// The file or directory concerned.
        path: PathBuf,
        /// The underlying I/O error.
        #[source]
        source: std::io::Error,
    },
    /// An input file holds too few usable points.
    #[error("{}: need at least {needed} data points, found {found}", .path.display())]
    TooFewPoints {
        /// The input file.
        path: PathBuf,
        /// Minimum number of points.
        needed: usize,
        /// Number of points found.
        found: usize,
    },
    /// A numeric parameter is out of its allowed range.
    #[error("parameter `{name}` must be {expected}, got {value}")]
    Param {
        /// Parameter name as the user knows it.
        name: &'static str,
        /// Allowed range in words.
        expected: &'static str,
        /// The value given.
        value: f64,
    },
    /// A combination of settings that cannot work.
    #[error("{0}")]
    Config(String),
    /// Data handed to the library directly (not read from a file) is
    /// unusable, e.g. vectors of different lengths passed to a constructor.
    #[error("{0}")]
    Data(String),
    /// Drawing a plot failed.
    #[error("plot {}: {msg}", .path.display())]
    Plot {
        /// The plot file.
        path: PathBuf,
        /// What went wrong.
        msg: String,
    },
}

/// Result alias used across the crate.
pub type Result<T> = std::result::Result<T, Error>;
