//! Answering a trip: region choice, tier choice, budgets, concurrency, and
//! the fallback to the heuristic tier. Every valid request gets an answer.
//!
//! Order of decisions for one trip:
//! 1. no region covers both ends → heuristic (configured defaults),
//!    `outside_regions`;
//! 2. the region has no snapshot → heuristic (configured defaults),
//!    `region_unavailable`;
//! 3. the request was not admitted (over the hard cap on requests in
//!    flight) or no graph permit would come in time for its graph answer
//!    within its budget (admission by deadline, see
//!    [`crate::admission`]) → heuristic (region calibration),
//!    `overloaded`;
//! 4. pick the metric: live if the departure is "now" (within the TTL) and
//!    the region holds fresh live data; otherwise the metric of the
//!    departure hour's profile, customized before its snapshot was
//!    published;
//! 5. snap and search: off-road → `off_network`, no path → `unreachable`,
//!    both from the region's calibration; a matrix's cells not done within
//!    the budget → `budget_exceeded`;
//! 6. label: the route's sources (time shares on live, historical and
//!    free-flow edges) give its tier, and with the live state of step 4
//!    its reason (`no_live_data`, `live_stale`, `no_live_on_route`,
//!    `live_minority`; see [`crate::tier`]);
//! 7. correct: when the region serves a correction model, every answer it
//!    covers (estimates included) gets the model's ETA and interval, and
//!    keeps its uncorrected time beside them.
//!
//! Every estimate from a region's calibration is scaled by the departure
//! hour's factor ([`Estimator`]): the calibration was fitted on free-flow
//! paths, and a rush-hour estimate should not be a free-flow one.
//!
//! # Layout
//!
//! - this file: [`Catalog`], the requests ([`TripQuery`], [`MatrixQuery`]),
//!   [`Answer`], [`CellAnswer`], [`MatrixAnswer`];
//! - `gate`: steps 1–4, written once for trips and matrices;
//! - `trip`: [`trip`], step 5 for one trip; `matrix`: [`matrix_trip`],
//!   step 5 per cell;
//! - `scratch`: the per-thread search scratch both reuse;
//! - `correct`: the region's correction model applied to a finished
//!   answer or matrix (step 7).
//!
//! **Architecture Invariant:** no HTTP types here; the service converts
//! [`Answer`] to its DTOs.

mod correct;
mod gate;
mod matrix;
mod scratch;
#[cfg(test)]
mod tests;
mod trip;

pub use matrix::matrix_trip;
pub use trip::trip;

use crate::admission::Admission;
use crate::correction::{Corrected, Query};
use crate::settings::ServingSettings;
use crate::snapshot::{ProfileUsed, RegionReader, Snapshot};
use crate::tier::{FallbackReason, Sources, Tier};
use chrono::{DateTime, Utc};
use hodos_engine::calibration::Calibration;
use hodos_engine::geo::LatLon;
use std::sync::Arc;
use std::time::Duration;
use tokio::sync::Semaphore;

/// All regions plus the shared limits.
#[derive(Debug)]
pub struct Catalog {
    pub regions: Vec<Arc<RegionReader>>,
    pub cfg: ServingSettings,
    pub permits: Arc<Semaphore>,
    /// Answer requests in flight (entered by the HTTP layer once their
    /// body is read) and the wait estimate for graph permits.
    pub admission: Arc<Admission>,
    /// Calibration used outside every region (configured defaults).
    pub outside: Calibration,
    /// Metric label of each region, in `regions` order: built once so
    /// recording an answer clones an `Arc`, not a name.
    labels: Vec<metrics::SharedString>,
}

impl Catalog {
    pub fn new(cfg: ServingSettings, regions: Vec<Arc<RegionReader>>) -> Self {
        let outside = Calibration::fixed(cfg.fallback.circuity, cfg.fallback.speed_kmh);
        Catalog {
            permits: Arc::new(Semaphore::new(cfg.query.graph_concurrency)),
            admission: Admission::new(cfg.query.max_in_flight),
            labels: regions
                .iter()
                .map(|r| metrics::SharedString::from_shared(Arc::<str>::from(r.name.as_str())))
                .collect(),
            regions,
            cfg,
            outside,
        }
    }

    /// The `region` metric label of a region index (`none` outside every
    /// region): a closed set, the configured names plus `none`.
    pub fn region_label(&self, region: Option<u16>) -> metrics::SharedString {
        region
            .and_then(|i| self.labels.get(usize::from(i)))
            .cloned()
            .unwrap_or(metrics::SharedString::const_str(crate::metrics::NO_REGION))
    }

    /// The `region` metric label of a region named in an answer's tag.
    pub fn region_label_of(&self, name: Option<&str>) -> metrics::SharedString {
        let idx = name.and_then(|n| self.regions.iter().position(|r| r.name == n));
        self.region_label(idx.map(|i| i as u16))
    }

