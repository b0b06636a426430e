//! Per-region serving state: immutable snapshots behind `arc-swap`, the
//! historical tier's hour-of-week profile metrics, and every update path (historical
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
//! # Layout
//!
//! - this file: [`Snapshot`], [`LiveMetric`], [`RegionStatus`],
//!   [`ReloadOutcome`], [`UpdateSettings`], the [`RegionHandle`] itself,
//!   opening a region, reading and publishing snapshots, recording
//!   outcomes;
//! - `buckets`: the historical tier's metrics, one per hour-of-week
//!   profile, all customized before their snapshot is published
//!   ([`Profiles`]), and the retirement of superseded snapshots;
//! - `update`: the three update paths ([`RegionHandle::reload`],
//!   [`RegionHandle::put_historical`], [`RegionHandle::put_live`]);
//! - `live`: blending and publishing the live tier, the live loop and the
//!   watched folder;
//! - `load`: the file work of a load (artifact, the rule choosing the
//!   historical table, refusing damaged saved files, the saved live layer
//!   with its write-ahead log replayed), run on tokio's blocking pool;
//! - `model`: the correction model's update path (at start, on upload);
//! - `error`: the typed errors ([`UpdateError`], [`LoadError`], ...).
//!
//! **Architecture Invariant:** nothing here knows about HTTP; the service
//! layer calls these methods and converts results to its DTOs.

mod buckets;
mod error;
mod live;
mod load;
mod model;
mod update;

pub use buckets::{metric_bytes, ProfileUsed, Profiles};
pub use error::{Degraded, HistoricalNote, LoadError, TableReadError, UpdateError, UpdateFailure};
pub use load::FileStamp;
pub use model::ModelUpdateError;

use crate::correction::ModelSlot;
use crate::customizer::Customizer;
use crate::metrics as m;
use crate::retire::RetireBin;
use crate::settings::{CustomizePriority, LiveConfig, RegionConfig, ServingSettings};
use crate::speeds::{
    BlendStats, EdgeIndex, HistoricalProfile, LiveLayer, TableReport, ValidationConfig,
};
use arc_swap::{ArcSwap, ArcSwapOption};
use chrono::{DateTime, Utc};
use hodos_engine::region::{Metric, Region};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::time::Instant;
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
    /// When the serving historical table was written: the configured
    /// file's modification time or the upload's save time.
    pub historical_at: Option<DateTime<Utc>>,
    /// The historical tier: one customized metric per hour-of-week profile
    /// of `historical` (one free-flow profile without a table), all ready
    /// before this snapshot was published.
    pub profiles: Arc<Profiles>,
    /// Where the serving historical table came from.
    pub historical_source: Option<TableSource>,
    /// The blended live metric, once observations have arrived.
    pub live: Option<Arc<LiveMetric>>,
    /// Identifies the artifact load (increases with every reload).
    pub artifact_load: u64,
    pub artifact_at: DateTime<Utc>,
    /// Length and modification time of the artifact file when it was
    /// loaded: a reload that finds the same stamp re-reads only the tables.
    pub artifact_stamp: Option<FileStamp>,
}

/// Where a historical table came from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum TableSource {
    /// The region's configured `historical` file.
    Configured(std::path::PathBuf),
    /// An upload, saved in the state directory at this path.
    Upload(std::path::PathBuf),
}

impl TableSource {
    /// `configured` or `upload`.
    pub fn kind(&self) -> &'static str {
        match self {
            TableSource::Configured(_) => "configured",
            TableSource::Upload(_) => "upload",
        }
    }

    pub fn path(&self) -> &std::path::Path {
        match self {
            TableSource::Configured(p) | TableSource::Upload(p) => p,
        }
    }
}

