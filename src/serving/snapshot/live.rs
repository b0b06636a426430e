//! The live tier's blend: the held live layer blended over the current
//! hour's historical speeds, customized and published (the updater's
//! methods the live loop and a reload call; the loop itself is
//! `live_loop`).
//!
//! Blending, saving and all file work run off the request workers: blends
//! and saves on the `updates` thread, customizations on the customizer
//! thread, the watched folder's `std::fs` calls on tokio's blocking pool.
//!
//! A blend labels each edge live (fresh observation), else as the bucket it
//! blends into ([`crate::speeds::sources`]); the live metric
//! carries those classes so answers report how much of their time is live.

use super::load::{live_state_path, live_wal_path};
use super::{age_s, LiveMetric, RegionUpdater, Snapshot};
use crate::metrics as m;
use crate::speeds::{
    blend_into, save_live, sources, BlendStats, EdgeIndex, HistoricalProfile, LiveLayer,
    SpeedsError,
};
use chrono::{DateTime, Utc};
use hodos_engine::region::{Metric, Region};
use std::path::Path;
use std::sync::atomic::Ordering;
use std::sync::Arc;
use std::time::{Duration, Instant};

/// What a live blend needs besides the layer (owned, for the customizer).
#[derive(Debug, Clone, Copy)]
struct BlendParams {
    ttl: Duration,
    half_life: Duration,
    tz: chrono_tz::Tz,
}

/// Blended speeds and their source classes per edge, the blend's
/// statistics and the newest observation it used.
pub(super) type Blended = (Speeds, BlendStats, Option<DateTime<Utc>>);

/// One speed (km/h) and one source class per edge.
pub(super) type Speeds = (Vec<f32>, Vec<u8>);

/// The parts of a snapshot a live blend reads (owned, for the updates
/// thread).
struct BlendBase {
    historical: Option<Arc<HistoricalProfile>>,
    free_flow_kmh: Arc<Vec<f32>>,
    index: Arc<EdgeIndex>,
}

/// Expires old observations and blends the layer over the current hour's
/// historical speeds of `snap`.
fn blend_layer(
    snap: &BlendBase,
    layer: &mut LiveLayer,
    now: DateTime<Utc>,
    p: BlendParams,
) -> Result<Blended, SpeedsError> {
    layer.expire(now, p.ttl);
    let newest = layer.newest_observed_at();
    let hour = crate::speeds::hour_of_week(now, p.tz);
    let base = match &snap.historical {
        Some(h) => h.speeds_for_hour(&snap.free_flow_kmh, hour),
        None => snap.free_flow_kmh.to_vec(),
    };
    let base_classes = sources::hour_classes(snap.historical.as_deref(), base.len(), hour);
    let mut blended = Vec::new();
    let stats = blend_into(&base, layer, now, p.half_life, p.ttl, &mut blended)?;
    let classes = sources::live_classes(&base_classes, layer, now, p.ttl);
    Ok(((blended, classes), stats, newest))
}

/// Saves `layer` to `path` (creating its folder), then empties the
/// write-ahead log at `log`: every batch in it is in the saved layer (the
/// caller holds the writer lock, so no batch is logged meanwhile). Whether
/// the save worked.
fn save_layer(path: &Path, log: &Path, layer: &LiveLayer, index: &EdgeIndex, name: &str) -> bool {
    if let Some(dir) = path.parent() {
        let _ = std::fs::create_dir_all(dir);
    }
    match save_live(path, layer, index) {
        Ok(()) => {
            if let Err(e) = crate::speeds::wal::clear(log) {
                // Harmless: the logged batches are replayed over the saved
                // layer again, and newest per edge wins.
                tracing::warn!(region = %name, error = %e, "live write-ahead log not emptied");
            }
            true
        }
        Err(e) => {
            tracing::warn!(region = %name, error = %e, "live layer not saved");
            false
        }
    }
}

impl RegionUpdater {
    fn blend_params(&self) -> BlendParams {
        BlendParams {
            ttl: Duration::from_secs_f64(self.settings.live.ttl_s),
            half_life: Duration::from_secs_f64(self.settings.live.half_life_s),
            tz: self.tz,
        }
    }

    /// Blends `layer` over `snap` on the updates thread (the layer is
    /// moved there and back), so request workers never do it. `save`
    /// writes the layer to the state directory first.
    pub(super) async fn blend_off_worker(
        &self,
        snap: &Snapshot,
        layer: LiveLayer,
        now: DateTime<Utc>,
        save: bool,
    ) -> (LiveLayer, Option<Blended>, Option<bool>) {
        let base = BlendBase {
            historical: snap.historical.clone(),
            free_flow_kmh: snap.free_flow_kmh.clone(),
            index: snap.index.clone(),
        };
        let (params, name) = (self.blend_params(), self.name.clone());
        let path = live_state_path(&self.cfg);
        let log = live_wal_path(&self.cfg);
        let back = self
            .settings
            .updates
            .run(move || {
                let mut layer = layer;
                let saved = save.then(|| save_layer(&path, &log, &layer, &base.index, &name));
                let blended = match blend_layer(&base, &mut layer, now, params) {
                    Ok(b) => Some(b),
                    Err(e) => {
                        tracing::error!(region = %name, error = %e, "live blend failed");
                        None
                    }
                };
                (layer, blended, saved)
            })
            .await;
        match back {
            Some(x) => x,
            // The job panicked: the layer is lost with it; start empty
            // rather than serve a half-applied one.
            None => (LiveLayer::new(snap.index.num_edges()), None, None),
        }
    }

