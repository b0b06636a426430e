//! The read side of a region: what an answer sees. The published
//! [`Snapshot`], the region's status, its correction model, and nothing
//! that writes: every write (publish, status, degraded reason) is
//! `pub(super)`, so only the update paths of this module
//! ([`super::RegionUpdater`], the live blend) can make one, and answer
//! code, which holds only a `RegionReader`, cannot reach a write.

use super::error::LoadError;
use super::{age_s, ProfilesStatus, RegionStatus, Snapshot};
use crate::correction::ModelSlot;
use crate::settings::RegionConfig;
use arc_swap::{ArcSwap, ArcSwapOption};
use chrono::Utc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

/// One configured region for the life of the process, as answers read it.
pub struct RegionReader {
    pub name: String,
    pub cfg: RegionConfig,
    pub tz: chrono_tz::Tz,
    /// The serving snapshot; `None` while loading or degraded.
    current: ArcSwapOption<Snapshot>,
    /// What the last update of each kind did (the snapshot's own figures
    /// are filled in by [`Self::status`]).
    status: ArcSwap<RegionStatus>,
    /// Why the region serves no graph (typed; the status shows its text).
    degraded: ArcSwapOption<LoadError>,
    /// Set once the first load finished (served or degraded).
    loaded: AtomicBool,
    /// The correction model this region's answers go through (none until
    /// one is configured or uploaded). Independent of snapshots: a new
    /// table or artifact keeps the model, a new model keeps the snapshot.
    pub correction: Arc<ModelSlot>,
}

impl std::fmt::Debug for RegionReader {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RegionReader")
            .field("name", &self.name)
            .finish()
    }
}

impl RegionReader {
    /// A region with nothing loaded: it reports itself loading (and
    /// answers come from the heuristic tier) until its first load ends.
    pub(super) fn new(cfg: RegionConfig) -> Self {
        let tz = cfg.time_zone.parse().unwrap_or(chrono_tz::UTC);
        RegionReader {
            name: cfg.name.clone(),
            cfg,
            tz,
            current: ArcSwapOption::empty(),
            status: ArcSwap::from_pointee(RegionStatus::default()),
            degraded: ArcSwapOption::empty(),
            loaded: AtomicBool::new(false),
            correction: Arc::default(),
        }
    }

    /// Whether the first load has finished.
    pub fn loaded(&self) -> bool {
        self.loaded.load(Ordering::SeqCst)
    }

    /// The serving snapshot, or `None` while degraded.
    pub fn snapshot(&self) -> Option<Arc<Snapshot>> {
        self.current.load_full()
    }

    /// Why the region serves no graph, once a load has failed.
    pub fn degraded(&self) -> Option<Arc<LoadError>> {
        self.degraded.load_full()
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

    /// The status as last recorded, without the snapshot's figures.
    pub(super) fn recorded_status(&self) -> Arc<RegionStatus> {
        self.status.load_full()
    }

    pub(super) fn set_status(&self, f: impl FnOnce(&mut RegionStatus)) {
        let mut s = (**self.status.load()).clone();
        f(&mut s);
        self.status.store(Arc::new(s));
    }

    /// Swaps in `snap`; returns the one it replaced.
    pub(super) fn swap(&self, snap: Arc<Snapshot>) -> Option<Arc<Snapshot>> {
        self.current.swap(Some(snap))
    }

    pub(super) fn set_degraded(&self, e: Option<Arc<LoadError>>) {
        self.degraded.store(e);
    }

    pub(super) fn set_loaded(&self) {
        self.loaded.store(true, Ordering::SeqCst);
    }
}
