#![forbid(unsafe_code)]
//! Support code for tests, benchmarks, examples and the load generator:
//! a small deterministic generator, the location of the shared open
//! datasets, writers for speed tables, and petgraph's Dijkstra as the
//! reference every exactness check compares against. It depends on no
//! hodos crate, so every layer's tests can use it (a dev-dependency; the
//! service never links it). Helpers that need hodos types live in
//! `tests/support` (crate `hodos-test-support`).
//!
//! # Layout
//!
//! - [`splitmix`]: SplitMix64 and the node samplers built on it.
//! - [`data`]: `$HODOS_DATA_DIR` (default `../shared/data`), the DIMACS NY
//!   files, the NYC TLC trip sample, and the `SKIPPED:` line printed when
//!   they are absent.
//! - [`tables`]: historical and live speed tables as CSV text, and live
//!   observations as JSON values.
//! - [`reference`]: one-to-all distances by petgraph's Dijkstra.

pub mod data;
pub mod reference;
pub mod splitmix;
pub mod tables;

pub use data::{data_dir, skipped, tlc_trip_files, DimacsNy, DATA_DIR_ENV};
pub use reference::{reference_dists, ReferenceGraph};
pub use splitmix::{node_pairs, nodes, SplitMix64};
pub use tables::{
    observation, segment_observation, HistoricalCsv, LiveCsv, HISTORICAL_HEADER, LIVE_HEADER,
};
