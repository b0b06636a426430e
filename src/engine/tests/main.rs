//! The engine's integration tests, one binary: each module was a file of
//! the workspace's tests/ and checks the public API of `hodos-engine`
//! against outside references (petgraph, geographiclib, osmpbf, the
//! DIMACS and OpenStreetMap data). They link only the engine,
//! `hodos-testkit` and `hodos-test-support`, so a change above the engine
//! neither rebuilds nor relinks them.
//!
//! # Layout
//!
//! - [`artifact`]: the artifact file's round trip and refusals.
//! - [`at_nodes`]: coordinates exactly at intersections.
//! - [`calibration`]: the heuristic tier's calibration on Monaco.
//! - [`cch_grid`]: hierarchy exactness on small irregular grids.
//! - [`dimacs_import`]: the DIMACS importer on NY and on bad files.
//! - [`exactness`]: hierarchy travel times equal petgraph's Dijkstra.
//! - [`geo`]: haversine against geodesics.
//! - [`matrix`]: many-to-many matrices against outside references (and
//!   the counting allocator this binary runs on).
//! - [`ny`]: checks on USA-road-d.NY.
//! - [`osm_import`]: the OpenStreetMap importer on real extracts.
//! - [`synthetic_city`]: the fictional demo city.

mod artifact;
mod at_nodes;
mod calibration;
mod cch_grid;
mod dimacs_import;
mod exactness;
mod geo;
mod matrix;
mod ny;
mod osm_import;
mod synthetic_city;
