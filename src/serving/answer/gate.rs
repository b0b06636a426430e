//! The gate every answer passes before graph work, in this order: a region
//! covers the request → it has a snapshot → the request was admitted → a
//! graph permit is free → a metric is ready within the budget (live if
//! "now" and fresh, else the departure hour's historical bucket). The first
//! check that fails names the fallback reason; passing them all yields the
//! snapshot, the chosen metric and the permit. The tier is not decided here:
//! it depends on the sources the route actually used ([`Chosen::label`]).

use super::Catalog;
use crate::engine::calibration::Calibration;
use crate::engine::region::Metric;
use crate::serving::metrics as m;
use crate::serving::snapshot::{LiveMetric, RegionHandle, Snapshot};
use crate::serving::tier::{FallbackReason, Sources, Tier};
use chrono::{DateTime, Utc};
use std::sync::Arc;
use std::time::Instant;
use tokio::sync::OwnedSemaphorePermit;

/// Region name and snapshot generation an answer came from.
pub(super) type Tag = Option<(String, u64)>;

/// The metric for a departure, and what the region's data said about it.
pub(super) struct Chosen {
    pub metric: Arc<MetricRef>,
    /// The state of live data for this departure.
    pub live: LiveState,
    /// Age (s) of the newest live observation when `live` is fresh.
    pub live_age_s: Option<f64>,
    /// Age (s) of the historical table, when the region has one.
    pub historical_age_s: Option<f64>,
}

/// Live data as seen by one departure.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum LiveState {
    /// The departure is away from now: live data does not apply.
    NotWanted,
    /// Leaving now; the region holds no live layer.
    NoData,
    /// Leaving now; the region holds live observations, none fresh.
    Stale,
    /// Leaving now; the region holds fresh live data (the live metric).
    Fresh,
}

impl Chosen {
    /// Tier, reason and data age of a graph answer that used `sources`
    /// (the rules in [`crate::serving::tier`]).
    pub fn label(&self, sources: &Sources) -> (Tier, Option<FallbackReason>, Option<f64>) {
        let tier = sources.tier();
        let reason = match (tier, self.live) {
            (Tier::Live, _) | (_, LiveState::NotWanted) => None,
            (_, LiveState::NoData) => Some(FallbackReason::NoLiveData),
            (_, LiveState::Stale) => Some(FallbackReason::LiveStale),
            (_, LiveState::Fresh) if sources.live > 0.0 => Some(FallbackReason::LiveMinority),
            (_, LiveState::Fresh) => Some(FallbackReason::NoLiveOnRoute),
        };
        let age = match tier {
            Tier::Live => self.live_age_s,
            Tier::Historical => self.historical_age_s,
            Tier::FreeFlow | Tier::Heuristic => None,
        };
        (tier, reason, age)
    }
}

/// A metric owned by a snapshot: either its live blend or a bucket.
pub(super) enum MetricRef {
    Live(Arc<LiveMetric>),
    Bucket(Arc<Metric>),
}

impl MetricRef {
    pub fn get(&self) -> &Metric {
        match self {
            MetricRef::Live(l) => &l.metric,
            MetricRef::Bucket(b) => b,
        }
    }
}

/// Decrements the in-flight gauge when graph work ends.
pub(super) struct InFlight;

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

/// Passed the gate: answer from the graph.
pub(super) struct Granted {
    pub snap: Arc<Snapshot>,
    pub chosen: Chosen,
    pub tag: Tag,
    /// Held until the graph work ends.
    pub permit: OwnedSemaphorePermit,
    /// Held until the answer is built.
    pub _in_flight: InFlight,
}

/// Stopped at the gate: answer from the heuristic tier.
pub(super) struct Fallback {
    /// Whose calibration estimates: the snapshot's region, or the
    /// configured defaults when there is none.
    snap: Option<Arc<Snapshot>>,
    pub reason: FallbackReason,
    pub tag: Tag,
}

impl Fallback {
    /// The heuristic answer `estimate` builds from this fallback's
    /// calibration, reason and tag.
    pub fn answer<T>(
        mut self,
        cat: &Catalog,
        estimate: impl FnOnce(&Calibration, FallbackReason, Tag) -> T,
    ) -> T {
        let tag = self.tag.take();
        estimate(self.calibration(cat), self.reason, tag)
    }

    /// The calibration the heuristic answer uses.
    pub fn calibration<'a>(&'a self, cat: &'a Catalog) -> &'a Calibration {
        match &self.snap {
            Some(s) => &s.region.calibration,
            None => &cat.outside,
        }
    }
}

/// Runs the gate for a request that `handle` (if any) covers.
pub(super) async fn gate(
    cat: &Catalog,
    handle: Option<&Arc<RegionHandle>>,
    depart: Option<DateTime<Utc>>,
    deadline: Instant,
    admitted: bool,
) -> Result<Granted, Fallback> {
    let Some(handle) = handle else {
        return Err(Fallback {
            snap: None,
            reason: FallbackReason::OutsideRegions,
            tag: None,
        });
    };
    let Some(snap) = handle.snapshot() else {
        return Err(Fallback {
            snap: None,
            reason: FallbackReason::RegionUnavailable,
            tag: Some((handle.name.clone(), 0)),
        });
    };
    let tag = Some((handle.name.clone(), snap.generation));
    let stop = |snap: Arc<Snapshot>, reason, tag| {
        Err(Fallback {
            snap: Some(snap),
            reason,
            tag,
        })
    };
    if !admitted {
        return stop(snap, FallbackReason::Overloaded, tag);
    }
    let Ok(permit) = cat.permits.clone().try_acquire_owned() else {
        return stop(snap, FallbackReason::Overloaded, tag);
    };
    let in_flight = InFlight::start();
    let Some(chosen) = choose(cat, handle, &snap, depart, deadline).await else {
        return stop(snap, FallbackReason::BudgetExceeded, tag);
    };
    Ok(Granted {
        snap,
        chosen,
        tag,
        permit,
        _in_flight: in_flight,
    })
}

/// Picks the metric: live if the departure is "now" (within the TTL) and
/// the region holds fresh live data, else the departure hour's bucket
/// (`None` if it is not customized by `deadline`).
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
    let historical_age_s = snap
        .historical
        .as_ref()
        .and(snap.historical_at)
        .map(|a| ((now - a).num_milliseconds() as f64 / 1000.0).max(0.0));
    let mut live = LiveState::NotWanted;
    if leaving_now {
        match &snap.live {
            Some(l) => {
                let age = l
                    .newest_observed_at
                    .map(|o| (now - o).num_milliseconds() as f64 / 1000.0);
                if l.stats.any_fresh && age.map(|a| a <= ttl).unwrap_or(false) {
                    return Some(Chosen {
                        metric: Arc::new(MetricRef::Live(l.clone())),
                        live: LiveState::Fresh,
                        live_age_s: age.map(|a| a.max(0.0)),
                        historical_age_s,
                    });
                }
                live = LiveState::Stale;
            }
            None => live = LiveState::NoData,
        }
    }
    let hour = crate::serving::speeds::hour_of_week(t, handle.tz);
    let bucket = handle.bucket(snap, hour, deadline).await?;
    Some(Chosen {
        metric: Arc::new(MetricRef::Bucket(bucket)),
        live,
        live_age_s: None,
        historical_age_s,
    })
}
