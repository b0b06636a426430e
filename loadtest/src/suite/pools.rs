//! The request pools a suite draws from, one per query workload, the pool
//! of a given kind for single-scenario commands, everything drawn from the
//! served artifact (pools, edges for admin traffic, bounding box), and the
//! workloads the suite measures with their first capacity-search rate.

use crate::workload::{EdgeRef, Kind, Workload};
use hodos::engine::geo::LatLon;
use std::sync::Arc;

/// The request pools.
#[derive(Debug, Clone)]
pub struct Workloads {
    pub eta: Workload,
    pub route: Workload,
    pub m1x50: Workload,
    pub m20x20: Workload,
}

/// A request pool of the given kind (for single-scenario commands).
pub fn pick(w: &Workloads, k: Kind) -> Workload {
    match k {
        Kind::Eta => w.eta.clone(),
        Kind::Route => w.route.clone(),
        Kind::Matrix { rows: 1, .. } => w.m1x50.clone(),
        Kind::Matrix { .. } => w.m20x20.clone(),
    }
}

/// What is drawn from the artifact: request pools, edges, bounding box.
pub struct Drawn {
    pub w: Workloads,
    pub edges: Arc<Vec<EdgeRef>>,
    pub lo: LatLon,
    pub hi: LatLon,
    pub nodes: usize,
}

/// A workload the suite measures: its name, its pool, and the first rate
/// the capacity search tries on hodos (the baseline starts at 4×).
pub struct Workset {
    pub name: &'static str,
    pub w: Workload,
    pub start: f64,
}
