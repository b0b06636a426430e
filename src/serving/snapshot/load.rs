//! The file work of a (re)load: the artifact, the choice of historical
//! table, and the saved live layer with the write-ahead log of batches
//! accepted since it was saved. All of it is plain `std::fs` and runs on
//! tokio's blocking pool (see [`super::RegionHandle::reload`]), never on a
//! request worker.
//!
//! # Which historical table serves
//!
//! The newer of the configured file (`historical` in the region's
//! configuration, by its modification time) and the last accepted upload
//! (saved in `state_dir`, by the time it was saved); an upload wins a tie.
//! If the newer one cannot be used (unreadable, invalid, damaged), the
//! other serves and the problem is reported; with neither, free-flow
//! serves the historical tier. Every load and reload applies this rule
//! afresh, so editing the configured file after an upload and reloading
//! serves the edit, and a restart serves what was served before it.
//!
//! A saved file that fails its envelope check (truncated, bit-flipped,
//! empty, another kind of file) is refused: never served, logged at warn,
//! counted in `hodos_state_files_refused_total`, and named in the region's
//! status and readiness.

use super::error::{HistoricalNote, LoadError, TableReadError};
use super::{TableSource, UpdateSettings};
use crate::metrics as m;
use crate::settings::RegionConfig;
use crate::speeds::wal::{self, BatchKind};
use crate::speeds::{
    load_live, open_historical, Batch, EdgeIndex, HistoricalProfile, LiveLayer, SpeedsError,
    ValidationConfig,
};
use chrono::{DateTime, Utc};
use hodos_engine::artifact::Artifact;
use hodos_engine::region::Region;
use std::path::{Path, PathBuf};
use std::time::SystemTime;

pub(super) fn historical_state_path(cfg: &RegionConfig) -> PathBuf {
    cfg.state_dir.join("historical.table")
}

pub(super) fn live_state_path(cfg: &RegionConfig) -> PathBuf {
    cfg.state_dir.join("live.table")
}

pub(super) fn live_wal_path(cfg: &RegionConfig) -> PathBuf {
    cfg.state_dir.join("live.wal")
}

/// Length and modification time of a file: a reload whose artifact has the
/// same stamp keeps the loaded graph and re-reads only the tables.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FileStamp {
    len: u64,
    modified: SystemTime,
}

pub(super) fn file_stamp(path: &Path) -> Option<FileStamp> {
    let m = std::fs::metadata(path).ok()?;
    Some(FileStamp {
        len: m.len(),
        modified: m.modified().ok()?,
    })
}

/// The historical table chosen by the rule in the module docs.
pub(super) struct Chosen {
    pub profile: HistoricalProfile,
    pub source: TableSource,
    /// The configured file's modification time or the upload's save time:
    /// the table's age counts from here, unchanged by reloads and restarts.
    pub at: DateTime<Utc>,
}

/// The outcome of choosing a historical table.
#[derive(Default)]
pub(super) struct TableChoice {
    pub table: Option<Chosen>,
    /// Why a candidate was passed over (each is logged and reported).
    pub problems: Vec<HistoricalNote>,
}

/// A loaded region, before it becomes a snapshot.
pub(super) struct Loaded {
    pub region: Region,
    pub index: EdgeIndex,
    pub historical: TableChoice,
    /// The saved live layer with the logged batches replayed over it, when
    /// the caller asked for it (`None` inside means there was none).
    pub restored_live: Option<Option<LiveLayer>>,
    /// Why the saved live layer or the log could not be used.
    pub live_problems: Vec<String>,
    pub artifact_stamp: Option<FileStamp>,
    /// When the load finished (the snapshot's `artifact_at`).
    pub at: DateTime<Utc>,
}

/// Loads a region's artifact and chooses its historical table. A bad
/// historical table does not fail the load: the other candidate or
/// free-flow serves and the problem says why. The saved live layer (and
/// the log over it) is read too unless the writer holds one of
/// `held_live_edges` edges, the size of the new graph.
pub(super) fn load_region(
    cfg: &RegionConfig,
    settings: &UpdateSettings,
    held_live_edges: Option<usize>,
    name: &str,
) -> Result<Loaded, LoadError> {
    let artifact_stamp = file_stamp(&cfg.artifact);
    let art = Artifact::load(&cfg.artifact)?;
    let region = Region::from_artifact(art);
    let index = EdgeIndex::new(&region.graph);
    let historical = choose_historical(cfg, &index, &settings.validation, name);
    let now = Utc::now();
    let mut live_problems = Vec::new();
    let restored_live = (held_live_edges != Some(index.num_edges())).then(|| {
        restore_live(
            cfg,
            &index,
            now,
            &settings.validation,
            name,
            &mut live_problems,
        )
    });
    Ok(Loaded {
        region,
        index,
        historical,
        restored_live,
        live_problems,
        artifact_stamp,
        at: now,
    })
}

/// Counts and logs a refused state file.
fn refused(name: &str, file: &'static str, error: &dyn std::fmt::Display) {
    tracing::warn!(region = %name, file, error = %error, "saved state file refused");
    metrics::counter!(m::STATE_FILES_REFUSED, "region" => name.to_string(), "file" => file)
        .increment(1);
}

