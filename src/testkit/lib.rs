#![forbid(unsafe_code)]
//! Support code for tests, benchmarks, examples and the load generator:
//! a small deterministic generator, the location of the shared open
//! datasets, writers for speed tables, petgraph's Dijkstra as the
//! reference every exactness check compares against, headless Chromium,
//! and re-running one test alone in a child process. It depends on no
//! hodos crate, so every layer's tests can use it (a dev-dependency; the
//! service never links it). Helpers that need hodos types live in
//! `tests/support*` (crates `hodos-test-support`, `hodos-test-replay`,
//! `hodos-test-service`).
//!
//! # Layout
//!
//! - [`splitmix`]: SplitMix64 and the node samplers built on it.
//! - [`data`]: `$HODOS_DATA_DIR` (default `../shared/data`), the DIMACS NY
//!   files, the NYC TLC trip sample, and the `SKIPPED:` line printed when
//!   they are absent (a failure under `HODOS_REQUIRE_DATA=1`).
//! - [`tables`]: historical and live speed tables as CSV text, and live
//!   observations as JSON values.
//! - [`reference`]: one-to-all distances by petgraph's Dijkstra.
//! - [`chromium`]: headless Chromium, or SKIPPED without it.
//! - [`child`]: one test of the running binary re-run alone in a child
//!   process.

pub mod child;
pub mod chromium;
pub mod data;
pub mod reference;
pub mod splitmix;
pub mod tables;

pub use data::{
    data_dir, skipped, skipped_unless_required, tlc_trip_files, DimacsNy, DATA_DIR_ENV,
    REQUIRE_DATA_ENV,
};
pub use reference::{reference_dists, ReferenceGraph};
pub use splitmix::{node_pairs, nodes, SplitMix64};
pub use tables::{
    observation, segment_observation, HistoricalCsv, LiveCsv, HISTORICAL_HEADER, LIVE_HEADER,
};
