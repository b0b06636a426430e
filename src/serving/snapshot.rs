//! Per-region serving state: immutable snapshots behind `arc-swap`, the
//! lazily customized historical buckets, and every update path (historical
//! table, live observations, artifact reload).
//!
//! Readers call [`RegionHandle::snapshot`] and get an `Arc<Snapshot>`: a
//! consistent set of graph, hierarchy, metrics, calibration and data
//! versions that stays valid for as long as they hold it. They never take a
//! lock. Writers build a complete new snapshot off to the side and publish
//! it with one atomic swap; a request in flight keeps the snapshot it
//! started with. Writers serialize among themselves on an async mutex that
//! readers never touch. A table that fails validation never reaches a
//! snapshot: the old one keeps serving, and the rejection is recorded in
//! [`RegionStatus`] and in metrics.
//!
//! **Architecture Invariant:** nothing here knows about HTTP; the service
//! layer calls these methods and converts results to its DTOs.

use crate::engine::artifact::Artifact;
use crate::engine::region::{Metric, Region};
use crate::serving::customizer::Customizer;
use crate::serving::metrics as m;
use crate::serving::retire::{RetireBin, Retiree};
use crate::serving::settings::{LiveConfig, RegionConfig, ServingSettings};
use crate::serving::speeds::{
    blend_into, load_historical, load_live, save_historical, save_live, BlendStats, EdgeIndex,
    HistoricalProfile, LiveLayer, SpeedsError, TableReport, ValidationConfig,
};
use arc_swap::{ArcSwap, ArcSwapOption};
use chrono::{DateTime, Utc};
use serde::Serialize;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::{Arc, OnceLock};
use std::time::{Duration, Instant};
use tokio::sync::Notify;

/// Everything a request needs, frozen.
#[derive(Debug)]
pub struct Snapshot {
    /// Increases with every publish in this region (any data change).
    pub generation: u64,
    pub region: Arc<Region>,
    pub index: Arc<EdgeIndex>,
    /// Free-flow speed per edge (the base under the historical profile).
    pub free_flow_kmh: Arc<Vec<f32>>,
    pub historical: Option<Arc<HistoricalProfile>>,
    /// When the serving historical table was accepted.
    pub historical_at: Option<DateTime<Utc>>,
    /// The blended live metric, once observations have arrived.
    pub live: Option<Arc<LiveMetric>>,
    /// Identifies the artifact load (bucket cache keys include it).
    pub artifact_load: u64,
    pub artifact_at: DateTime<Utc>,
}

impl Snapshot {
    /// Cache key of the historical data: its version, or "free-flow".
    pub fn historical_key(&self) -> String {
        historical_key(self.artifact_load, self.historical.as_deref())
    }
}

/// Bucket cache key of a historical table (or free-flow) on an artifact load.
fn historical_key(artifact_load: u64, h: Option<&HistoricalProfile>) -> String {
    match h {
        Some(h) => format!("{artifact_load}:{}", h.version()),
        None => format!("{artifact_load}:free-flow"),
    }
}

/// A customized live blend.
#[derive(Debug)]
pub struct LiveMetric {
    pub metric: Metric,
    pub stats: BlendStats,
    /// Newest observation held when this blend was made.
    pub newest_observed_at: Option<DateTime<Utc>>,
    pub built_at: DateTime<Utc>,
}

/// What the last update of each kind did (for `/admin/status`).
#[derive(Debug, Clone, Default, Serialize)]
pub struct RegionStatus {
    pub ready: bool,
    /// Why the region serves no graph, when it does not.
    pub degraded_reason: Option<String>,
    pub generation: u64,
    pub historical_version: Option<String>,
    pub historical_rows: Option<u64>,
    pub historical_age_s: Option<f64>,
    pub live_edges: u64,
    pub live_newest_age_s: Option<f64>,
    pub last_reload: Option<ReloadOutcome>,
    pub last_live_batch: Option<ReloadOutcome>,
}

/// One update's outcome.
#[derive(Debug, Clone, Serialize)]
pub struct ReloadOutcome {
    /// `historical`, `live` or `artifact`.
    pub table: &'static str,
    /// `accepted`, `rejected` or `failed`.
    pub outcome: &'static str,
    pub at: DateTime<Utc>,
    /// Error text for rejected/failed updates.
    pub error: Option<String>,
    pub report: Option<TableReport>,
}

/// Why an update did not take effect.
#[derive(Debug, thiserror::Error)]
pub enum UpdateError {
    #[error("{0}")]
    Rejected(SpeedsError),
    #[error("the region has no loaded graph: {0}")]
    Unavailable(String),
    #[error("{0}")]
    Failed(String),
}