/// Applies the rule in the module docs.
pub(super) fn choose_historical(
    cfg: &RegionConfig,
    index: &EdgeIndex,
    v: &ValidationConfig,
    name: &str,
) -> TableChoice {
    let mut out = TableChoice::default();
    let saved_path = historical_state_path(cfg);
    let saved = match open_historical(&saved_path) {
        Ok(s) => s,
        Err(e) => {
            refused(name, "historical", &e);
            out.problems.push(HistoricalNote::Saved(e));
            None
        }
    };
    let configured = cfg.historical.as_ref().map(|p| {
        let t = std::fs::metadata(p)
            .and_then(|m| m.modified())
            .unwrap_or(SystemTime::UNIX_EPOCH);
        (p.clone(), t)
    });
    let upload_first = match (&saved, &configured) {
        (Some(s), Some((_, t))) => s.saved_at >= *t,
        (Some(_), None) => true,
        _ => false,
    };
    let try_upload = |out: &mut TableChoice| -> bool {
        let Some(s) = &saved else { return false };
        match HistoricalProfile::parse(&s.csv, index, v) {
            Ok((profile, _)) => {
                out.table = Some(Chosen {
                    profile,
                    source: TableSource::Upload(saved_path.clone()),
                    at: s.saved_at.into(),
                });
                true
            }
            Err(source) => {
                let e = crate::speeds::PersistError::Invalid {
                    path: saved_path.clone(),
                    cause: source,
                };
                refused(name, "historical", &e);
                out.problems.push(HistoricalNote::Saved(e));
                false
            }
        }
    };
    let try_configured = |out: &mut TableChoice| -> bool {
        let Some((path, t)) = &configured else {
            return false;
        };
        match read_table(path, index, v) {
            Ok(profile) => {
                out.table = Some(Chosen {
                    profile,
                    source: TableSource::Configured(path.clone()),
                    at: (*t).into(),
                });
                true
            }
            Err(e) => {
                tracing::warn!(region = %name, error = %e, "configured historical table not loaded");
                out.problems.push(HistoricalNote::Configured(e));
                false
            }
        }
    };
    let order: [&dyn Fn(&mut TableChoice) -> bool; 2] = if upload_first {
        [&try_upload, &try_configured]
    } else {
        [&try_configured, &try_upload]
    };
    for candidate in order {
        if candidate(&mut out) {
            break;
        }
    }
    out
}

/// The saved live layer for `index`'s graph with the logged batches
/// replayed over it, if there is anything to restore.
fn restore_live(
    cfg: &RegionConfig,
    index: &EdgeIndex,
    now: DateTime<Utc>,
    v: &ValidationConfig,
    name: &str,
    problems: &mut Vec<String>,
) -> Option<LiveLayer> {
    let mut layer = match load_live(&live_state_path(cfg), index, now, v) {
        Ok(Some((layer, _))) => Some(layer),
        Ok(None) => None,
        Err(e) => {
            refused(name, "live", &e);
            problems.push(format!("saved live layer refused: {e}"));
            None
        }
    };
    let log = match wal::replay(&live_wal_path(cfg)) {
        Ok(r) => r,
        Err(e) => {
            refused(name, "wal", &e);
            problems.push(format!("live write-ahead log refused: {e}"));
            return layer;
        }
    };
    if let Some((why, bytes)) = &log.torn {
        // A crash while a batch was being logged: that batch was never
        // acknowledged, so nothing acknowledged is lost.
        tracing::warn!(region = %name, reason = %why, bytes, "live write-ahead log: torn last record ignored");
        metrics::counter!(m::STATE_FILES_REFUSED, "region" => name.to_string(), "file" => "wal")
            .increment(1);
    }
    let replayed = log.records.len();
    for r in log.records {
        let l = layer.get_or_insert_with(|| LiveLayer::new(index.num_edges()));
        let applied = match r.kind {
            BatchKind::Json => l.apply_json(index, &r.body, now, v),
            BatchKind::Csv => l.apply_csv(index, &r.body, now, v),
            BatchKind::Compact => Batch::decode(r.body)
                .map_err(SpeedsError::Json)
                .and_then(|b| l.apply_batch(index, &b, now, v)),
        };
        if let Err(e) = applied {
            tracing::warn!(region = %name, error = %e, "logged live batch no longer applies");
        }
    }
    if replayed > 0 {
        tracing::info!(region = %name, batches = replayed, "live batches replayed from the write-ahead log");
    }
    layer
}

fn read_table(
    path: &Path,
    index: &EdgeIndex,
    v: &ValidationConfig,
) -> Result<HistoricalProfile, TableReadError> {
    let bytes = std::fs::read(path).map_err(|source| TableReadError::Read {
        path: path.to_path_buf(),
        cause: source,
    })?;
    HistoricalProfile::parse(&bytes, index, v)
        .map(|(p, _)| p)
        .map_err(|source| TableReadError::Parse {
            path: path.to_path_buf(),
            cause: source,
        })
}
