//! OSQP backend.
