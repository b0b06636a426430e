//! The learned correction: a model per region that turns the graph time
//! of an answer (any tier, the estimate included) into a calibrated ETA
//! with an interval, hot-swapped like the speed tables.
//!
//! The trees are fitted offline (`hodos train`, [`hodos_truth::train`])
//! on completed trips; here they only predict. Applying a model costs one
//! feature vector on the stack and a walk down each tree: nothing is
//! allocated per answer.
//!
//! # Layout
//!
//! - `features`: the feature vector of an answer ([`features::NAMES`]);
//! - `model`: [`CorrectionModel`] (trees, conformal interval, metadata)
//!   and [`Corrected`];
//! - `file`: the model file format, with its checks;
//! - this file: [`ModelSlot`], a region's current model, and [`correct`].
//!
//! **Architecture Invariant:** nothing here knows HTTP or metrics, and the
//! engine knows nothing of corrections: an answer is computed first and
//! corrected after.

pub mod features;
pub mod file;
pub mod model;

pub use features::{features, Features, Query};
pub use file::ModelFileError;
pub use model::{Corrected, CorrectionModel};

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
    pub fn writer(&self) -> std::sync::MutexGuard<'_, ()> {
        self.write.lock().unwrap_or_else(|p| p.into_inner())
    }

    /// Serves `m` from now on (its trees laid out first, off the answer
    /// path).
    pub fn install(&self, m: CorrectionModel) {
        let _ = m.compile();
        self.current.store(Some(Arc::new(m)));
        self.refused.store(None);
    }

    /// Records why a model was refused; the current one keeps serving.
    pub fn refuse(&self, why: String) {
        self.refused.store(Some(Arc::new(why)));
    }

    /// Why the last offered model was refused, if it was.
    pub fn refused(&self) -> Option<String> {
        self.refused.load_full().map(|s| (*s).clone())
    }
}

/// Corrects the answer described by `q` with `m`.
#[inline]
pub fn correct(m: &CorrectionModel, q: &Query) -> Corrected {
    m.apply(q.graph_s, &features(q))
}
