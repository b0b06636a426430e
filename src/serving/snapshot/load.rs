//! The file work of a (re)load: the artifact, the historical table (saved
//! state first, then the configured file) and the saved live layer. All of
//! it is plain `std::fs` and runs on tokio's blocking pool (see
//! [`super::RegionHandle::reload`]), never on a request worker.

use super::error::{HistoricalNote, LoadError, TableReadError};
use super::UpdateSettings;
use crate::engine::artifact::Artifact;
use crate::engine::region::Region;
use crate::serving::settings::RegionConfig;
use crate::serving::speeds::{
    load_historical, load_live, EdgeIndex, HistoricalProfile, LiveLayer, ValidationConfig,
};
use chrono::{DateTime, Utc};
use std::path::{Path, PathBuf};

pub(super) fn historical_state_path(cfg: &RegionConfig) -> PathBuf {
    cfg.state_dir.join("historical.table")
}

pub(super) fn live_state_path(cfg: &RegionConfig) -> PathBuf {
    cfg.state_dir.join("live.table")
}

/// A loaded region, before it becomes a snapshot.
pub(super) struct Loaded {
    pub region: Region,
    pub index: EdgeIndex,
    pub historical: Option<HistoricalProfile>,
    /// Why no historical table is served, when one was expected.
    pub note: Option<HistoricalNote>,
    /// The saved live layer, when the caller asked for it (`None` inside
    /// means none was saved or it could not be restored).
    pub restored_live: Option<Option<LiveLayer>>,
    /// When the load finished (the snapshot's `artifact_at`).
    pub at: DateTime<Utc>,
}

/// Loads a region's artifact and its historical table (saved state first,
/// then the configured file). A bad historical table does not fail the
/// load: the region serves free-flow for the historical tier and the note
/// says why. The saved live layer is read too unless the writer holds one
/// of `held_live_edges` edges, the size of the new graph.
pub(super) fn load_region(
    cfg: &RegionConfig,
    settings: &UpdateSettings,
    held_live_edges: Option<usize>,
    name: &str,
) -> Result<Loaded, LoadError> {
    let art = Artifact::load(&cfg.artifact)?;
    let region = Region::from_artifact(art);
    let index = EdgeIndex::new(&region.graph);
    let (historical, note) = load_historical_table(cfg, &index, &settings.validation);
    let now = Utc::now();
    let restored_live = (held_live_edges != Some(index.num_edges()))
        .then(|| restore_live(cfg, &index, now, &settings.validation, name));
    Ok(Loaded {
        region,
        index,
        historical,
        note,
        restored_live,
        at: now,
    })
}

/// The saved historical table, else the configured one, else none.
fn load_historical_table(
    cfg: &RegionConfig,
    index: &EdgeIndex,
    v: &ValidationConfig,
) -> (Option<HistoricalProfile>, Option<HistoricalNote>) {
    match load_historical(&historical_state_path(cfg), index, v) {
        Ok(Some((p, _))) => (Some(p), None),
        Ok(None) => match &cfg.historical {
            Some(path) => match read_table(path, index, v) {
                Ok(p) => (Some(p), None),
                Err(e) => (None, Some(HistoricalNote::Configured(e))),
            },
            None => (None, None),
        },
        Err(e) => (None, Some(HistoricalNote::Saved(e))),
    }
}

/// The saved live layer for `index`'s graph, if there is a usable one.
fn restore_live(
    cfg: &RegionConfig,
    index: &EdgeIndex,
    now: DateTime<Utc>,
    v: &ValidationConfig,
    name: &str,
) -> Option<LiveLayer> {
    match load_live(&live_state_path(cfg), index, now, v) {
        Ok(Some((layer, _))) => Some(layer),
        Ok(None) => None,
        Err(e) => {
            tracing::warn!(region = %name, error = %e, "saved live layer not restored");
            None
        }
    }
}

fn read_table(
    path: &Path,
    index: &EdgeIndex,
    v: &ValidationConfig,
) -> Result<HistoricalProfile, TableReadError> {
    let bytes = std::fs::read(path).map_err(|source| TableReadError::Read {
        path: path.to_path_buf(),
        source,
    })?;
    HistoricalProfile::parse(&bytes, index, v)
        .map(|(p, _)| p)
        .map_err(|source| TableReadError::Parse {
            path: path.to_path_buf(),
            source,
        })
}
