//! Readers and writers.