/// Settings the update paths need, taken from the configuration once.
#[derive(Debug, Clone)]
pub struct UpdateSettings {
    pub validation: ValidationConfig,
    pub live: LiveConfig,
    pub bucket_cache: usize,
    /// Where every customization runs (one thread, low CPU priority,
    /// shared by all regions).
    pub customizer: Customizer,
    /// Where the lighter update work runs: parsing live batches and
    /// historical tables, blending and saving the live layer. A thread of
    /// its own at the same priority, so an upload is not queued behind a
    /// customization of several hundred milliseconds.
    pub updates: Customizer,
}

impl UpdateSettings {
    pub fn from_settings(cfg: &ServingSettings) -> Self {
        UpdateSettings {
            validation: ValidationConfig {
                max_speed_kmh: cfg.tables.max_speed_kmh,
                max_bad_share: cfg.tables.max_bad_share,
                max_future_skew_s: cfg.live.max_future_skew_s.max(0.0) as u64,
                ..ValidationConfig::default()
            },
            live: cfg.live.clone(),
            bucket_cache: cfg.query.bucket_cache.max(2),
            customizer: Customizer::start(cfg.customize_priority),
            updates: Customizer::start_named("hodos-update", cfg.customize_priority),
        }
    }
}

/// A bucket metric being (or done being) customized.
#[derive(Debug, Default)]
struct Slot {
    cell: OnceLock<Arc<Metric>>,
    started: AtomicBool,
    notify: Notify,
}

/// Slots dropped from the bucket list; in use while a request or a bucket
/// job holds a slot or its metric.
struct EvictedSlots(Vec<Arc<Slot>>);

impl Retiree for EvictedSlots {
    fn in_use(&self) -> bool {
        self.0.iter().any(|s| {
            Arc::strong_count(s) > 1
                || s.cell
                    .get()
                    .map(|m| Arc::strong_count(m) > 1)
                    .unwrap_or(false)
        })
    }
}

/// Writer-side state: only update paths touch it, one at a time.
struct Writer {
    live: Option<LiveLayer>,
    live_saved_at: Option<Instant>,
    live_changed: bool,
}

/// One configured region for the life of the process.
pub struct RegionHandle {
    pub name: String,
    pub cfg: RegionConfig,
    pub tz: chrono_tz::Tz,
    settings: UpdateSettings,
    current: ArcSwapOption<Snapshot>,
    status: ArcSwap<RegionStatus>,
    /// Copy-on-write list of bucket slots, newest last, bounded.
    buckets: ArcSwap<Vec<(String, u8, Arc<Slot>)>>,
    writer: tokio::sync::Mutex<Writer>,
    /// Superseded snapshots and evicted buckets, freed on the `updates`
    /// thread once no request holds them (see [`crate::serving::retire`]).
    retired: Arc<RetireBin>,
    live_dirty: AtomicBool,
    wake: Notify,
    generation: AtomicU64,
    loads: AtomicU64,
}

impl std::fmt::Debug for RegionHandle {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RegionHandle")
            .field("name", &self.name)
            .finish()
    }
}

fn historical_state_path(cfg: &RegionConfig) -> PathBuf {
    cfg.state_dir.join("historical.table")
}

fn live_state_path(cfg: &RegionConfig) -> PathBuf {
    cfg.state_dir.join("live.table")
}

impl RegionHandle {
    /// Creates the handle and loads the region (artifact, then the saved or
    /// configured historical table, then the saved live layer). A failed
    /// artifact leaves the region degraded; the error is in its status.
    pub async fn open(cfg: RegionConfig, settings: UpdateSettings) -> Arc<RegionHandle> {
        let tz = cfg.time_zone.parse().unwrap_or(chrono_tz::UTC);
        let h = Arc::new(RegionHandle {
            name: cfg.name.clone(),
            cfg,
            tz,
            settings,
            current: ArcSwapOption::empty(),
            status: ArcSwap::from_pointee(RegionStatus::default()),
            buckets: ArcSwap::from_pointee(Vec::new()),
            writer: tokio::sync::Mutex::new(Writer {
                live: None,
                live_saved_at: None,
                live_changed: false,
            }),
            retired: Arc::default(),
            live_dirty: AtomicBool::new(false),
            wake: Notify::new(),
            generation: AtomicU64::new(0),
            loads: AtomicU64::new(0),
        });
        if let Err(e) = h.reload().await {
            tracing::warn!(region = %h.name, error = %e, "region starts degraded");
        }
        // Ready means ready to answer from the graph: wait (bounded) for the
        // current hour's metric that `reload` started warming, so the first
        // requests after start-up are not heuristic fallbacks.
        if let Some(snap) = h.snapshot() {
            let hour = crate::serving::speeds::hour_of_week(Utc::now(), h.tz);
            let deadline = Instant::now() + Duration::from_secs(60);
            if h.bucket(&snap, hour, deadline).await.is_none() {
                tracing::warn!(region = %h.name, "current hour's metric not ready after 60 s; serving anyway");
            }
        }
        h
    }