/// What a reload did.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Reloaded {
    /// Something changed and a new snapshot serves.
    Accepted,
    /// The artifact and the chosen table are the ones already serving:
    /// nothing was published and the table's age is unchanged.
    Unchanged,
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
#[derive(Debug, Clone, Default)]
pub struct RegionStatus {
    pub ready: bool,
    /// The first load (artifact, tables, the current hour's metric) has
    /// not finished yet.
    pub loading: bool,
    /// Why the region serves no graph, when it does not.
    pub degraded_reason: Option<String>,
    pub generation: u64,
    pub historical_version: Option<String>,
    pub historical_rows: Option<u64>,
    pub historical_age_s: Option<f64>,
    /// `configured` or `upload`.
    pub historical_source: Option<&'static str>,
    /// The configured file, or the saved upload in the state directory.
    pub historical_path: Option<String>,
    /// Why a candidate historical table was passed over at the last load
    /// (a damaged saved table, an unreadable configured file).
    pub historical_problems: Vec<String>,
    /// Why the saved live layer or its write-ahead log was refused at the
    /// last load (cleared once the layer is saved again).
    pub live_problems: Vec<String>,
    pub live_edges: u64,
    pub live_newest_age_s: Option<f64>,
    pub last_reload: Option<ReloadOutcome>,
    pub last_live_batch: Option<ReloadOutcome>,
    /// The serving hour-of-week profiles.
    pub profiles: Option<ProfilesStatus>,
}

/// The serving profiles, for `/admin/status`.
#[derive(Debug, Clone, Default)]
pub struct ProfilesStatus {
    /// Number of profiles (customized metrics held).
    pub count: usize,
    /// Every hour answered with its own speeds.
    pub exact: bool,
    /// Profile index of each hour of the week (168 values).
    pub hour_profile: Vec<u8>,
    /// Representative hour of each profile.
    pub representatives: Vec<u8>,
    /// Median over hours of each hour's median relative edge travel-time
    /// difference from its representative (sampled edges).
    pub deviation_median: f64,
    /// Largest such difference of any sampled edge in any hour.
    pub deviation_max: f64,
    /// Per hour: median relative edge travel-time difference from its
    /// representative (168 values).
    pub hour_deviation_median: Vec<f64>,
    /// Per hour: the largest such difference (168 values).
    pub hour_deviation_max: Vec<f64>,
    /// Per-hour heuristic factor (168 values).
    pub hour_factor: Vec<f64>,
    /// Heap bytes of all profile metrics.
    pub metric_bytes: u64,
    /// Seconds the grouping and the customizations took.
    pub build_s: f64,
}

impl ProfilesStatus {
    fn of(p: &Profiles) -> Self {
        let g = &p.grouping;
        let (deviation_median, deviation_max) = g.deviation_summary();
        ProfilesStatus {
            count: g.len(),
            exact: g.exact,
            hour_profile: g.hour_profile.to_vec(),
            representatives: g.representatives.clone(),
            deviation_median,
            deviation_max,
            hour_deviation_median: g.deviation.iter().map(|d| d.0).collect(),
            hour_deviation_max: g.deviation.iter().map(|d| d.1).collect(),
            hour_factor: g.hour_factor.to_vec(),
            metric_bytes: p.heap_bytes() as u64,
            build_s: p.build_s,
        }
    }
}

/// One update's outcome.
#[derive(Debug, Clone)]
pub struct ReloadOutcome {
    /// `historical`, `live` or `artifact`.
    pub table: &'static str,
    /// `accepted`, `unchanged` (reload only), `rejected` or `failed`.
    pub outcome: &'static str,
    pub at: DateTime<Utc>,
    /// Error text for rejected/failed updates.
    pub error: Option<String>,
    pub report: Option<TableReport>,
}

/// Settings the update paths need, taken from the configuration once.
#[derive(Debug, Clone)]
pub struct UpdateSettings {
    pub validation: ValidationConfig,
    pub live: LiveConfig,
    /// Hour-of-week profiles per table (`query.profiles`, 1..=168).
    pub profiles: usize,
    /// Where every customization runs (one thread, low CPU priority,
    /// shared by all regions).
    pub customizer: Customizer,
    /// Where the lighter update work runs: parsing live batches and
    /// historical tables, blending and saving the live layer. A thread of
    /// its own at the same priority, so an upload is not queued behind a
    /// customization of several hundred milliseconds.
    pub updates: Customizer,
    /// The CPU priority of both (`server.customize_priority`), also given
    /// to the thread that reads an upload as it arrives.
    pub priority: CustomizePriority,
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
            profiles: cfg.query.profiles.clamp(1, 168),
            customizer: Customizer::start(cfg.customize_priority),
            updates: Customizer::start_named("hodos-update", cfg.customize_priority),
            priority: cfg.customize_priority,
        }
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
    writer: tokio::sync::Mutex<Writer>,
    /// Why the region serves no graph (typed; the status shows its text).
    degraded: ArcSwapOption<LoadError>,
    /// Superseded snapshots (with their profile metrics), freed on the `updates`
    /// thread once no request holds them (see [`crate::retire`]).
    retired: Arc<RetireBin>,
    live_dirty: AtomicBool,
    wake: Notify,
    generation: AtomicU64,
    loads: AtomicU64,
    /// Set once the first load finished (served or degraded).
    loaded: AtomicBool,
    /// The correction model this region's answers go through (none until
    /// one is configured or uploaded). Independent of snapshots: a new
    /// table or artifact keeps the model, a new model keeps the snapshot.
    pub correction: ModelSlot,
}

