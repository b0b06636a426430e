//! Answering completed trips as hodos would have at their departure.
//!
//! [`open_catalog`] builds the [`Catalog`] `hodos serve` would build for
//! the same artifact and historical table (one region per
//! [`ReplayRegion`], default serving settings, its own state folder), and
//! [`replay_trip`] asks it each trip through
//! [`hodos_serving::answer::trip`] with `leaving` = the trip's departure,
//! so the hour-of-week profile of that departure answers (or the region's
//! free-flow metric without a table). A departure in the past is never
//! "now", so live data never applies to a replayed trip.

use super::outcome::{local_hour_of_week, TripOutcome};
use super::trips::TripRecord;
use chrono::Utc;
use hodos_engine::artifact::{Artifact, ArtifactError};
use hodos_engine::geo::haversine_m;
use hodos_serving::admission::Admit;
use hodos_serving::answer::{trip, Catalog, TripQuery};
use hodos_serving::correction::features;
use hodos_serving::settings::{Coverage, CustomizePriority, RegionConfig, ServingSettings};
use hodos_serving::snapshot::{RegionUpdater, UpdateSettings};
use std::path::{Path, PathBuf};

/// One region to replay against.
#[derive(Debug, Clone)]
pub struct ReplayRegion {
    pub name: String,
    pub artifact: PathBuf,
    pub historical: Option<PathBuf>,
    /// IANA zone of the region's hour-of-week profiles.
    pub time_zone: String,
    /// Where the region answers; `None`: the artifact's node extent padded
    /// by 0.01° (what `hodos info` suggests for a configuration).
    pub coverage: Option<Coverage>,
    /// Correction model applied to every answer, as a region's `model`.
    pub model: Option<PathBuf>,
}

/// Why a replay catalog could not be opened.
#[derive(Debug, thiserror::Error)]
pub enum ReplayError {
    #[error("{0}")]
    Artifact(#[from] ArtifactError),
    #[error("unknown time zone {0:?} (an IANA name such as America/New_York)")]
    Zone(String),
    #[error("region {name} did not load: {reason}")]
    Degraded { name: String, reason: String },
    #[error("region {name}: the correction model was refused: {reason}")]
    Model { name: String, reason: String },
    #[error("region {name}: the historical table {path} is not serving: {problems}")]
    Historical {
        name: String,
        path: String,
        problems: String,
    },
}

/// Padding of a coverage box taken from an artifact's extent, degrees.
const COVERAGE_PAD_DEG: f64 = 0.01;

/// Serving settings for a replay: the defaults, with customizations at
/// normal priority (a batch job has no requests to yield to) and the
/// largest per-request budget.
pub fn replay_settings() -> ServingSettings {
    ServingSettings {
        customize_priority: CustomizePriority::Normal,
        ..ServingSettings::default()
    }
}

/// Opens every region (artifact, historical table and its profiles) under
/// `state_dir` (one subfolder per region; nothing is read from an earlier
/// run's state as long as the folder is new) and returns the catalog.
pub async fn open_catalog(
    regions: &[ReplayRegion],
    settings: ServingSettings,
    state_dir: &Path,
) -> Result<Catalog, ReplayError> {
    let mut handles = Vec::new();
    for r in regions {
        let _: chrono_tz::Tz = r
            .time_zone
            .parse()
            .map_err(|_| ReplayError::Zone(r.time_zone.clone()))?;
        let coverage = match &r.coverage {
            Some(c) => c.clone(),
            None => {
                let art = Artifact::load(&r.artifact)?;
                let (lo, hi) = art.graph.bbox();
                let p = COVERAGE_PAD_DEG;
                Coverage::Bbox([lo.lat - p, lo.lon - p, hi.lat + p, hi.lon + p])
            }
        };
        let cfg = RegionConfig {
            name: r.name.clone(),
            artifact: r.artifact.clone(),
            time_zone: r.time_zone.clone(),
            coverage,
            historical: r.historical.clone(),
            live_dir: None,
            model: r.model.clone(),
            state_dir: state_dir.join(&r.name),
        };
        let h = RegionUpdater::open(cfg, UpdateSettings::from_settings(&settings)).await;
        let status = h.status();
        if let Some(reason) = status.degraded_reason.clone() {
            return Err(ReplayError::Degraded {
                name: r.name.clone(),
                reason,
            });
        }
        if let Some(path) = &r.historical {
            if status.historical_version.is_none() {
                let mut problems = status.historical_problems.clone();
                if let Some(e) = status.last_reload.as_ref().and_then(|o| o.error.clone()) {
                    problems.push(e);
                }
                return Err(ReplayError::Historical {
                    name: r.name.clone(),
                    path: path.display().to_string(),
                    problems: if problems.is_empty() {
                        "no reason given".into()
                    } else {
                        problems.join("; ")
                    },
                });
            }
        }
        if r.model.is_some() && h.correction.current().is_none() {
            return Err(ReplayError::Model {
                name: r.name.clone(),
                reason: h
                    .correction
                    .refused()
                    .unwrap_or_else(|| "no reason given".into()),
            });
        }
        handles.push(h.reader().clone());
    }
    Ok(Catalog::new(settings, handles))
}

/// Answers one trip at its departure and pairs the answer with the
/// trip's actual duration and the correction model's feature vector of
/// the uncorrected answer (what `hodos train` fits on).
pub async fn replay_trip(cat: &Catalog, t: &TripRecord) -> TripOutcome {
    let budget = Some(cat.cfg.query.max_budget_ms);
    let a = trip(
        cat,
        &TripQuery {
            from: t.from,
            to: t.to,
            depart: Some(t.leaving.with_timezone(&Utc)),
            budget_ms: budget,
            geometry: false,
        },
        Admit::Uncounted,
    )
    .await;
    let (hour_of_week, weekend) = local_hour_of_week(&t.leaving);
    let graph_s = a.graph_s();
    let x = features(&a.query(t.from, t.to));
    TripOutcome {
        trip_id: t.trip_id.clone(),
        leaving: t.leaving,
        hour_of_week,
        weekend,
        region: a.snapshot.as_ref().map(|(name, _)| name.clone()),
        tier: a.tier,
        reason: a.reason,
        great_circle_m: haversine_m(t.from, t.to),
        actual_s: t.duration_s,
        graph_s,
        eta_s: a.eta_s,
        interval_s: a.correction.map(|c| (c.low_s, c.high_s)),
        model_version: a.correction.map(|c| c.model_version),
        features: x.to_vec(),
    }
}

/// Replays `trips` in order, calling `progress(done)` after each.
pub async fn replay_all(
    cat: &Catalog,
    trips: &[TripRecord],
    mut progress: impl FnMut(usize),
) -> Vec<TripOutcome> {
    let mut out = Vec::with_capacity(trips.len());
    for (i, t) in trips.iter().enumerate() {
        out.push(replay_trip(cat, t).await);
        progress(i + 1);
    }
    out
}
