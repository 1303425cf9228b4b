//! Equivalent circuits: elements with closed-form impedances and DRTs
//! ([`element`]).

pub mod element;
pub mod fit;
pub mod propose;
pub mod text;

pub use element::{Element, Series};
pub use text::{Model, ModelElement};