impl std::fmt::Debug for RegionHandle {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RegionHandle")
            .field("name", &self.name)
            .finish()
    }
}

impl RegionHandle {
    /// Creates the handle and loads the region (see [`Self::load_first`]).
    pub async fn open(cfg: RegionConfig, settings: UpdateSettings) -> Arc<RegionHandle> {
        let h = Self::new(cfg, settings);
        h.load_first().await;
        h
    }

    /// Creates the handle without loading anything: it reports itself
    /// loading (and answers come from the heuristic tier) until
    /// [`Self::load_first`] finishes.
    pub fn new(cfg: RegionConfig, settings: UpdateSettings) -> Arc<RegionHandle> {
        let tz = cfg.time_zone.parse().unwrap_or(chrono_tz::UTC);
        Arc::new(RegionHandle {
            name: cfg.name.clone(),
            cfg,
            tz,
            settings,
            current: ArcSwapOption::empty(),
            status: ArcSwap::from_pointee(RegionStatus::default()),
            writer: tokio::sync::Mutex::new(Writer {
                live: None,
                live_saved_at: None,
                live_changed: false,
            }),
            degraded: ArcSwapOption::empty(),
            retired: Arc::default(),
            live_dirty: AtomicBool::new(false),
            wake: Notify::new(),
            generation: AtomicU64::new(0),
            loads: AtomicU64::new(0),
            loaded: AtomicBool::new(false),
            correction: ModelSlot::default(),
        })
    }

    /// The first load: the artifact, then the historical table (by the
    /// rule in `load`), then the saved live layer with its write-ahead log
    /// replayed. A failed artifact leaves the region degraded; the error
    /// is in its status.
    pub async fn load_first(self: &Arc<Self>) {
        let h = self;
        if let Err(e) = h.reload().await {
            tracing::warn!(region = %h.name, error = %e, "region starts degraded");
        }
        h.load_model_at_start();
        // Ready means ready to answer from the graph for any departure:
        // `reload` publishes the first snapshot only once every profile is
        // customized (a bounded amount of work: `query.profiles` metrics).
        h.loaded.store(true, Ordering::SeqCst);
    }

    /// Whether the first load has finished.
    pub fn loaded(&self) -> bool {
        self.loaded.load(Ordering::SeqCst)
    }

    /// The serving snapshot, or `None` while degraded.
    pub fn snapshot(&self) -> Option<Arc<Snapshot>> {
        self.current.load_full()
    }

    pub fn status(&self) -> RegionStatus {
        let mut s = (**self.status.load()).clone();
        s.loading = !self.loaded();
        let now = Utc::now();
        if let Some(snap) = self.snapshot() {
            s.ready = true;
            s.generation = snap.generation;
            s.historical_version = snap.historical.as_ref().map(|h| h.version().to_string());
            s.historical_rows = snap.historical.as_ref().map(|h| h.rows());
            s.historical_age_s = snap.historical_at.map(|t| age_s(now, t));
            s.historical_source = snap.historical_source.as_ref().map(|x| x.kind());
            s.historical_path = snap
                .historical_source
                .as_ref()
                .map(|x| x.path().display().to_string());
            if let Some(l) = &snap.live {
                s.live_edges = l.stats.fresh_edges;
                s.live_newest_age_s = l.newest_observed_at.map(|t| age_s(now, t));
            }
            s.profiles = Some(ProfilesStatus::of(&snap.profiles));
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
            self.retired.retire(buckets::RetiredSnapshot(old));
            self.sweep_retired();
        }
        metrics::gauge!(m::SNAPSHOT_GENERATION, "region" => self.name.clone()).set(g as f64);
        metrics::gauge!(m::REGION_READY, "region" => self.name.clone()).set(1.0);
        snap
    }
}

fn age_s(now: DateTime<Utc>, t: DateTime<Utc>) -> f64 {
    ((now - t).num_milliseconds() as f64 / 1000.0).max(0.0)
}
