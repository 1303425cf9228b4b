//! Equivalent circuits: elements with closed-form impedances and DRTs
//! ([`element`]).

pub mod element;

pub use element::{Element, Series};
