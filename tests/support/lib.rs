#![forbid(unsafe_code)]
//! Test helpers that need the engine's types and nothing above them (the
//! leaf helpers without hodos types are `hodos-testkit`'s): graphs and
//! their petgraph references, test inputs on disk, tiny OpenStreetMap
//! files, a 168-hour table over a graph and the `[[region]]` text of a
//! configuration file. Every layer's tests may use it: it depends only on
//! `hodos-engine` and `hodos-testkit`, so a change above the engine
//! rebuilds nothing here. A dev-only crate: the service never links it.
//!
//! # Layout
//!
//! - [`graphs`]: the petgraph reference per road graph, exactness checks,
//!   grids and hierarchies, sampled points and metrics, graph comparison.
//! - [`data`]: the `tests/data` fixtures, the DIMACS NY files (or
//!   SKIPPED), small files written by a test.
//! - [`osm_pbf`]: a hand-written PBF encoder for tiny fixtures.
//! - [`weekly`]: a 168-hour historical table with daily patterns and noise.
//! - [`config_text`]: the `[[region]]` table of a configuration file.

pub mod config_text;
pub mod data;
pub mod graphs;
pub mod osm_pbf;
pub mod weekly;

pub use config_text::region_table;
pub use data::{dimacs_ny, fixture, write};
pub use graphs::{assert_exact, petgraph_of, random_speeds, reference_dists};
pub use hodos_testkit::{DimacsNy, SplitMix64};
pub use weekly::{weekly_table, WeeklyTable};