    /// Index of a region handle in [`Catalog::regions`].
    fn index_of(&self, handle: &Arc<RegionReader>) -> Option<u16> {
        self.regions
            .iter()
            .position(|r| Arc::ptr_eq(r, handle))
            .map(|i| i as u16)
    }

    /// The first region whose coverage holds both points.
    pub fn region_for(&self, a: LatLon, b: LatLon) -> Option<&Arc<RegionReader>> {
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

/// One trip to answer: its ends, its departure (`None`: leaving now), its
/// budget (`None`: `query.default_budget_ms`) and whether the answer
/// carries the route's geometry.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TripQuery {
    pub from: LatLon,
    pub to: LatLon,
    pub depart: Option<DateTime<Utc>>,
    pub budget_ms: Option<u64>,
    pub geometry: bool,
}

impl TripQuery {
    /// From `from` to `to`, leaving now, the default budget, no geometry.
    pub fn new(from: LatLon, to: LatLon) -> Self {
        TripQuery {
            from,
            to,
            depart: None,
            budget_ms: None,
            geometry: false,
        }
    }
}

/// A matrix to answer: every origin to every destination, one departure
/// and budget for all cells.
#[derive(Debug, Clone, PartialEq)]
pub struct MatrixQuery {
    pub from: Vec<LatLon>,
    pub to: Vec<LatLon>,
    pub depart: Option<DateTime<Utc>>,
    pub budget_ms: Option<u64>,
}

/// The heuristic tier for one departure: a calibration (fitted on
/// free-flow paths) and the departure hour's time factor.
#[derive(Debug, Clone, Copy)]
pub struct Estimator<'a> {
    pub cal: &'a Calibration,
    /// Travel-time factor of the departure hour against free-flow (1 with
    /// no historical table or outside every region).
    pub factor: f64,
    /// Hour of week of the departure, when a region covers the request.
    pub hour: Option<u8>,
}

impl<'a> Estimator<'a> {
    /// `cal` unscaled.
    pub fn free_flow(cal: &'a Calibration) -> Self {
        Estimator {
            cal,
            factor: 1.0,
            hour: None,
        }
    }

    /// `snap`'s calibration scaled for an hour of week.
    pub fn for_hour(snap: &'a Snapshot, hour: u8) -> Self {
        Estimator {
            cal: &snap.region.calibration,
            factor: snap.profiles.grouping.factor(hour),
            hour: Some(hour),
        }
    }

    /// `(metres, seconds)`: the calibration's estimate, its time × factor.
    pub fn estimate(&self, from: LatLon, to: LatLon) -> (f64, f64) {
        let (m, s) = self.cal.estimate(from, to);
        (m, s * self.factor)
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
    /// Hour of week of the departure in the region's time zone (0 = Monday
    /// 00:00), when a region covers the trip.
    pub hour_of_week: Option<u8>,
    /// The hour-of-week profile whose metric answered (historical tier).
    pub profile: Option<ProfileUsed>,
    /// The region's correction model applied: `eta_s` is then its ETA,
    /// and this holds the tier's uncorrected time and the interval.
    pub correction: Option<Corrected>,
}

impl Answer {
    /// The tier's uncorrected time.
    pub fn graph_s(&self) -> f64 {
        self.correction.map_or(self.eta_s, |c| c.graph_s)
    }

    /// What the correction model is given for this answer (from `from` to
    /// `to`): its uncorrected time and what it stands on.
    pub fn query(&self, from: LatLon, to: LatLon) -> Query {
        Query {
            from,
            to,
            graph_s: self.graph_s(),
            graph_m: self.meters,
            hour_of_week: self.hour_of_week,
            tier: self.tier,
            sources: self.sources,
        }
    }
}

/// One matrix cell's answer.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CellAnswer {
    pub eta_s: f64,
    pub meters: f64,
    pub tier: Tier,
    pub reason: Option<FallbackReason>,
    /// Index in [`Catalog::regions`] of the region that answered (graph or
    /// its calibration), `None` outside every region: the cell's metric
    /// label ([`Catalog::region_label`]).
    pub region: Option<u16>,
    /// Shares of the travel time per speed source (graph cells only).
    pub sources: Option<Sources>,
    /// As [`Answer::correction`].
    pub correction: Option<Corrected>,
}

/// A matrix answer, row-major.
#[derive(Debug, Clone, PartialEq)]
pub struct MatrixAnswer {
    pub rows: usize,
    pub cols: usize,
    pub cells: Vec<CellAnswer>,
    pub snapshot: Option<(String, u64)>,
    /// Hour of week of the departure in the answering region's time zone.
    pub hour_of_week: Option<u8>,
}
