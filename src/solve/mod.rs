//! Solvers on plain matrices: they know nothing about impedance.
//!
//! - [`nnls`](mod@nnls): exact active-set non-negative QP solver (the default backend).
//! - [`tikhonov`]: the stacked Tikhonov problem, its solutions along a path of
//!   regularisation parameters, and the influence-matrix trace.
//! - `osqp` (feature `osqp`): an independent QP backend (OSQP, C code built
//!   with CMake) to cross-check the native solver.

pub mod nnls;
#[cfg(feature = "osqp")]
pub mod osqp;
pub mod tikhonov;

pub use nnls::{NnlsInfo, NnlsParams, NnlsSolution, SolveStatus, nnls};
pub use tikhonov::{Tikhonov, TikhonovSolution};
