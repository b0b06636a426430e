#![forbid(unsafe_code)]
//! The engine: road graphs, their hierarchy and the exact answers computed
//! on them, plus the offline pipeline and file format that produce a region.
//!
//! # Layout
//!
//! - [`geo`]: haversine, local projection; pure arithmetic.
//! - [`graph`]: the road graph (nodes at intersections, directed edges with
//!   shape and external ids) and its builder.
//! - [`import`]: OpenStreetMap PBF, DIMACS and the synthetic city → graph.
//! - [`order`], [`cch`]: nested dissection by inertial flow; the
//!   customizable contraction hierarchy, its customization, point queries
//!   and bucket many-to-many.
//! - [`metric`], [`snap`], [`calibration`]: speeds → weights, coordinate
//!   snapping, heuristic-tier factors.
//! - [`region`]: the query front door: coordinates → ETAs, routes and
//!   coordinate matrices for one metric.
//! - [`build`], [`artifact`]: the offline pipeline and its file format.
//! - [`segments`]: every directed segment as CSV or GeoJSON, for speed
//!   tables to name (written to any writer).
//! - `testing` (unit tests only): a small synthetic city and petgraph's
//!   Dijkstra as the reference.
//!
//! **Architecture Invariant:** the engine knows nothing of serving or HTTP:
//! no `crate::serving`, `crate::http`, `crate::config` or `crate::demo`
//! import, no metrics, no tokio. Only `import` and `artifact` touch files.

pub mod artifact;
pub mod build;
pub mod calibration;
pub mod cch;
pub mod geo;
pub mod graph;
pub mod import;
pub mod metric;
pub mod order;
pub mod region;
pub mod segments;
pub mod snap;
#[cfg(test)]
pub(crate) mod testing;