    /// The serving snapshot, or `None` while degraded.
    pub fn snapshot(&self) -> Option<Arc<Snapshot>> {
        self.current.load_full()
    }

    pub fn status(&self) -> RegionStatus {
        let mut s = (**self.status.load()).clone();
        let now = Utc::now();
        if let Some(snap) = self.snapshot() {
            s.ready = true;
            s.generation = snap.generation;
            s.historical_version = snap.historical.as_ref().map(|h| h.version().to_string());
            s.historical_rows = snap.historical.as_ref().map(|h| h.rows());
            s.historical_age_s = snap.historical_at.map(|t| age_s(now, t));
            if let Some(l) = &snap.live {
                s.live_edges = l.stats.fresh_edges;
                s.live_newest_age_s = l.newest_observed_at.map(|t| age_s(now, t));
            }
        }
        s
    }

    fn set_status(&self, f: impl FnOnce(&mut RegionStatus)) {
        let mut s = (**self.status.load()).clone();
        f(&mut s);
        self.status.store(Arc::new(s));
    }

    fn record(&self, outcome: ReloadOutcome) {
        metrics::counter!(m::RELOADS, "region" => self.name.clone(), "table" => outcome.table, "outcome" => outcome.outcome)
            .increment(1);
        if let Some(r) = &outcome.report {
            for (kind, n) in &r.bad_by_kind {
                metrics::counter!(m::REJECTED_ROWS, "region" => self.name.clone(), "table" => outcome.table, "kind" => kind.clone())
                    .increment(*n);
            }
        }
        let is_live = outcome.table == "live";
        self.set_status(|s| {
            if is_live {
                s.last_live_batch = Some(outcome);
            } else {
                s.last_reload = Some(outcome);
            }
        });
    }

    fn publish(&self, build: impl FnOnce(u64) -> Snapshot) -> Arc<Snapshot> {
        let g = self.generation.fetch_add(1, Ordering::SeqCst) + 1;
        let snap = Arc::new(build(g));
        if let Some(old) = self.current.swap(Some(snap.clone())) {
            self.retired.retire(old);
            self.sweep_retired();
        }
        metrics::gauge!(m::SNAPSHOT_GENERATION, "region" => self.name.clone()).set(g as f64);
        metrics::gauge!(m::REGION_READY, "region" => self.name.clone()).set(1.0);
        snap
    }

    /// Reloads the artifact and the historical table (saved state first,
    /// else the configured file). On failure the serving snapshot, if any,
    /// stays as it was.
    pub async fn reload(self: &Arc<Self>) -> Result<(), UpdateError> {
        let mut w = self.writer.lock().await;
        let cfg = self.cfg.clone();
        let settings = self.settings.clone();
        let loaded = tokio::task::spawn_blocking(move || load_region(&cfg, &settings))
            .await
            .map_err(|e| UpdateError::Failed(format!("load task failed: {e}")))?;
        let (region, index, historical, hist_note) = match loaded {
            Ok(x) => x,
            Err(msg) => {
                let degraded = self.snapshot().is_none();
                self.record(ReloadOutcome {
                    table: "artifact",
                    outcome: "failed",
                    at: Utc::now(),
                    error: Some(msg.clone()),
                    report: None,
                });
                if degraded {
                    self.set_status(|s| s.degraded_reason = Some(msg.clone()));
                    metrics::gauge!(m::REGION_READY, "region" => self.name.clone()).set(0.0);
                }
                return Err(UpdateError::Failed(msg));
            }
        };
        let load_no = self.loads.fetch_add(1, Ordering::SeqCst) + 1;
        let now = Utc::now();
        // Live layer: keep the one held if the graph is the same size, else
        // bring back the saved one.
        if w.live.as_ref().map(|l| l.num_edges()) != Some(index.num_edges()) {
            w.live = match load_live(
                &live_state_path(&self.cfg),
                &index,
                now,
                &self.settings.validation,
            ) {
                Ok(Some((layer, _))) => Some(layer),
                Ok(None) => None,
                Err(e) => {
                    tracing::warn!(region = %self.name, error = %e, "saved live layer not restored");
                    None
                }
            };
        }
        let free_flow: Vec<f32> = region.graph.edge_speed_kmh.clone();
        let mut fresh = Snapshot {
            generation: 0,
            region: Arc::new(region),
            index: Arc::new(index),
            free_flow_kmh: Arc::new(free_flow),
            historical_at: historical.as_ref().map(|_| now),
            historical: historical.map(Arc::new),
            live: None,
            artifact_load: load_no,
            artifact_at: now,
        };
        // Serve the live blend from the first moment: customize it for the
        // new graph before the swap, so no answer falls back meanwhile.
        let blended = match w.live.take() {
            Some(layer) => {
                let (layer, b, _) = self.blend_off_worker(&fresh, layer, now, false).await;
                w.live = Some(layer);
                b
            }
            None => None,
        };
        if let Some((blended, stats, newest)) = blended {
            let region = fresh.region.clone();
            let metric = self
                .settings
                .customizer
                .run(move || {
                    region.metric(crate::engine::metric::from_speeds(&region.graph, &blended))
                })
                .await;
            if let Some(metric) = metric {
                fresh.live = Some(Arc::new(LiveMetric {
                    metric,
                    stats,
                    newest_observed_at: newest,
                    built_at: now,
                }));
            }
        }
        self.publish(|g| Snapshot {
            generation: g,
            ..fresh
        });
        self.set_status(|s| s.degraded_reason = None);
        self.record(ReloadOutcome {
            table: "artifact",
            outcome: "accepted",
            at: now,
            error: hist_note,
            report: None,
        });
        if w.live.is_some() {
            self.live_dirty.store(true, Ordering::SeqCst);
            self.wake.notify_one();
        }
        drop(w);
        self.warm();
        Ok(())
    }

