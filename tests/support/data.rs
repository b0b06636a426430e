//! Shared helpers for the integration tests. What benchmarks and the load
//! generator need as well lives in `hodos_testkit` and is re-exported here.
//!
//! # Layout
//!
//! - this file: test data locations (`tests/data` fixtures, the DIMACS NY
//!   files with their `SKIPPED` line) and writing small input files.
//! - [`graphs`]: the petgraph reference Dijkstra, exactness checks, grids
//!   and hierarchies, sampled points and metrics.
//! - [`http`]: one request through a router, read back.
//! - [`running`]: a service on 127.0.0.1 port 0 with its stop, and a
//!   bounded client.
//! - [`chromium`]: headless Chromium, or SKIPPED without it.
//! - [`service`]: a synthetic-city artifact and configuration for service
//!   tests.
//! - [`tables`]: speed tables over that city's edges.
#![allow(dead_code, unused_imports)]

pub mod chromium;
pub mod graphs;
pub mod http;
pub mod running;
pub mod service;
pub mod tables;

pub use graphs::{assert_exact, petgraph_of, random_speeds, reference_dists};
pub use hodos_testkit::{DimacsNy, SplitMix64};

use std::path::{Path, PathBuf};

/// The DIMACS NY files, or `None` after printing why the check is skipped.
pub fn dimacs_ny() -> Option<DimacsNy> {
    DimacsNy::find().map_err(hodos_testkit::skipped).ok()
}

/// The OSM fixtures copied into tests/data.
pub fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data")
        .join(name)
}

/// Writes `content` to `dir/name` and returns the path.
pub fn write(dir: &Path, name: &str, content: impl AsRef<[u8]>) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, content).unwrap();
    path
}
