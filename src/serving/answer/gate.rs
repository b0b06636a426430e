//! The gate every answer passes before graph work, in this order: a region
//! covers the request → it has a snapshot → the request was admitted → a
//! graph permit comes in time for its deadline (admission by deadline,
//! [`crate::admission::Admission::permit`]) → the metric (live if "now" and fresh, else the
//! metric of the departure hour's profile, always customized). The first
//! check that fails names the fallback reason; passing them all yields the
//! snapshot, the chosen metric and the permit. The tier is not decided here:
//! it depends on the sources the route actually used ([`Chosen::label`]).
//! A fallback carries the departure hour, so its estimate is scaled by
//! that hour's factor.

use super::{Catalog, Estimator};
use crate::admission::{Admit, GraphPermit};
use crate::metrics as m;
use crate::snapshot::{LiveMetric, ProfileUsed, RegionReader, Snapshot};
use crate::tier::{FallbackReason, Sources, Tier};
use chrono::{DateTime, Utc};
use hodos_engine::region::Metric;
use std::sync::Arc;
use std::time::Instant;

/// Region name and snapshot generation an answer came from.
pub(super) type Tag = Option<(String, u64)>;

/// The metric for a departure, and what the region's data said about it.
pub(super) struct Chosen {
    pub metric: Arc<MetricRef>,
    /// Hour of week of the departure (region time zone).
    pub hour: u8,
    /// The profile whose metric answers (historical metrics only).
    pub profile: Option<ProfileUsed>,
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
    /// (the rules in [`crate::tier`]).
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
    /// Held until the graph work ends (its hold time feeds admission).
    pub permit: GraphPermit,
    /// Held until the answer is built.
    pub _in_flight: InFlight,
}

/// Stopped at the gate: answer from the heuristic tier.
pub(super) struct Fallback {
    /// Whose calibration estimates: the snapshot's region, or the
    /// configured defaults when there is none.
    snap: Option<Arc<Snapshot>>,
    /// Hour of week of the departure, when a region covers the request.
    hour: Option<u8>,
    pub reason: FallbackReason,
    pub tag: Tag,
}

impl Fallback {
    /// The heuristic answer `estimate` builds from this fallback's
    /// estimator, reason and tag.
    pub fn answer<T>(
        mut self,
        cat: &Catalog,
        estimate: impl FnOnce(Estimator<'_>, FallbackReason, Tag) -> T,
    ) -> T {
        let tag = self.tag.take();
        estimate(self.estimator(cat), self.reason, tag)
    }

    /// The estimator the heuristic answer uses: the region's calibration
    /// scaled by the departure hour's factor, or the configured defaults.
    pub fn estimator<'a>(&'a self, cat: &'a Catalog) -> Estimator<'a> {
        match (&self.snap, self.hour) {
            (Some(s), Some(h)) => Estimator::for_hour(s, h),
            (Some(s), None) => Estimator::free_flow(&s.region.calibration),
            (None, _) => Estimator {
                hour: self.hour,
                ..Estimator::free_flow(&cat.outside)
            },
        }
    }
}

/// Runs the gate for a request that `handle` (if any) covers.
pub(super) async fn gate(
    cat: &Catalog,
    handle: Option<&Arc<RegionReader>>,
    depart: Option<DateTime<Utc>>,
    deadline: Instant,
    admit: Admit<'_>,
) -> Result<Granted, Fallback> {
    let Some(handle) = handle else {
        return Err(Fallback {
            snap: None,
            hour: None,
            reason: FallbackReason::OutsideRegions,
            tag: None,
        });
    };
    let hour = crate::speeds::hour_of_week(depart.unwrap_or_else(Utc::now), handle.tz);
    let Some(snap) = handle.snapshot() else {
        return Err(Fallback {
            snap: None,
            hour: Some(hour),
            reason: FallbackReason::RegionUnavailable,
            tag: Some((handle.name.clone(), 0)),
        });
    };
    let tag = Some((handle.name.clone(), snap.generation));
    let stop = |snap: Arc<Snapshot>, reason, tag| {
        Err(Fallback {
            snap: Some(snap),
            hour: Some(hour),
            reason,
            tag,
        })
    };
    // Over the hard cap: shed. Else a free permit at once, or a wait only
    // as long as the answer can still come within the budget (see
    // `admission`).
    let total = cat.cfg.query.graph_concurrency;
    let Some(permit) = cat
        .admission
        .admit(admit, &cat.permits, total, deadline)
        .await
    else {
        return stop(snap, FallbackReason::Overloaded, tag);
    };
    let in_flight = InFlight::start();
    // Every profile is customized before its snapshot is published, so the
    // metric is always there: no departure hour waits out the budget.
    let chosen = choose(cat, &snap, depart, hour);
    Ok(Granted {
        snap,
        chosen,
        tag,
        permit,
        _in_flight: in_flight,
    })
}

/// Picks the metric: live if the departure is "now" (within the TTL) and
/// the region holds fresh live data, else the metric of the profile of the
/// departure hour `hour`.
fn choose(cat: &Catalog, snap: &Snapshot, depart: Option<DateTime<Utc>>, hour: u8) -> Chosen {
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
                    return Chosen {
                        metric: Arc::new(MetricRef::Live(l.clone())),
                        live: LiveState::Fresh,
                        live_age_s: age.map(|a| a.max(0.0)),
                        historical_age_s,
                        hour,
                        profile: None,
                    };
                }
                live = LiveState::Stale;
            }
            None => live = LiveState::NoData,
        }
    }
    let (profile, bucket) = snap.profiles.for_hour(hour);
    Chosen {
        metric: Arc::new(MetricRef::Bucket(bucket.clone())),
        live,
        live_age_s: None,
        historical_age_s,
        hour,
        profile: Some(profile),
    }
}
