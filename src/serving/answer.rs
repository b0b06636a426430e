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
//!    the departure hour (reason `no_live_data` / `live_stale` when live was
//!    wanted); a bucket not customized within the budget →
//!    heuristic, `budget_exceeded`;
//! 5. snap and search: off-road → `off_network`, no path → `unreachable`,
//!    both from the region's calibration.
//!
//! **Architecture Invariant:** no HTTP types here; the service converts
//! [`Answer`] to its DTOs.

use crate::engine::calibration::Calibration;
use crate::engine::cch::matrix::ManyToMany;
use crate::engine::cch::CchQuery;
use crate::engine::geo::LatLon;
use crate::engine::region::matrix::{matrix, Cell, PointMatrix};
use crate::engine::region::{EtaError, Metric, Region};
use crate::serving::admission::Admission;
use crate::serving::metrics as m;
use crate::serving::settings::ServingSettings;
use crate::serving::snapshot::{RegionHandle, Snapshot};
use crate::serving::tier::{FallbackReason, Tier};
use chrono::{DateTime, Utc};
use std::cell::RefCell;
use std::sync::Arc;
use std::time::{Duration, Instant};
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
    pub speeds_age_s: Option<f64>,
    /// Region name and snapshot generation, when a region answered.
    pub snapshot: Option<(String, u64)>,
    pub from_snap_m: Option<f64>,
    pub to_snap_m: Option<f64>,
    /// Route geometry (only for route requests answered from the graph).
    pub geometry: Option<Vec<LatLon>>,
}

fn heuristic(
    cal: &Calibration,
    a: LatLon,
    b: LatLon,
    reason: FallbackReason,
    snapshot: Option<(String, u64)>,
) -> Answer {
    let (meters, secs) = cal.estimate(a, b);
    Answer {
        eta_s: secs,
        meters,
        tier: Tier::Heuristic,
        reason: Some(reason),
        speeds_age_s: None,
        snapshot,
        from_snap_m: None,
        to_snap_m: None,
        geometry: None,
    }
}

thread_local! {
    /// Query scratch per worker thread, keyed by the region it is sized for.
    static SCRATCH: RefCell<Vec<(usize, CchQuery)>> = const { RefCell::new(Vec::new()) };
    static MATRIX_SCRATCH: RefCell<Vec<(usize, ManyToMany, PointMatrix)>> = const { RefCell::new(Vec::new()) };
}

/// Runs `f` with this thread's query scratch for `region`.
fn with_scratch<R>(region: &Arc<Region>, f: impl FnOnce(&mut CchQuery) -> R) -> R {
    let key = Arc::as_ptr(region) as usize;
    SCRATCH.with(|s| {
        let mut s = s.borrow_mut();
        let n = region.cch.num_nodes();
        let pos = match s.iter().position(|(k, q)| *k == key && q.num_nodes() == n) {
            Some(p) => p,
            None => {
                if s.len() >= 4 {
                    s.remove(0);
                }
                s.push((key, CchQuery::new(&region.cch)));
                s.len() - 1
            }
        };
        f(&mut s[pos].1)
    })
}

/// The metric for a departure, with its tier, reason and data age.
struct Chosen {
    metric: Arc<MetricRef>,
    tier: Tier,
    reason: Option<FallbackReason>,
    age_s: Option<f64>,
}

/// A metric owned by a snapshot: either its live blend or a bucket.
enum MetricRef {
    Live(Arc<crate::serving::snapshot::LiveMetric>),
    Bucket(Arc<Metric>),
}

impl MetricRef {
    fn get(&self) -> &Metric {
        match self {
            MetricRef::Live(l) => &l.metric,
            MetricRef::Bucket(b) => b,
        }
    }
}