    /// Validates a historical table; if accepted, saves it and serves it.
    pub async fn put_historical(
        self: &Arc<Self>,
        csv: Vec<u8>,
    ) -> Result<TableReport, UpdateError> {
        let w = self.writer.lock().await;
        let snap = self.snapshot().ok_or_else(|| {
            UpdateError::Unavailable(self.status().degraded_reason.unwrap_or_default())
        })?;
        let index = snap.index.clone();
        let validation = self.settings.validation.clone();
        let path = historical_state_path(&self.cfg);
        let parsed = self
            .settings
            .updates
            .run(move || {
                let r = HistoricalProfile::parse(&csv, &index, &validation);
                if r.is_ok() {
                    if let Some(dir) = path.parent() {
                        std::fs::create_dir_all(dir)
                            .map_err(|e| format!("{}: {e}", dir.display()))?;
                    }
                    save_historical(&path, &csv).map_err(|e| e.to_string())?;
                }
                Ok::<_, String>(r)
            })
            .await
            .ok_or_else(|| UpdateError::Failed("parse task failed".into()))?
            .map_err(UpdateError::Failed)?;
        match parsed {
            Ok((profile, report)) => {
                let now = Utc::now();
                let profile = Arc::new(profile);
                // Customize the current hour of the new table before the swap
                // so "now" queries without fresh live data keep graph answers
                // instead of waiting for a cold bucket (the next hours are
                // customized by the warm-up or on first use).
                let key = historical_key(snap.artifact_load, Some(&profile));
                let hour = crate::serving::speeds::hour_of_week(now, self.tz);
                let slot = self.slot(&key, hour);
                if !slot.started.swap(true, Ordering::SeqCst) {
                    let job = self.bucket_job(&snap, Some(profile.clone()), hour, slot);
                    self.settings.customizer.run(job).await;
                }
                let live_fresh = snap
                    .live
                    .as_ref()
                    .map(|l| l.stats.any_fresh)
                    .unwrap_or(false);
                self.publish(|g| Snapshot {
                    generation: g,
                    region: snap.region.clone(),
                    index: snap.index.clone(),
                    free_flow_kmh: snap.free_flow_kmh.clone(),
                    historical: Some(profile),
                    historical_at: Some(now),
                    live: snap.live.clone(),
                    artifact_load: snap.artifact_load,
                    artifact_at: snap.artifact_at,
                });
                self.record(ReloadOutcome {
                    table: "historical",
                    outcome: "accepted",
                    at: now,
                    error: None,
                    report: Some(report.clone()),
                });
                if w.live.is_some() {
                    self.live_dirty.store(true, Ordering::SeqCst);
                    self.wake.notify_one();
                }
                drop(w);
                // While fresh live data answers "now", warming the next hour
                // can wait for the live loop's periodic warm-up: the
                // customizer's time goes to the live blend first.
                if !live_fresh {
                    self.warm();
                }
                Ok(report)
            }
            Err(e) => {
                self.record(ReloadOutcome {
                    table: "historical",
                    outcome: "rejected",
                    at: Utc::now(),
                    error: Some(e.to_string()),
                    report: e.report().cloned(),
                });
                Err(UpdateError::Rejected(e))
            }
        }
    }

