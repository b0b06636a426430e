//! The three update paths: an artifact reload, a historical table upload
//! and a batch of live observations. Each takes the writer lock, does its
//! heavy work off the request workers (the load on tokio's blocking pool,
//! parsing/applying/saving on the `updates` thread, customization on the
//! customizer thread), then publishes a new snapshot or records why not.

use super::error::{Degraded, LoadError, UpdateError, UpdateFailure};
use super::load::{historical_state_path, load_region, Loaded};
use super::{LiveMetric, RegionHandle, ReloadOutcome, Snapshot, Writer};
use crate::serving::metrics as m;
use crate::serving::speeds::{
    save_historical, HistoricalProfile, LiveLayer, SpeedsError, TableReport,
};
use chrono::{DateTime, Utc};
use std::sync::atomic::Ordering;
use std::sync::Arc;

impl RegionHandle {
    /// Reloads the artifact and the historical table (saved state first,
    /// else the configured file). On failure the serving snapshot, if any,
    /// stays as it was.
    pub async fn reload(self: &Arc<Self>) -> Result<(), UpdateError> {
        let mut w = self.writer.lock().await;
        let loaded = match self.load_off_worker(&w).await? {
            Ok(x) => x,
            Err(e) => return Err(self.load_failed(Arc::new(e))),
        };
        let load_no = self.loads.fetch_add(1, Ordering::SeqCst) + 1;
        let Loaded {
            region,
            index,
            historical,
            note,
            restored_live,
            at: now,
        } = loaded;
        // Live layer: keep the one held if the graph is the same size, else
        // bring back the saved one (read by the load).
        if let Some(restored) = restored_live {
            w.live = restored;
        }
        let free_flow = Arc::new(region.graph.edge_speed_kmh.clone());
        let region = Arc::new(region);
        let historical = historical.map(Arc::new);
        // Every profile is customized before the first swap: no departure
        // hour of the new snapshot meets a cold metric.
        let profiles = self
            .customize_profiles(&region, &free_flow, historical.as_ref())
            .await?;
        let mut fresh = Snapshot {
            generation: 0,
            region,
            index: Arc::new(index),
            free_flow_kmh: free_flow,
            historical_at: historical.as_ref().map(|_| now),
            historical,
            profiles,
            live: None,
            artifact_load: load_no,
            artifact_at: now,
        };
        fresh.live = self.live_for_new_graph(&mut w, &fresh, now).await;
        self.publish(|g| Snapshot {
            generation: g,
            ..fresh
        });
        self.degraded.store(None);
        self.set_status(|s| s.degraded_reason = None);
        self.record(ReloadOutcome {
            table: "artifact",
            outcome: "accepted",
            at: now,
            error: note.map(|n| n.to_string()),
            report: None,
        });
        if w.live.is_some() {
            self.mark_live_dirty();
        }
        drop(w);
        Ok(())
    }

    /// Runs the file work of a reload on tokio's blocking pool.
    async fn load_off_worker(&self, w: &Writer) -> Result<Result<Loaded, LoadError>, UpdateError> {
        let cfg = self.cfg.clone();
        let settings = self.settings.clone();
        let name = self.name.clone();
        let held = w.live.as_ref().map(|l| l.num_edges());
        tokio::task::spawn_blocking(move || load_region(&cfg, &settings, held, &name))
            .await
            .map_err(|e| UpdateError::Failed(UpdateFailure::LoadTask(e)))
    }

    /// Records a failed load; a region with no snapshot becomes degraded
    /// with this reason.
    fn load_failed(&self, e: Arc<LoadError>) -> UpdateError {
        let degraded = self.snapshot().is_none();
        let msg = e.to_string();
        self.record(ReloadOutcome {
            table: "artifact",
            outcome: "failed",
            at: Utc::now(),
            error: Some(msg.clone()),
            report: None,
        });
        if degraded {
            self.degraded.store(Some(e.clone()));
            self.set_status(|s| s.degraded_reason = Some(msg));
            metrics::gauge!(m::REGION_READY, "region" => self.name.clone()).set(0.0);
        }
        UpdateError::Failed(UpdateFailure::Load(e))
    }

    /// Serves the live blend from the first moment: blends the held layer
    /// over the new graph and customizes it before the swap, so no answer
    /// falls back meanwhile.
    async fn live_for_new_graph(
        &self,
        w: &mut Writer,
        fresh: &Snapshot,
        now: DateTime<Utc>,
    ) -> Option<Arc<LiveMetric>> {
        let layer = w.live.take()?;
        let (layer, blended, _) = self.blend_off_worker(fresh, layer, now, false).await;
        w.live = Some(layer);
        let (blended, stats, newest) = blended?;
        let metric = self.customize_live(fresh.region.clone(), blended).await?;
        Some(Arc::new(LiveMetric {
            metric,
            stats,
            newest_observed_at: newest,
            built_at: now,
        }))
    }

    /// The serving snapshot, or why there is none.
    fn current_or_unavailable(&self) -> Result<Arc<Snapshot>, UpdateError> {
        self.snapshot()
            .ok_or_else(|| UpdateError::Unavailable(Degraded(self.degraded.load_full())))
    }