async fn choose(
    cat: &Catalog,
    handle: &RegionHandle,
    snap: &Snapshot,
    depart: Option<DateTime<Utc>>,
    deadline: Instant,
) -> Option<Chosen> {
    let now = Utc::now();
    let ttl = cat.cfg.live.ttl_s;
    let t = depart.unwrap_or(now);
    let leaving_now = ((t - now).num_milliseconds() as f64 / 1000.0).abs() <= ttl;
    let mut reason = None;
    if leaving_now {
        match &snap.live {
            Some(l) => {
                let age = l
                    .newest_observed_at
                    .map(|o| (now - o).num_milliseconds() as f64 / 1000.0);
                if l.stats.any_fresh && age.map(|a| a <= ttl).unwrap_or(false) {
                    return Some(Chosen {
                        metric: Arc::new(MetricRef::Live(l.clone())),
                        tier: Tier::Live,
                        reason: None,
                        age_s: age.map(|a| a.max(0.0)),
                    });
                }
                reason = Some(FallbackReason::LiveStale);
            }
            None => reason = Some(FallbackReason::NoLiveData),
        }
    }
    let hour = crate::serving::speeds::hour_of_week(t, handle.tz);
    let bucket = handle.bucket(snap, hour, deadline).await?;
    Some(Chosen {
        metric: Arc::new(MetricRef::Bucket(bucket)),
        tier: Tier::Historical,
        reason,
        age_s: snap
            .historical_at
            .map(|a| ((now - a).num_milliseconds() as f64 / 1000.0).max(0.0)),
    })
}

/// Decrements the in-flight gauge when graph work ends.
struct InFlight;

impl InFlight {
    fn start() -> Self {
        metrics::gauge!(m::GRAPH_IN_FLIGHT).increment(1.0);
        InFlight
    }
}

impl Drop for InFlight {
    fn drop(&mut self) {
        metrics::gauge!(m::GRAPH_IN_FLIGHT).decrement(1.0);
    }
}

