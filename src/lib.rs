//! hodos: travel times (ETAs) over customizable contraction hierarchies.
//!
//! # Layout
//!
//! - [`geo`]: haversine, local projection; pure arithmetic.
//! - [`graph`]: the road graph (nodes at intersections, directed edges with
//!   shape and external ids) and its builder.
//! - [`import`]: OpenStreetMap PBF, DIMACS and the synthetic city → graph.

pub mod admission;
pub mod answer;
pub mod artifact;
pub mod build;
pub mod calibration;
pub mod cch;
pub mod config;
pub mod customizer;
pub mod demo;
pub mod geo;
pub mod graph;
pub mod import;
pub mod metric;
pub mod order;
pub mod region;
pub mod service;
pub mod snap;
pub mod snapshot;
pub mod speeds;
pub mod tier;
