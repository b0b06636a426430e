//! Support code for tests, benchmarks, examples and the load generator:
//! a small deterministic generator, the location of the shared open
//! datasets, and writers for speed tables and configuration text. Nothing
//! here is used by the service itself; it sits in the top layer beside
//! [`crate::config`] and [`crate::demo`] and needs no test-only
//! dependencies.
//!
//! # Layout
//!
//! - [`splitmix`]: SplitMix64 and the node samplers built on it.
//! - [`data`]: `$HODOS_DATA_DIR` (default `../shared/data`), the DIMACS NY
//!   files, the NYC TLC trip sample, and the `SKIPPED:` line printed when
//!   they are absent.
//! - [`tables`]: historical and live speed tables as CSV text, and live
//!   observations as JSON values.
//! - [`config_text`]: the `[[region]]` table of a configuration file.
//! - [`weekly`]: a 168-hour historical table with daily patterns and noise.
//! - [`ny_trips`]: the shared NYC trips replayed on USA-road-d.NY.

pub mod config_text;
pub mod data;
pub mod ny_trips;
pub mod splitmix;
pub mod tables;
pub mod weekly;

pub use config_text::region_table;
pub use data::{data_dir, skipped, tlc_trip_files, DimacsNy, DATA_DIR_ENV};
pub use ny_trips::replayed_tlc_on_ny;
pub use splitmix::{node_pairs, nodes, SplitMix64};
pub use tables::{
    observation, segment_observation, HistoricalCsv, LiveCsv, HISTORICAL_HEADER, LIVE_HEADER,
};
pub use weekly::{weekly_table, WeeklyTable};
