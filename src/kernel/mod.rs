//! Discretised kernels: basis functions on the tau grid and the matrices that
//! map basis coefficients to impedance.

pub mod basis;
pub mod impedance;
pub mod quadrature;

pub use basis::{Basis, BasisKind};
pub use impedance::ImpedanceKernel;