    /// Applies a batch of live observations (JSON array or CSV).
    pub async fn put_live(&self, body: &[u8], csv: bool) -> Result<TableReport, UpdateError> {
        let mut w = self.writer.lock().await;
        let snap = self.snapshot().ok_or_else(|| {
            UpdateError::Unavailable(self.status().degraded_reason.unwrap_or_default())
        })?;
        let mut layer = w
            .live
            .take()
            .unwrap_or_else(|| LiveLayer::new(snap.index.num_edges()));
        let now = Utc::now();
        // Parse and apply on the customizer thread: a large batch is
        // milliseconds of CPU that request workers should not spend.
        let (index, validation, body) = (
            snap.index.clone(),
            self.settings.validation.clone(),
            body.to_vec(),
        );
        let done = self
            .settings
            .updates
            .run(move || {
                let r = if csv {
                    layer.apply_csv(&index, &body, now, &validation)
                } else {
                    layer.apply_json(&index, &body, now, &validation)
                };
                (layer, r)
            })
            .await;
        let Some((layer, r)) = done else {
            return Err(UpdateError::Failed("live batch task failed".into()));
        };
        w.live = Some(layer);
        match r {
            Ok(report) => {
                w.live_changed = true;
                drop(w);
                self.live_dirty.store(true, Ordering::SeqCst);
                self.wake.notify_one();
                self.record(ReloadOutcome {
                    table: "live",
                    outcome: "accepted",
                    at: now,
                    error: None,
                    report: Some(report.clone()),
                });
                Ok(report)
            }
            Err(e) => {
                self.record(ReloadOutcome {
                    table: "live",
                    outcome: "rejected",
                    at: now,
                    error: Some(e.to_string()),
                    report: e.report().cloned(),
                });
                Err(UpdateError::Rejected(e))
            }
        }
    }

    /// The historical metric for an hour of the week, customizing it on a
    /// blocking thread if needed; waits at most until `deadline`.
    pub async fn bucket(
        &self,
        snap: &Snapshot,
        hour: u8,
        deadline: Instant,
    ) -> Option<Arc<Metric>> {
        let key = snap.historical_key();
        // Without a table every hour is free-flow: one shared slot.
        let hour = if snap.historical.is_some() {
            hour
        } else {
            u8::MAX
        };
        let slot = self.slot(&key, hour);
        if let Some(mtr) = slot.cell.get() {
            return Some(mtr.clone());
        }
        if !slot.started.swap(true, Ordering::SeqCst) {
            self.spawn_bucket(snap, hour, slot.clone());
        }
        loop {
            let notified = slot.notify.notified();
            tokio::pin!(notified);
            notified.as_mut().enable();
            if let Some(mtr) = slot.cell.get() {
                return Some(mtr.clone());
            }
            let left = deadline.checked_duration_since(Instant::now())?;
            if tokio::time::timeout(left, notified).await.is_err() {
                return slot.cell.get().cloned();
            }
        }
    }

    fn slot(&self, key: &str, hour: u8) -> Arc<Slot> {
        let list = self.buckets.load();
        if let Some((_, _, s)) = list.iter().find(|(k, h, _)| k == key && *h == hour) {
            return s.clone();
        }
        let cap = self.settings.bucket_cache + 2;
        // Buckets of superseded tables leave the list as soon as a new one
        // is made, and are freed once the requests holding them finish.
        let current = self.snapshot().map(|s| s.historical_key());
        loop {
            let cur = self.buckets.load_full();
            if let Some((_, _, s)) = cur.iter().find(|(k, h, _)| k == key && *h == hour) {
                return s.clone();
            }
            let s = Arc::new(Slot::default());
            let mut v: Vec<_> = cur
                .iter()
                .filter(|(k, _, _)| k == key || Some(k) == current.as_ref())
                .cloned()
                .collect();
            v.push((key.to_string(), hour, s.clone()));
            while v.len() > cap {
                v.remove(0);
            }
            let evicted: Vec<Arc<Slot>> = cur
                .iter()
                .filter(|(_, _, o)| !v.iter().any(|(_, _, n)| Arc::ptr_eq(o, n)))
                .map(|(_, _, o)| o.clone())
                .collect();
            let prev = self.buckets.compare_and_swap(&cur, Arc::new(v));
            if Arc::ptr_eq(&prev, &cur) {
                // Evicted buckets may be the only holders of a metric of
                // tens of MB: this request must not be the one to free it.
                if !evicted.is_empty() {
                    self.retired.retire(EvictedSlots(evicted));
                    self.sweep_retired();
                }
                return s;
            }
        }
    }

