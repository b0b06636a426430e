//! The learn layer's integration tests, one binary: each module was a file
//! of the workspace's tests/. They never link HTTP.
//!
//! # Layout
//!
//! - [`correction_ny`]: the correction's goals on the shared NYC trips.

mod correction_ny;
