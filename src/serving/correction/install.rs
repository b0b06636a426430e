//! The correction model's update path: the model a region starts with and
//! a model uploaded while it serves. The one writer of a region's
//! [`ModelSlot`]; the region's updater owns it.
//!
//! # Which model serves
//!
//! An accepted upload is saved as `correction.model` in the region's
//! `state_dir` before it serves, so it survives a restart. At start the
//! saved file serves if it decodes; otherwise the configured `model` file
//! (if any). A file that fails its checks ([`crate::correction::file`])
//! never serves: the model before it keeps serving (or none), and the
//! reason is kept in the region's model slot and logged.

use super::{file, CorrectionModel, ModelFileError, ModelSlot};
use crate::speeds::persist::write_atomic;
use std::path::PathBuf;
use std::sync::Arc;

/// Why an uploaded model did not serve.
#[derive(Debug, thiserror::Error)]
pub enum ModelUpdateError {
    /// The file was refused; nothing changed.
    #[error(transparent)]
    Refused(#[from] ModelFileError),
    /// The file was good but could not be saved; nothing changed.
    #[error("saving the model to {path}: {source}")]
    Save {
        path: String,
        source: std::io::Error,
    },
}

/// Installs a region's models: at start, and on upload.
#[derive(Debug)]
pub struct ModelUpdater {
    /// The region's name (for the log).
    name: String,
    /// Where an accepted upload is saved (`state_dir/correction.model`).
    state_dir: PathBuf,
    /// The region's configured `model` file, served when no upload is saved.
    configured: Option<PathBuf>,
    /// The slot answers read.
    slot: Arc<ModelSlot>,
}

impl ModelUpdater {
    /// The update path of `slot`, for the region `name`.
    pub fn new(
        name: String,
        state_dir: PathBuf,
        configured: Option<PathBuf>,
        slot: Arc<ModelSlot>,
    ) -> Self {
        ModelUpdater {
            name,
            state_dir,
            configured,
            slot,
        }
    }

    /// Where an accepted model upload is kept.
    pub fn model_state_path(&self) -> PathBuf {
        self.state_dir.join("correction.model")
    }

    /// Installs the model the region starts with (the rule in the module
    /// docs). Never fails: without a usable model the region serves
    /// uncorrected answers.
    pub fn load_at_start(&self) {
        let saved = self.model_state_path();
        if saved.exists() {
            match file::read(&saved) {
                Ok(m) => return self.install_model(m, &saved.display().to_string()),
                Err(e) => self.refuse_model(&saved.display().to_string(), &e),
            }
        }
        if let Some(path) = &self.configured {
            match file::read(path) {
                Ok(m) => self.install_model(m, &path.display().to_string()),
                Err(e) => self.refuse_model(&path.display().to_string(), &e),
            }
        }
    }

    fn install_model(&self, m: CorrectionModel, from: &str) {
        tracing::info!(
            region = %self.name,
            model_version = m.meta.model_version,
            trees = m.forest.roots.len(),
            source = from,
            "correction model serving"
        );
        self.slot.install(m);
    }

    fn refuse_model(&self, from: &str, e: &ModelFileError) {
        tracing::warn!(region = %self.name, source = from, error = %e, "correction model refused");
        self.slot.refuse(format!("{from}: {e}"));
    }

    /// Checks, saves and serves an uploaded model file; returns the model
    /// now serving. A refused or unsaved file changes nothing.
    pub async fn put_model(
        self: &Arc<Self>,
        bytes: Vec<u8>,
    ) -> Result<Arc<CorrectionModel>, ModelUpdateError> {
        let h = self.clone();
        tokio::task::spawn_blocking(move || {
            let _one_at_a_time = h.slot.writer();
            let m = match file::decode(&bytes) {
                Ok(m) => m,
                Err(e) => {
                    h.refuse_model("upload", &e);
                    return Err(ModelUpdateError::Refused(e));
                }
            };
            let path = h.model_state_path();
            std::fs::create_dir_all(&h.state_dir)
                .and_then(|_| write_atomic(&path, &bytes))
                .map_err(|source| ModelUpdateError::Save {
                    path: path.display().to_string(),
                    source,
                })?;
            h.install_model(m, "upload");
            Ok(h.slot.current().expect("just installed"))
        })
        .await
        .expect("the model upload task does not panic")
    }
}