    /// Frees, on the `updates` thread, whatever retired data no request
    /// holds any more. Called after every publish and every live-loop
    /// round, so leftovers go within a round.
    pub fn sweep_retired(&self) {
        if !self.retired.is_empty() {
            let bin = self.retired.clone();
            self.settings.updates.spawn(move || drop(bin.sweep()));
        }
    }

    /// Retired items not yet freed, and retired since start.
    pub fn retired(&self) -> (usize, u64) {
        (self.retired.len(), self.retired.total())
    }

    fn spawn_bucket(&self, snap: &Snapshot, hour: u8, slot: Arc<Slot>) {
        let job = self.bucket_job(snap, snap.historical.clone(), hour, slot);
        self.settings.customizer.spawn(job);
    }

    /// The customizer job that fills `slot` with the metric of `hist` (or
    /// free-flow) for `hour` on `snap`'s graph and wakes its waiters.
    fn bucket_job(
        &self,
        snap: &Snapshot,
        hist: Option<Arc<HistoricalProfile>>,
        hour: u8,
        slot: Arc<Slot>,
    ) -> impl FnOnce() + Send + 'static {
        let region = snap.region.clone();
        let ff = snap.free_flow_kmh.clone();
        let name = self.name.clone();
        move || {
            let t = Instant::now();
            let speeds = match &hist {
                Some(h) => h.speeds_for_hour(&ff, hour),
                None => ff.to_vec(),
            };
            let metric = region.metric(crate::engine::metric::from_speeds(&region.graph, &speeds));
            metrics::histogram!(m::CUSTOMIZATION, "region" => name, "kind" => "historical")
                .record(t.elapsed().as_secs_f64());
            let _ = slot.cell.set(Arc::new(metric));
            slot.notify.notify_waiters();
        }
    }

    /// Starts customizing the current and the next hour in the background.
    pub fn warm(&self) {
        if let Some(snap) = self.snapshot() {
            let h = crate::serving::speeds::hour_of_week(Utc::now(), self.tz);
            for hour in [h, (h + 1) % 168] {
                let hour = if snap.historical.is_some() {
                    hour
                } else {
                    u8::MAX
                };
                let slot = self.slot(&snap.historical_key(), hour);
                if !slot.started.swap(true, Ordering::SeqCst) {
                    self.spawn_bucket(&snap, hour, slot);
                }
            }
        }
    }

    fn blend_params(&self) -> BlendParams {
        BlendParams {
            ttl: Duration::from_secs_f64(self.settings.live.ttl_s),
            half_life: Duration::from_secs_f64(self.settings.live.half_life_s),
            tz: self.tz,
        }
    }

    /// Blends `layer` over `snap` on the updates thread (the layer is
    /// moved there and back), so request workers never do it. `save`
    /// writes the layer to the state directory first.
    async fn blend_off_worker(
        &self,
        snap: &Snapshot,
        layer: LiveLayer,
        now: DateTime<Utc>,
        save: bool,
    ) -> (LiveLayer, Option<Blended>, Option<bool>) {
        let base = BlendBase {
            historical: snap.historical.clone(),
            free_flow_kmh: snap.free_flow_kmh.clone(),
            index: snap.index.clone(),
        };
        let (params, name) = (self.blend_params(), self.name.clone());
        let path = live_state_path(&self.cfg);
        let back = self
            .settings
            .updates
            .run(move || {
                let mut layer = layer;
                let saved = save.then(|| {
                    if let Some(dir) = path.parent() {
                        let _ = std::fs::create_dir_all(dir);
                    }
                    match save_live(&path, &layer, &base.index) {
                        Ok(()) => true,
                        Err(e) => {
                            tracing::warn!(region = %name, error = %e, "live layer not saved");
                            false
                        }
                    }
                });
                let blended = match blend_layer(&base, &mut layer, now, params) {
                    Ok(b) => Some(b),
                    Err(e) => {
                        tracing::error!(region = %name, error = %e, "live blend failed");
                        None
                    }
                };
                (layer, blended, saved)
            })
            .await;
        match back {
            Some(x) => x,
            // The job panicked: the layer is lost with it; start empty
            // rather than serve a half-applied one.
            None => (LiveLayer::new(snap.index.num_edges()), None, None),
        }
    }

    /// Re-blends and re-customizes the live metric if observations arrived
    /// (or the held blend is getting old), and publishes it. Returns whether
    /// a new snapshot was published.
    pub async fn refresh_live(&self, force: bool) -> bool {
        let dirty = self.live_dirty.swap(false, Ordering::SeqCst);
        let Some(snap) = self.snapshot() else {
            return false;
        };
        let interval = Duration::from_millis(self.settings.live.recustomize_ms);
        let aging = snap
            .live
            .as_ref()
            .map(|l| (Utc::now() - l.built_at).to_std().unwrap_or_default() > interval * 20)
            .unwrap_or(false);
        if !(dirty || aging || force) {
            return false;
        }
        // Nothing arrived and the held blend has nothing fresh to decay: a
        // new blend would equal it (a stale feed must not cost a
        // customization every few seconds).
        let held_stale = snap
            .live
            .as_ref()
            .map(|l| !l.stats.any_fresh)
            .unwrap_or(false);
        if !dirty && !force && held_stale {
            return false;
        }
        let mut guard = self.writer.lock().await;
        let Some(layer) = guard.live.take() else {
            return false;
        };
        let now = Utc::now();
        // Save the layer now and then so a restart brings it back.
        let save = guard.live_changed
            && guard
                .live_saved_at
                .map(|t| t.elapsed() > Duration::from_secs(2))
                .unwrap_or(true);
        let (layer, blended, saved) = self.blend_off_worker(&snap, layer, now, save).await;
        guard.live = Some(layer);
        if saved == Some(true) {
            guard.live_saved_at = Some(Instant::now());
            guard.live_changed = false;
        }
        let Some((blended, stats, newest)) = blended else {
            return false;
        };
        // Customize without holding the writer lock: uploads need not wait.
        drop(guard);
        let region = snap.region.clone();
        let t = Instant::now();
        let metric = self
            .settings
            .customizer
            .run(move || region.metric(crate::engine::metric::from_speeds(&region.graph, &blended)))
            .await;
        let Some(metric) = metric else { return false };
        metrics::histogram!(m::CUSTOMIZATION, "region" => self.name.clone(), "kind" => "live")
            .record(t.elapsed().as_secs_f64());
        // Publish on top of whatever is current now: a table may have landed
        // meanwhile (it marks the live layer dirty, so the next round blends
        // over it).
        let cur = self.snapshot().unwrap_or(snap.clone());
        if !Arc::ptr_eq(&cur.region, &snap.region) {
            // The artifact was reloaded meanwhile: this blend belongs to the
            // old graph. Blend again over the new one.
            self.live_dirty.store(true, Ordering::SeqCst);
            self.wake.notify_one();
            return false;
        }
        let live = Arc::new(LiveMetric {
            metric,
            stats,
            newest_observed_at: newest,
            built_at: now,
        });
        self.publish(|g| Snapshot {
            generation: g,
            region: cur.region.clone(),
            index: cur.index.clone(),
            free_flow_kmh: cur.free_flow_kmh.clone(),
            historical: cur.historical.clone(),
            historical_at: cur.historical_at,
            live: Some(live),
            artifact_load: cur.artifact_load,
            artifact_at: cur.artifact_at,
        });
        if let Some(n) = newest {
            metrics::gauge!(m::LIVE_AGE, "region" => self.name.clone()).set(age_s(Utc::now(), n));
        }
        true
    }

    /// Runs the live loop until `shutdown` resolves: re-customizes at most
    /// every `recustomize_ms` when observations arrived, and scans the
    /// watched directory.
    pub async fn run_live_loop(self: Arc<Self>, shutdown: impl std::future::Future<Output = ()>) {
        tokio::pin!(shutdown);
        let interval = Duration::from_millis(self.settings.live.recustomize_ms);
        let watch_every = Duration::from_secs_f64(self.settings.live.watch_interval_s);
        let mut last_scan = Instant::now() - watch_every;
        let mut last_warm = Instant::now();
        loop {
            tokio::select! {
                _ = &mut shutdown => break,
                _ = self.wake.notified() => {},
                _ = tokio::time::sleep(interval) => {},
            }
            let started = Instant::now();
            self.refresh_live(false).await;
            self.sweep_retired();
            if let Some(snap) = self.snapshot() {
                if let Some(l) = &snap.live {
                    if let Some(n) = l.newest_observed_at {
                        metrics::gauge!(m::LIVE_AGE, "region" => self.name.clone())
                            .set(age_s(Utc::now(), n));
                    }
                }
            }
            if self.cfg.live_dir.is_some() && last_scan.elapsed() >= watch_every {
                last_scan = Instant::now();
                self.scan_live_dir().await;
            }
            if last_warm.elapsed() > Duration::from_secs(60) {
                last_warm = Instant::now();
                self.warm();
            }
            // At most one re-customization per interval.
            let spent = started.elapsed();
            if spent < interval {
                tokio::select! {
                    _ = &mut shutdown => break,
                    _ = tokio::time::sleep(interval - spent) => {},
                }
            }
        }
    }

    /// Applies every `*.csv` file in the watched directory, then renames it
    /// to `.done` or `.rejected` so nothing is applied twice or lost.
    pub async fn scan_live_dir(&self) {
        let Some(dir) = self.cfg.live_dir.clone() else {
            return;
        };
        let Ok(entries) = std::fs::read_dir(&dir) else {
            return;
        };
        let mut files: Vec<PathBuf> = entries
            .flatten()
            .map(|e| e.path())
            .filter(|p| p.extension().map(|x| x == "csv").unwrap_or(false))
            .collect();
        files.sort();
        for f in files {
            let Ok(bytes) = std::fs::read(&f) else {
                continue;
            };
            let outcome = self.put_live(&bytes, true).await;
            let ext = if outcome.is_ok() { "done" } else { "rejected" };
            if let Err(e) = std::fs::rename(&f, f.with_extension(ext)) {
                tracing::warn!(file = %f.display(), error = %e, "could not mark live file");
            }
        }
    }
}

