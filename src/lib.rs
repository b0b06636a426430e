//! hodos: travel times (ETAs) over customizable contraction hierarchies.
//!
//! # Layout
//!
//! - [`geo`]: haversine, local projection; pure arithmetic.
//! - [`graph`]: the road graph (nodes at intersections, directed edges with
//!   shape and external ids) and its builder.
//! - [`import`]: OpenStreetMap PBF, DIMACS and the synthetic city → graph.
//! - [`order`], [`cch`]: nested dissection by inertial flow; the
//!   customizable contraction hierarchy, its customization, point queries
//!   and bucket many-to-many matrices.
//! - [`metric`], [`snap`], [`calibration`], [`region`]: speeds → weights,
//!   coordinate snapping, heuristic-tier factors, and the query front door.
//! - [`build`], [`artifact`]: the offline pipeline and its file format.
//! - [`speeds`]: historical profiles, live observations, blending, saving.
//! - [`snapshot`]: per-region serving state behind `arc-swap` and every
//!   update path; [`customizer`]: the low-priority threads that run
//!   customizations and other update work; [`retire`]: superseded data
//!   freed on those threads, never by a request.
//! - [`admission`], [`cpu_wait`], [`answer`], [`tier`]: shedding under
//!   overload (and the CPU-wait signal it reads), tier
//!   choice and fallbacks.
//! - [`service`], [`config`]: the HTTP API (axum), metrics, OpenAPI, and
//!   the TOML configuration; [`demo`]: the demo city's files and feed.

pub mod admission;
pub mod answer;
pub mod artifact;
pub mod build;
pub mod calibration;
pub mod cch;
pub mod config;
pub mod cpu_wait;
pub mod customizer;
pub mod demo;
pub mod geo;
pub mod graph;
pub mod import;
pub mod metric;
pub mod order;
pub mod region;
pub mod retire;
pub mod service;
pub mod snap;
pub mod snapshot;
pub mod speeds;
pub mod tier;