    /// Observations arrived or their base changed: the live loop re-blends.
    fn mark_live_dirty(&self) {
        self.live_dirty.store(true, Ordering::SeqCst);
        self.wake.notify_one();
    }

    /// Records a rejected table and returns the error for the caller.
    fn rejected(&self, table: &'static str, at: DateTime<Utc>, e: SpeedsError) -> UpdateError {
        self.record(ReloadOutcome {
            table,
            outcome: "rejected",
            at,
            error: Some(e.to_string()),
            report: e.report().cloned(),
        });
        UpdateError::Rejected(e)
    }

    /// Validates a historical table; if accepted, saves it and serves it.
    pub async fn put_historical(
        self: &Arc<Self>,
        csv: Vec<u8>,
    ) -> Result<TableReport, UpdateError> {
        let w = self.writer.lock().await;
        let snap = self.current_or_unavailable()?;
        let (profile, report) = match self.parse_and_save_historical(&snap, csv).await? {
            Ok(x) => x,
            Err(e) => return Err(self.rejected("historical", Utc::now(), e)),
        };
        let now = Utc::now();
        let profile = Arc::new(profile);
        // The old table's profiles keep answering until all of the new
        // table's are customized; only then does the swap happen.
        let profiles = self
            .customize_profiles(&snap.region, &snap.free_flow_kmh, Some(&profile))
            .await?;
        self.publish(|g| Snapshot {
            generation: g,
            region: snap.region.clone(),
            index: snap.index.clone(),
            free_flow_kmh: snap.free_flow_kmh.clone(),
            historical: Some(profile),
            historical_at: Some(now),
            profiles,
            live: snap.live.clone(),
            artifact_load: snap.artifact_load,
            artifact_at: snap.artifact_at,
        });
        self.record(ReloadOutcome {
            table: "historical",
            outcome: "accepted",
            at: now,
            error: None,
            report: Some(report.clone()),
        });
        if w.live.is_some() {
            self.mark_live_dirty();
        }
        drop(w);
        Ok(report)
    }

    /// Parses the table on the `updates` thread and, if it validates,
    /// saves it to the state directory there too. The outer error is a
    /// failure to save (or a panicked job), the inner one a rejection.
    async fn parse_and_save_historical(
        &self,
        snap: &Snapshot,
        csv: Vec<u8>,
    ) -> Result<Result<(HistoricalProfile, TableReport), SpeedsError>, UpdateError> {
        let index = snap.index.clone();
        let validation = self.settings.validation.clone();
        let path = historical_state_path(&self.cfg);
        self.settings
            .updates
            .run(move || {
                let r = HistoricalProfile::parse(&csv, &index, &validation);
                if r.is_ok() {
                    if let Some(dir) = path.parent() {
                        std::fs::create_dir_all(dir).map_err(|source| UpdateFailure::StateDir {
                            dir: dir.to_path_buf(),
                            source,
                        })?;
                    }
                    save_historical(&path, &csv).map_err(UpdateFailure::Save)?;
                }
                Ok::<_, UpdateFailure>(r)
            })
            .await
            .ok_or(UpdateError::Failed(UpdateFailure::ParseTask))?
            .map_err(UpdateError::Failed)
    }

    /// Applies a batch of live observations (JSON array or CSV).
    pub async fn put_live(&self, body: &[u8], csv: bool) -> Result<TableReport, UpdateError> {
        let mut w = self.writer.lock().await;
        let snap = self.current_or_unavailable()?;
        let layer = w
            .live
            .take()
            .unwrap_or_else(|| LiveLayer::new(snap.index.num_edges()));
        let now = Utc::now();
        let Some((layer, r)) = self.apply_batch(&snap, layer, body, csv, now).await else {
            return Err(UpdateError::Failed(UpdateFailure::LiveTask));
        };
        w.live = Some(layer);
        match r {
            Ok(report) => {
                w.live_changed = true;
                drop(w);
                self.mark_live_dirty();
                self.record(ReloadOutcome {
                    table: "live",
                    outcome: "accepted",
                    at: now,
                    error: None,
                    report: Some(report.clone()),
                });
                Ok(report)
            }
            Err(e) => Err(self.rejected("live", now, e)),
        }
    }

    /// Parses and applies a batch on the `updates` thread: a large batch is
    /// milliseconds of CPU that request workers should not spend. The
    /// layer moves there and back; `None` if the job panicked.
    async fn apply_batch(
        &self,
        snap: &Snapshot,
        mut layer: LiveLayer,
        body: &[u8],
        csv: bool,
        now: DateTime<Utc>,
    ) -> Option<(LiveLayer, Result<TableReport, SpeedsError>)> {
        let (index, validation, body) = (
            snap.index.clone(),
            self.settings.validation.clone(),
            body.to_vec(),
        );
        self.settings
            .updates
            .run(move || {
                let r = if csv {
                    layer.apply_csv(&index, &body, now, &validation)
                } else {
                    layer.apply_json(&index, &body, now, &validation)
                };
                (layer, r)
            })
            .await
    }
}