/// What a live blend needs besides the layer (owned, for the customizer).
#[derive(Debug, Clone, Copy)]
struct BlendParams {
    ttl: Duration,
    half_life: Duration,
    tz: chrono_tz::Tz,
}

type Blended = (Vec<f32>, BlendStats, Option<DateTime<Utc>>);

/// The parts of a snapshot a live blend reads (owned, for the updates
/// thread).
struct BlendBase {
    historical: Option<Arc<HistoricalProfile>>,
    free_flow_kmh: Arc<Vec<f32>>,
    index: Arc<EdgeIndex>,
}

/// Expires old observations and blends the layer over the current hour's
/// historical speeds of `snap`.
fn blend_layer(
    snap: &BlendBase,
    layer: &mut LiveLayer,
    now: DateTime<Utc>,
    p: BlendParams,
) -> Result<Blended, String> {
    layer.expire(now, p.ttl);
    let newest = layer.newest_observed_at();
    let hour = crate::serving::speeds::hour_of_week(now, p.tz);
    let base = match &snap.historical {
        Some(h) => h.speeds_for_hour(&snap.free_flow_kmh, hour),
        None => snap.free_flow_kmh.to_vec(),
    };
    let mut blended = Vec::new();
    blend_into(&base, layer, now, p.half_life, p.ttl, &mut blended)
        .map(|stats| (blended, stats, newest))
        .map_err(|e| e.to_string())
}

