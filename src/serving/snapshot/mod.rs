//! Per-region serving state: immutable snapshots behind `arc-swap`, the
//! historical tier's hour-of-week profile metrics, and every update path (historical
//! table, live observations, artifact reload).
//!
//! Readers call [`RegionReader::snapshot`] and get an `Arc<Snapshot>`: a
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
//! A region has two sides. [`RegionReader`] is what answers see: the
//! published snapshot, the status and the correction model, and no write.
//! [`RegionUpdater`] is the one way to change a region: every write
//! (reload, historical upload, live batch, model upload) goes through it,
//! is checked, persisted and then published on its reader. The live loop
//! ([`LiveLoop`]) drives the updater's live blend and the watched folder.
//!
//! # Layout
//!
//! - this file: [`Snapshot`], [`LiveMetric`], [`RegionStatus`],
//!   [`ReloadOutcome`], [`UpdateSettings`];
//! - `reader`: [`RegionReader`], the read side (its writes are
//!   `pub(super)`: only this module's update paths make them);
//! - `updater`: [`RegionUpdater`]: opening a region, the three update
//!   paths ([`RegionUpdater::reload`], [`RegionUpdater::put_historical`],
//!   [`RegionUpdater::put_live`]), the model upload (delegated to
//!   [`crate::correction::ModelUpdater`]), publishing, recording outcomes;
//! - `buckets`: the historical tier's metrics, one per hour-of-week
//!   profile, all customized before their snapshot is published
//!   ([`Profiles`]), and the retirement of superseded snapshots;
//! - `live`: blending, customizing and publishing the live tier;
//! - `live_loop`: [`LiveLoop`], the background loop (at most one
//!   re-customization per `recustomize_ms`) and the watched folder;
//! - `load`: the file work of a load (artifact, the rule choosing the
//!   historical table, refusing damaged saved files, the saved live layer
//!   with its write-ahead log replayed), run on tokio's blocking pool;
//! - `error`: the typed errors ([`UpdateError`], [`LoadError`], ...).
//!
//! **Architecture Invariant:** nothing here knows about HTTP; the service
//! layer calls these methods and converts results to its DTOs.

mod buckets;
mod error;
mod live;
mod live_loop;
mod load;
mod reader;
mod updater;

pub use crate::correction::ModelUpdateError;
pub use buckets::{metric_bytes, ProfileUsed, Profiles};
pub use error::{Degraded, HistoricalNote, LoadError, TableReadError, UpdateError, UpdateFailure};
pub use live_loop::LiveLoop;
pub use load::FileStamp;
pub use reader::RegionReader;
pub use updater::RegionUpdater;

use crate::customizer::Customizer;
use crate::settings::{CustomizePriority, LiveConfig, ServingSettings};
use crate::speeds::{BlendStats, EdgeIndex, HistoricalProfile, TableReport, ValidationConfig};
use chrono::{DateTime, Utc};
use hodos_engine::region::{Metric, Region};
use std::sync::Arc;

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

pub(crate) fn age_s(now: DateTime<Utc>, t: DateTime<Utc>) -> f64 {
    ((now - t).num_milliseconds() as f64 / 1000.0).max(0.0)
}
