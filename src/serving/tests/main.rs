//! Serving's integration tests, one binary: each module was a file of the
//! workspace's tests/ and checks the public API of `hodos-serving` (its
//! speed tables and the graph answers on real data). They link serving,
//! the engine and the dev-only helpers below serving, never HTTP.
//!
//! # Layout
//!
//! - [`speeds`]: the speed data layer on a tiny hand-built graph.
//! - [`segment_tables`]: speed tables naming hodos segments.
//! - [`profiles_ny`]: every departure hour answered from the graph on
//!   USA-road-d.NY.

mod profiles_ny;
mod segment_tables;
mod speeds;