fn age_s(now: DateTime<Utc>, t: DateTime<Utc>) -> f64 {
    ((now - t).num_milliseconds() as f64 / 1000.0).max(0.0)
}

type Loaded = (Region, EdgeIndex, Option<HistoricalProfile>, Option<String>);

/// Loads a region's artifact and its historical table (saved state first,
/// then the configured file). A bad historical table does not fail the
/// load: the region serves free-flow for the historical tier and the note
/// says why.
fn load_region(cfg: &RegionConfig, settings: &UpdateSettings) -> Result<Loaded, String> {
    let art = Artifact::load(&cfg.artifact).map_err(|e| e.to_string())?;
    let region = Region::from_artifact(art);
    let index = EdgeIndex::new(&region.graph);
    let mut note = None;
    let saved = historical_state_path(cfg);
    let historical = match load_historical(&saved, &index, &settings.validation) {
        Ok(Some((p, _))) => Some(p),
        Ok(None) => match &cfg.historical {
            Some(path) => match read_table(path, &index, &settings.validation) {
                Ok(p) => Some(p),
                Err(e) => {
                    note = Some(format!("historical table not loaded: {e}"));
                    None
                }
            },
            None => None,
        },
        Err(e) => {
            note = Some(format!("saved historical table not restored: {e}"));
            None
        }
    };
    Ok((region, index, historical, note))
}

fn read_table(
    path: &Path,
    index: &EdgeIndex,
    v: &ValidationConfig,
) -> Result<HistoricalProfile, String> {
    let bytes = std::fs::read(path).map_err(|e| format!("{}: {e}", path.display()))?;
    HistoricalProfile::parse(&bytes, index, v)
        .map(|(p, _)| p)
        .map_err(|e| format!("{}: {e}", path.display()))
}
