//! Discretised kernels: basis functions on the tau grid and the matrices that
//! map basis coefficients to impedance or to a step response.

pub mod basis;
pub mod impedance;
pub mod quadrature;
pub mod step;

pub use basis::{Basis, BasisKind};
pub use impedance::ImpedanceKernel;
pub use step::{StepShape, step_kernel};
