//! The typed errors of the snapshot layer: why a region failed to load,
//! why its historical table was skipped at load, why an update did not
//! take effect. Their `Display` text is what `/admin/status`, the admin
//! API and the logs show, unchanged from when they were strings.

use crate::speeds::{PersistError, SpeedsError};
use hodos_engine::artifact::ArtifactError;
use std::path::PathBuf;
use std::sync::Arc;

/// Why a region's artifact could not be loaded (the region then serves no
/// graph: this is its degraded reason).
#[derive(Debug, thiserror::Error)]
pub enum LoadError {
    #[error(transparent)]
    Artifact(#[from] ArtifactError),
}

/// Why a region serves no graph, as far as is known: the failed load, or
/// nothing when no load has finished (shown as an empty reason).
#[derive(Debug, Clone, Default)]
pub struct Degraded(pub Option<Arc<LoadError>>);

impl std::fmt::Display for Degraded {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match &self.0 {
            Some(e) => e.fmt(f),
            None => Ok(()),
        }
    }
}

/// A historical table that could not be read from its configured path.
///
/// A `cause` is written into the message and is not a `source()`: a
/// chain printer (anyhow's `{:#}`) would otherwise print it twice.
#[derive(Debug, thiserror::Error)]
pub enum TableReadError {
    #[error("{}: {cause}", path.display())]
    Read {
        path: PathBuf,
        cause: std::io::Error,
    },
    #[error("{}: {cause}", path.display())]
    Parse { path: PathBuf, cause: SpeedsError },
}

/// Why a candidate historical table was passed over at a load (the other
/// candidate or free-flow then serves; the region's status and readiness
/// name it).
#[derive(Debug, thiserror::Error)]
pub enum HistoricalNote {
    #[error("historical table not loaded: {0}")]
    Configured(TableReadError),
    #[error("saved historical table not restored: {0}")]
    Saved(PersistError),
}

/// What went wrong inside an update that was not the data's fault.
///
/// A `cause` is written into the message and is not a `source()`: a
/// chain printer (anyhow's `{:#}`) would otherwise print it twice.
#[derive(Debug, thiserror::Error)]
pub enum UpdateFailure {
    /// The blocking load task itself failed (panicked or was cancelled).
    #[error("load task failed: {0}")]
    LoadTask(tokio::task::JoinError),
    /// The artifact did not load.
    #[error("{0}")]
    Load(Arc<LoadError>),
    /// The job parsing a historical table panicked.
    #[error("parse task failed")]
    ParseTask,
    /// A profile grouping or customization job panicked.
    #[error("profile customization task failed")]
    CustomizeTask,
    /// The job applying a live batch panicked.
    #[error("live batch task failed")]
    LiveTask,
    /// The state directory could not be created.
    #[error("{}: {cause}", dir.display())]
    StateDir { dir: PathBuf, cause: std::io::Error },
    /// An accepted table could not be saved to the state directory.
    #[error("{0}")]
    Save(PersistError),
    /// An accepted live batch could not be logged durably: it is applied
    /// but not acknowledged (the caller sees a failure and may resend).
    #[error("{0}")]
    Wal(crate::speeds::wal::WalError),
}

/// Why an update did not take effect.
#[derive(Debug, thiserror::Error)]
pub enum UpdateError {
    /// The data failed validation; the serving snapshot is unchanged.
    #[error("{0}")]
    Rejected(SpeedsError),
    /// The region has no snapshot to update.
    #[error("the region has no loaded graph: {0}")]
    Unavailable(Degraded),
    /// The update could not be carried out.
    #[error("{0}")]
    Failed(UpdateFailure),
    /// A reload found no usable historical table (every candidate was
    /// refused); the table that served keeps serving. The text names why.
    #[error("no historical table could be used: {0}")]
    TablesRejected(String),
    /// The region's graph was replaced (a reload of a new artifact) while
    /// the upload arrived: it was validated against the old graph, so
    /// nothing of it was applied or saved. Sending it again applies it.
    #[error("the region's graph was replaced while the upload arrived; nothing was applied, send it again")]
    GraphReplaced,
}
