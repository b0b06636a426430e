//! The learned correction: a model per region that turns the graph time
//! of an answer (any tier, the estimate included) into a calibrated ETA
//! with an interval, hot-swapped like the speed tables.
//!
//! The trees are fitted offline (`hodos train`, in `hodos-learn`)
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
//! - `slot`: [`ModelSlot`], a region's current model, read by answers
//!   (its writes are this module's alone);
//! - `install`: [`ModelUpdater`], the model's update path (the model a
//!   region starts with, an upload: checked, saved, then swapped in);
//! - this file: [`correct`].
//!
//! **Architecture Invariant:** nothing here knows HTTP or metrics, and the
//! engine knows nothing of corrections: an answer is computed first and
//! corrected after.

pub mod features;
pub mod file;
mod install;
pub mod model;
mod slot;

pub use features::{features, Features, Query};
pub use file::ModelFileError;
pub use install::{ModelUpdateError, ModelUpdater};
pub use model::{Corrected, CorrectionModel};
pub use slot::ModelSlot;

/// Corrects the answer described by `q` with `m`.
#[inline]
pub fn correct(m: &CorrectionModel, q: &Query) -> Corrected {
    m.apply(q.graph_s, &features(q))
}