    /// Customizes blended speeds (with their source classes) on `region`
    /// on the customizer thread; `None` if the job panicked.
    pub(super) async fn customize_live(
        &self,
        region: Arc<Region>,
        (blended, classes): Speeds,
    ) -> Option<Metric> {
        self.settings
            .customizer
            .run(move || {
                let weights = hodos_engine::metric::from_speeds(&region.graph, &blended);
                region.metric_with_classes(weights, classes)
            })
            .await
    }

    /// Whether a refresh is due: observations arrived (`dirty`), the held
    /// blend is getting old, or `force`; never for a held blend with
    /// nothing fresh to decay unless something arrived.
    fn refresh_due(&self, snap: &Snapshot, dirty: bool, force: bool) -> bool {
        let interval = Duration::from_millis(self.settings.live.recustomize_ms);
        let aging = snap
            .live
            .as_ref()
            .map(|l| (Utc::now() - l.built_at).to_std().unwrap_or_default() > interval * 20)
            .unwrap_or(false);
        if !(dirty || aging || force) {
            return false;
        }
        // Nothing arrived and the held blend has nothing fresh to decay: a
        // new blend would equal it (a stale feed must not cost a
        // customization every few seconds).
        let held_stale = snap
            .live
            .as_ref()
            .map(|l| !l.stats.any_fresh)
            .unwrap_or(false);
        dirty || force || !held_stale
    }

    /// Re-blends and re-customizes the live metric if observations arrived
    /// (or the held blend is getting old), and publishes it. Returns whether
    /// a new snapshot was published.
    pub async fn refresh_live(&self, force: bool) -> bool {
        let dirty = self.live_dirty.swap(false, Ordering::SeqCst);
        let Some(snap) = self.snapshot() else {
            return false;
        };
        if !self.refresh_due(&snap, dirty, force) {
            return false;
        }
        let Some(((blended, stats, newest), now)) = self.blend_held_layer(&snap).await else {
            return false;
        };
        // Customize without holding the writer lock: uploads need not wait.
        let t = Instant::now();
        let Some(metric) = self.customize_live(snap.region.clone(), blended).await else {
            return false;
        };
        metrics::histogram!(m::CUSTOMIZATION, "region" => self.name.clone(), "kind" => "live")
            .record(t.elapsed().as_secs_f64());
        let live = Arc::new(LiveMetric {
            metric,
            stats,
            newest_observed_at: newest,
            built_at: now,
        });
        self.publish_live(&snap, live)
    }

    /// Blends the writer's live layer over `snap` (saving it now and then
    /// so a restart brings it back), under the writer lock. Returns the
    /// blend and the time it was made for.
    async fn blend_held_layer(&self, snap: &Snapshot) -> Option<(Blended, DateTime<Utc>)> {
        let mut guard = self.writer.lock().await;
        let layer = guard.live.take()?;
        let now = Utc::now();
        // Save the layer now and then so a restart brings it back.
        let save = guard.live_changed
            && guard
                .live_saved_at
                .map(|t| t.elapsed() > Duration::from_secs(2))
                .unwrap_or(true);
        let (layer, blended, saved) = self.blend_off_worker(snap, layer, now, save).await;
        guard.live = Some(layer);
        if saved == Some(true) {
            guard.live_saved_at = Some(Instant::now());
            guard.live_changed = false;
            // The saved layer replaced whatever the last load refused.
            if !self.recorded_status().live_problems.is_empty() {
                self.set_status(|s| s.live_problems.clear());
            }
        }
        blended.map(|b| (b, now))
    }

    /// Publishes `live` on top of whatever is current now (a table may
    /// have landed meanwhile: it marks the live layer dirty, so the next
    /// round blends over it). If the artifact was reloaded since `snap`,
    /// the blend belongs to the old graph: nothing is published and the
    /// next round blends again over the new one.
    fn publish_live(&self, snap: &Arc<Snapshot>, live: Arc<LiveMetric>) -> bool {
        let cur = self.snapshot().unwrap_or(snap.clone());
        if !Arc::ptr_eq(&cur.region, &snap.region) {
            self.live_dirty.store(true, Ordering::SeqCst);
            self.wake.notify_one();
            return false;
        }
        let newest = live.newest_observed_at;
        self.publish(|g| Snapshot {
            generation: g,
            region: cur.region.clone(),
            index: cur.index.clone(),
            free_flow_kmh: cur.free_flow_kmh.clone(),
            historical: cur.historical.clone(),
            historical_at: cur.historical_at,
            profiles: cur.profiles.clone(),
            historical_source: cur.historical_source.clone(),
            live: Some(live),
            artifact_load: cur.artifact_load,
            artifact_at: cur.artifact_at,
            artifact_stamp: cur.artifact_stamp,
        });
        if let Some(n) = newest {
            metrics::gauge!(m::LIVE_AGE, "region" => self.name.clone()).set(age_s(Utc::now(), n));
        }
        true
    }
}
