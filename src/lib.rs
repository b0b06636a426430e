#![forbid(unsafe_code)]
#![recursion_limit = "256"]
//! hodos: travel times (ETAs) over customizable contraction hierarchies.
//!
//! # Layout
//!
//! The layers are crates of one workspace (folders of `src/` with their own
//! `Cargo.toml`), so Cargo itself refuses an upward import. Bottom first:
//!
//! - [`engine`] (`hodos-engine`): road graphs, import, nested-dissection
//!   order, the customizable contraction hierarchy and its queries and
//!   matrices, snapping, calibration, the region front door, the artifact
//!   file and the offline build.
//! - [`serving`] (`hodos-serving`): per-region snapshots behind `arc-swap`
//!   and their update paths, speed tables, tier choice and fallbacks,
//!   admission control, background threads, metric names and recording.
//! - [`truth`] (`hodos-truth`): completed trips: readers, replaying each
//!   trip as hodos would have answered it at its departure, error metrics
//!   and the accuracy report.
//! - [`learn`] (`hodos-learn`): making what the service loads from trips
//!   (the correction model).
//! - [`http`] (`hodos-http`): the axum routers, DTOs, RFC 9457 problems,
//!   OpenAPI document, admin API and Prometheus exporter.
//! - this crate, on top: [`config`], the TOML configuration file, which
//!   composes the settings each layer declares; [`demo`], the demo city's
//!   files and feed; [`server`], running the service and its listeners
//!   together; and the `hodos` binary.
//!
//! The layer crates are re-exported under their short names, so
//! `hodos::engine::…` names the same item as `hodos_engine::…`.

pub use hodos_engine as engine;
pub use hodos_http as http;
pub use hodos_learn as learn;
pub use hodos_serving as serving;
pub use hodos_truth as truth;

pub mod config;
pub mod demo;
pub mod server;