/// Answers one trip (ETA, or route when `with_geometry`). `admitted` is
/// false when admission control shed the request.
pub async fn trip(
    cat: &Catalog,
    from: LatLon,
    to: LatLon,
    depart: Option<DateTime<Utc>>,
    budget_ms: Option<u64>,
    with_geometry: bool,
    admitted: bool,
) -> Answer {
    let deadline = Instant::now() + cat.budget(budget_ms);
    let Some(handle) = cat.region_for(from, to) else {
        return heuristic(&cat.outside, from, to, FallbackReason::OutsideRegions, None);
    };
    let Some(snap) = handle.snapshot() else {
        return heuristic(
            &cat.outside,
            from,
            to,
            FallbackReason::RegionUnavailable,
            Some((handle.name.clone(), 0)),
        );
    };
    let tag = Some((handle.name.clone(), snap.generation));
    let cal = &snap.region.calibration;
    if !admitted {
        return heuristic(cal, from, to, FallbackReason::Overloaded, tag);
    }
    let Ok(permit) = cat.permits.clone().try_acquire_owned() else {
        return heuristic(cal, from, to, FallbackReason::Overloaded, tag);
    };
    let _in_flight = InFlight::start();
    let Some(chosen) = choose(cat, handle, &snap, depart, deadline).await else {
        return heuristic(cal, from, to, FallbackReason::BudgetExceeded, tag);
    };
    let max_snap = cat.cfg.query.max_snap_m;
    let region = &snap.region;
    let metric = chosen.metric.get();
    let result = with_scratch(region, |q| {
        if with_geometry {
            region
                .route(metric, q, from, to, max_snap)
                .map(|r| (r.eta, Some(r.geometry)))
        } else {
            region.eta(metric, q, from, to, max_snap).map(|e| (e, None))
        }
    });
    drop(permit);
    match result {
        Ok((eta, geometry)) => Answer {
            eta_s: eta.time_s,
            meters: eta.meters,
            tier: chosen.tier,
            reason: chosen.reason,
            speeds_age_s: chosen.age_s,
            snapshot: tag,
            from_snap_m: Some(eta.from.distance_m),
            to_snap_m: Some(eta.to.distance_m),
            geometry,
        },
        Err(EtaError::OffNetwork { .. }) => {
            heuristic(cal, from, to, FallbackReason::OffNetwork, tag)
        }
        Err(EtaError::Unreachable) => {
            let mut a = heuristic(cal, from, to, FallbackReason::Unreachable, tag);
            if let (Ok(s1), Ok(s2)) = (
                region.snap_within(from, crate::engine::region::End::From, max_snap),
                region.snap_within(to, crate::engine::region::End::To, max_snap),
            ) {
                a.from_snap_m = Some(s1.distance_m);
                a.to_snap_m = Some(s2.distance_m);
            }
            a
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
}

/// A matrix answer, row-major.
#[derive(Debug, Clone, PartialEq)]
pub struct MatrixAnswer {
    pub rows: usize,
    pub cols: usize,
    pub cells: Vec<CellAnswer>,
    pub snapshot: Option<(String, u64)>,
}

fn heuristic_cells(
    cal: &Calibration,
    from: &[LatLon],
    to: &[LatLon],
    reason: FallbackReason,
) -> Vec<CellAnswer> {
    let mut cells = Vec::with_capacity(from.len() * to.len());
    for &a in from {
        for &b in to {
            let (meters, secs) = cal.estimate(a, b);
            cells.push(CellAnswer {
                eta_s: secs,
                meters,
                tier: Tier::Heuristic,
                reason: Some(reason),
            });
        }
    }
    cells
}

/// Answers a matrix: bucket many-to-many within the budget; rows not done
/// in time, off-network points and unreachable cells come from the
/// heuristic tier and are marked.
pub async fn matrix_trip(
    cat: &Catalog,
    from: Vec<LatLon>,
    to: Vec<LatLon>,
    depart: Option<DateTime<Utc>>,
    budget_ms: Option<u64>,
    admitted: bool,
) -> MatrixAnswer {
    let (rows, cols) = (from.len(), to.len());
    let deadline = Instant::now() + cat.budget(budget_ms);
    let all_heuristic = |cal: &Calibration, reason, snapshot| MatrixAnswer {
        rows,
        cols,
        cells: heuristic_cells(cal, &from, &to, reason),
        snapshot,
    };
    // A matrix belongs to one region: all points inside its coverage.
    let handle = cat
        .regions
        .iter()
        .find(|r| from.iter().chain(&to).all(|p| r.cfg.coverage.contains(*p)));
    let Some(handle) = handle else {
        return all_heuristic(&cat.outside, FallbackReason::OutsideRegions, None);
    };
    let Some(snap) = handle.snapshot() else {
        return all_heuristic(
            &cat.outside,
            FallbackReason::RegionUnavailable,
            Some((handle.name.clone(), 0)),
        );
    };
    let tag = Some((handle.name.clone(), snap.generation));
    if !admitted {
        return all_heuristic(&snap.region.calibration, FallbackReason::Overloaded, tag);
    }
    let Ok(permit) = cat.permits.clone().try_acquire_owned() else {
        return all_heuristic(&snap.region.calibration, FallbackReason::Overloaded, tag);
    };
    let _in_flight = InFlight::start();
    let Some(chosen) = choose(cat, handle, &snap, depart, deadline).await else {
        return all_heuristic(
            &snap.region.calibration,
            FallbackReason::BudgetExceeded,
            tag,
        );
    };
    let max_snap = cat.cfg.query.max_snap_m;
    let snap2 = snap.clone();
    let (from2, to2) = (from.clone(), to.clone());
    let metric = chosen.metric.clone();
    let computed = tokio::task::spawn_blocking(move || {
        let region = &snap2.region;
        let key = Arc::as_ptr(region) as usize;
        MATRIX_SCRATCH.with(|s| {
            let mut s = s.borrow_mut();
            let pos = match s.iter().position(|(k, _, _)| *k == key) {
                Some(p) => p,
                None => {
                    if s.len() >= 2 {
                        s.remove(0);
                    }
                    s.push((key, ManyToMany::new(&region.cch), PointMatrix::default()));
                    s.len() - 1
                }
            };
            let (_, m2m, out) = &mut s[pos];
            matrix(
                region,
                metric.get(),
                m2m,
                &from2,
                &to2,
                max_snap,
                Some(deadline),
                out,
            )
            .map(|_| out.cells.clone())
        })
    })
    .await;
    drop(permit);
    let cal = &snap.region.calibration;
    let cells = match computed {
        Ok(Ok(cells)) => cells,
        _ => return all_heuristic(cal, FallbackReason::BudgetExceeded, tag),
    };
    let mut out = Vec::with_capacity(rows * cols);
    for (i, c) in cells.iter().enumerate() {
        let (a, b) = (from[i / cols], to[i % cols]);
        let est = |reason| {
            let (meters, secs) = cal.estimate(a, b);
            CellAnswer {
                eta_s: secs,
                meters,
                tier: Tier::Heuristic,
                reason: Some(reason),
            }
        };
        out.push(match *c {
            Cell::Eta { time_s, meters } => CellAnswer {
                eta_s: time_s,
                meters,
                tier: chosen.tier,
                reason: chosen.reason,
            },
            Cell::Unreachable => est(FallbackReason::Unreachable),
            Cell::Unavailable => est(FallbackReason::OffNetwork),
            Cell::NotComputed => est(FallbackReason::BudgetExceeded),
        });
    }
    MatrixAnswer {
        rows,
        cols,
        cells: out,
        snapshot: tag,
    }
}
