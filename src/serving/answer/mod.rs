//! Answering a trip: region choice, tier choice, budgets, concurrency, and
//! the fallback to the heuristic tier. Every valid request gets an answer.
//!
//! Order of decisions for one trip:
//! 1. no region covers both ends → heuristic (configured defaults),
//!    `outside_regions`;
//! 2. the region has no snapshot → heuristic (configured defaults),
//!    `region_unavailable`;
//! 3. the request was not admitted (too many in flight, see
//!    [`crate::serving::admission`]) or no graph permit is free → heuristic (region
//!    calibration), `overloaded`;
//! 4. pick the metric: live if the departure is "now" (within the TTL) and
//!    the region holds fresh live data; otherwise the historical bucket of
//!    the departure hour; a bucket not customized within the budget →
//!    heuristic, `budget_exceeded`;
//! 5. snap and search: off-road → `off_network`, no path → `unreachable`,
//!    both from the region's calibration;
//! 6. label: the route's sources (time shares on live, historical and
//!    free-flow edges) give its tier, and with the live state of step 4
//!    its reason (`no_live_data`, `live_stale`, `no_live_on_route`,
//!    `live_minority`; see [`crate::serving::tier`]).
//!
//! # Layout
//!
//! - this file: [`Catalog`], [`Answer`], [`CellAnswer`], [`MatrixAnswer`];
//! - `gate`: steps 1–4, written once for trips and matrices;
//! - `trip`: [`trip`], step 5 for one trip; `matrix`: [`matrix_trip`],
//!   step 5 per cell;
//! - `scratch`: the per-thread search scratch both reuse.
//!
//! **Architecture Invariant:** no HTTP types here; the service converts
//! [`Answer`] to its DTOs.

mod gate;
mod matrix;
mod scratch;
#[cfg(test)]
mod tests;
mod trip;

pub use matrix::matrix_trip;
pub use trip::trip;

use crate::engine::calibration::Calibration;
use crate::engine::geo::LatLon;
use crate::serving::admission::Admission;
use crate::serving::settings::ServingSettings;
use crate::serving::snapshot::RegionHandle;
use crate::serving::tier::{FallbackReason, Sources, Tier};
use std::sync::Arc;
use std::time::Duration;
use tokio::sync::Semaphore;

/// All regions plus the shared limits.
#[derive(Debug)]
pub struct Catalog {
    pub regions: Vec<Arc<RegionHandle>>,
    pub cfg: ServingSettings,
    pub permits: Arc<Semaphore>,
    /// Answer requests in flight (entered by the HTTP layer).
    pub admission: Arc<Admission>,
    /// Calibration used outside every region (configured defaults).
    pub outside: Calibration,
}

impl Catalog {
    pub fn new(cfg: ServingSettings, regions: Vec<Arc<RegionHandle>>) -> Self {
        let outside = Calibration::fixed(cfg.fallback.circuity, cfg.fallback.speed_kmh);
        Catalog {
            permits: Arc::new(Semaphore::new(cfg.query.graph_concurrency)),
            admission: Admission::new(
                cfg.query.max_in_flight,
                Duration::from_millis(cfg.query.max_queue_ms),
                cfg.query.max_cpu_wait,
            ),
            regions,
            cfg,
            outside,
        }
    }

    /// The first region whose coverage holds both points.
    pub fn region_for(&self, a: LatLon, b: LatLon) -> Option<&Arc<RegionHandle>> {
        self.regions
            .iter()
            .find(|r| r.cfg.coverage.contains(a) && r.cfg.coverage.contains(b))
    }

    fn budget(&self, requested: Option<u64>) -> Duration {
        let q = &self.cfg.query;
        Duration::from_millis(
            requested
                .unwrap_or(q.default_budget_ms)
                .min(q.max_budget_ms),
        )
    }
}

/// One trip's answer.
#[derive(Debug, Clone, PartialEq)]
pub struct Answer {
    pub eta_s: f64,
    pub meters: f64,
    pub tier: Tier,
    pub reason: Option<FallbackReason>,
    /// Age (s) of the data behind the tier: the newest live observation
    /// (`live`), the historical table (`historical`); none otherwise.
    pub speeds_age_s: Option<f64>,
    /// Shares of the travel time per speed source (graph answers only).
    pub sources: Option<Sources>,
    /// Region name and snapshot generation, when a region answered.
    pub snapshot: Option<(String, u64)>,
    pub from_snap_m: Option<f64>,
    pub to_snap_m: Option<f64>,
    /// Route geometry (only for route requests answered from the graph).
    pub geometry: Option<Vec<LatLon>>,
}

/// One matrix cell's answer.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CellAnswer {
    pub eta_s: f64,
    pub meters: f64,
    pub tier: Tier,
    pub reason: Option<FallbackReason>,
    /// Shares of the travel time per speed source (graph cells only).
    pub sources: Option<Sources>,
}

/// A matrix answer, row-major.
#[derive(Debug, Clone, PartialEq)]
pub struct MatrixAnswer {
    pub rows: usize,
    pub cols: usize,
    pub cells: Vec<CellAnswer>,
    pub snapshot: Option<(String, u64)>,
}
