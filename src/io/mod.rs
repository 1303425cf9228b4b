//! Reading input files and writing results.
//!
//! - [`table`]: line-aware reader for delimited text tables, shared by all
//!   input formats, so every error can point at `FILE:LINE`;
//! - [`columns`]: the user's choice of columns and units, and SI-prefixed
//!   units in headings, shared by both readers;
//! - [`spectrum`]: impedance spectra (`frequency_hz,z_re_ohm,z_im_ohm` and
//!   accepted variants), checked at the boundary so later code may assume
//!   clean, sorted data;
//! - [`write`](mod@write): atomic output, so a failed run never leaves
//!   half-written results nor destroys earlier ones.

pub mod columns;
pub mod spectrum;
pub mod table;
pub mod transient;
pub mod write;

pub use spectrum::{Spectrum, parse_spectrum, read_spectrum};
