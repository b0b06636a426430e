//! One trip (ETA, or route with geometry): the gate, then snap and search
//! with this thread's query scratch; off-road and unreachable ends fall
//! back to the heuristic tier from the region's calibration. A graph
//! answer's tier, reason and age follow from the sources its route used
//! ([`crate::tier`]).

use super::gate::{gate, Granted, Tag};
use super::scratch::{with_scratch, ScratchCache};
use super::{Answer, Catalog, Estimator, TripQuery};
use crate::admission::Admit;
use crate::snapshot::RegionReader;
use crate::tier::{FallbackReason, Sources, Tier};
use hodos_engine::cch::CchQuery;
use hodos_engine::geo::LatLon;
use hodos_engine::region::{End, EtaError};
use std::cell::RefCell;
use std::sync::Arc;
use std::time::Instant;

thread_local! {
    /// Query scratch per worker thread, keyed by the region it is sized for.
    static SCRATCH: RefCell<ScratchCache<CchQuery>> = const { RefCell::new(ScratchCache::new(4)) };
}

/// A heuristic-tier answer for `reason`.
fn heuristic(
    est: Estimator<'_>,
    a: LatLon,
    b: LatLon,
    reason: FallbackReason,
    snapshot: Tag,
) -> Answer {
    let (meters, secs) = est.estimate(a, b);
    Answer {
        eta_s: secs,
        meters,
        tier: Tier::Heuristic,
        reason: Some(reason),
        speeds_age_s: None,
        sources: None,
        snapshot,
        from_snap_m: None,
        to_snap_m: None,
        geometry: None,
        hour_of_week: est.hour,
        profile: None,
        correction: None,
    }
}

/// Answers one trip (ETA, or route when `q.geometry`). `admit` says how
/// the request entered (its ticket may say it was shed). The region's
/// correction model, if any, applies to the answer whatever its tier.
pub async fn trip(cat: &Catalog, q: &TripQuery, admit: Admit<'_>) -> Answer {
    let handle = cat.region_for(q.from, q.to);
    let mut a = uncorrected(cat, handle, q, admit).await;
    super::correct::trip(handle, q.from, q.to, &mut a);
    a
}

/// [`trip`] before its correction.
async fn uncorrected(
    cat: &Catalog,
    handle: Option<&Arc<RegionReader>>,
    q: &TripQuery,
    admit: Admit<'_>,
) -> Answer {
    let TripQuery {
        from,
        to,
        depart,
        budget_ms,
        geometry: with_geometry,
    } = *q;
    let deadline = Instant::now() + cat.budget(budget_ms);
    let g = match gate(cat, handle, depart, deadline, admit).await {
        Ok(g) => g,
        Err(f) => {
            return f.answer(cat, |est, reason, tag| {
                heuristic(est, from, to, reason, tag)
            })
        }
    };
    // `_in_flight` stays in `g`, counted until the answer is built.
    let Granted {
        snap,
        chosen,
        tag,
        permit,
        ..
    } = g;
    let max_snap = cat.cfg.query.max_snap_m;
    let region = &snap.region;
    let metric = chosen.metric.get();
    let n = region.cch.num_nodes();
    let result = with_scratch(
        &SCRATCH,
        Arc::as_ptr(region) as usize,
        |q| q.num_nodes() == n,
        || CchQuery::new(&region.cch),
        |q| {
            if with_geometry {
                region
                    .route(metric, q, from, to, max_snap)
                    .map(|r| (r.eta, Some(r.geometry)))
            } else {
                region.eta(metric, q, from, to, max_snap).map(|e| (e, None))
            }
        },
    );
    drop(permit);
    let cal = Estimator::for_hour(&snap, chosen.hour);
    match result {
        Ok((eta, geometry)) => {
            let zero_class = metric.class_of(eta.from.edge);
            let sources = Sources::from_class_ms(&eta.classes.unwrap_or_default(), zero_class);
            let (tier, reason, age) = chosen.label(&sources);
            Answer {
                eta_s: eta.time_s,
                meters: eta.meters,
                tier,
                reason,
                speeds_age_s: age,
                sources: Some(sources),
                snapshot: tag,
                from_snap_m: Some(eta.from.distance_m),
                to_snap_m: Some(eta.to.distance_m),
                geometry,
                hour_of_week: Some(chosen.hour),
                profile: chosen.profile,
                correction: None,
            }
        }
        Err(EtaError::OffNetwork { .. }) => {
            heuristic(cal, from, to, FallbackReason::OffNetwork, tag)
        }
        Err(EtaError::Unreachable) => {
            let mut a = heuristic(cal, from, to, FallbackReason::Unreachable, tag);
            if let (Ok(s1), Ok(s2)) = (
                region.snap_within(from, End::From, max_snap),
                region.snap_within(to, End::To, max_snap),
            ) {
                a.from_snap_m = Some(s1.distance_m);
                a.to_snap_m = Some(s2.distance_m);
            }
            a
        }
    }
}
