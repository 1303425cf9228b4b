//! Solvers on plain matrices: they know nothing about impedance.
//!
//! - [`nnls`]: exact active-set non-negative QP solver (the default backend).
//! - [`tikhonov`]: the stacked Tikhonov problem, its solutions along a path of
//!   regularisation parameters, and the influence-matrix trace.

pub mod nnls;
pub mod tikhonov;

pub use nnls::{NnlsSolution, SolveStatus, nnls_normal};
pub use tikhonov::{Tikhonov, TikhonovSolution};
