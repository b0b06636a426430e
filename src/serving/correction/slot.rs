//! A region's current correction model behind `arc-swap`: answers read it
//! without a lock; only this module's update path ([`super::ModelUpdater`])
//! can install or refuse a model, so answer code cannot reach a write.

use super::CorrectionModel;
use arc_swap::ArcSwapOption;
use std::sync::Arc;

/// The model a region serves, swapped without a lock readers wait on.
#[derive(Debug, Default)]
pub struct ModelSlot {
    current: ArcSwapOption<CorrectionModel>,
    /// Why the last model offered to this region was refused (cleared by
    /// the next accepted one).
    refused: ArcSwapOption<String>,
    /// Serializes uploads (save, then install) so the saved file and the
    /// serving model agree; readers never take it.
    write: std::sync::Mutex<()>,
}

impl ModelSlot {
    /// The model serving now, if any.
    pub fn current(&self) -> Option<Arc<CorrectionModel>> {
        self.current.load_full()
    }

    /// A guard on the current model, for the answer path (no reference
    /// count traffic on the common path).
    pub fn guard(&self) -> arc_swap::Guard<Option<Arc<CorrectionModel>>> {
        self.current.load()
    }

    /// Held by an update while it saves and installs a model.
    pub(super) fn writer(&self) -> std::sync::MutexGuard<'_, ()> {
        self.write.lock().unwrap_or_else(|p| p.into_inner())
    }

    /// Serves `m` from now on (its trees laid out first, off the answer
    /// path).
    pub(super) fn install(&self, m: CorrectionModel) {
        let _ = m.compile();
        self.current.store(Some(Arc::new(m)));
        self.refused.store(None);
    }

    /// Records why a model was refused; the current one keeps serving.
    pub(super) fn refuse(&self, why: String) {
        self.refused.store(Some(Arc::new(why)));
    }

    /// Why the last offered model was refused, if it was.
    pub fn refused(&self) -> Option<String> {
        self.refused.load_full().map(|s| (*s).clone())
    }
}
