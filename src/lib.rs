#![recursion_limit = "256"]
//! hodos: travel times (ETAs) over customizable contraction hierarchies.
//!
//! # Layout
//!
//! The folders are the layers, bottom first; each uses only the ones listed
//! before it (checked by `tests/layers.rs`):
//!
//! - [`engine`]: road graphs, import, nested-dissection order, the
//!   customizable contraction hierarchy and its queries and matrices,
//!   snapping, calibration, the region front door, the artifact file and
//!   the offline build.
//! - [`serving`]: per-region snapshots behind `arc-swap` and their update
//!   paths, speed tables, tier choice and fallbacks, admission control,
//!   background threads, metric names and recording.
//! - [`truth`]: completed trips: readers, replaying each trip as hodos
//!   would have answered it at its departure, error metrics and the
//!   accuracy report.
//! - [`http`]: the axum routers, DTOs, RFC 9457 problems, OpenAPI document,
//!   admin API and Prometheus exporter.
//! - [`config`]: the TOML configuration file, which composes the settings
//!   each layer declares; [`demo`]: the demo city's files and feed. Both sit
//!   on top, beside the binary.
//! - [`testkit`]: support code for tests, benchmarks, examples and the load
//!   generator (deterministic sampling, the shared datasets' location, speed
//!   tables and configuration text); also on top, used by no other layer.

pub mod config;
pub mod demo;
pub mod engine;
pub mod http;
pub mod serving;
pub mod testkit;
pub mod truth;
