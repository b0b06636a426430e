//! The write side of a region: [`RegionUpdater`], through which every
//! write is checked, persisted and then published on the region's
//! [`RegionReader`]. Opening a region (the first load) and the three
//! update paths: an artifact reload, a historical table upload and a batch
//! of live observations; a model upload goes to the region's
//! [`ModelUpdater`]. Each takes the writer lock, does its heavy work off
//! the request workers (the load on tokio's blocking pool,
//! parsing/applying/saving on the `updates` thread, customization on the
//! customizer thread), then publishes a new snapshot or records why not.
//!
//! A reload applies the table rule of [`super::load`] afresh; when the
//! artifact file is unchanged (same length and modification time) it keeps
//! the loaded graph and re-reads only the tables, and when the chosen
//! table is the one serving it publishes nothing and reports
//! [`Reloaded::Unchanged`]. An accepted live batch is appended to the
//! write-ahead log and synced before it is acknowledged.
//!
//! Uploads are read as streams: a table or batch is parsed as it arrives
//! on a thread of its own (it may wait on the client for minutes), into
//! the compact form the snapshot needs, before the writer lock is taken;
//! applying, logging and saving then run on the `updates` thread.

use super::error::{Degraded, HistoricalNote, LoadError, UpdateError, UpdateFailure};
use super::load::{
    choose_historical, file_stamp, historical_state_path, live_wal_path, load_region, Chosen,
    Loaded, TableChoice,
};
use super::{
    buckets, LiveMetric, RegionReader, ReloadOutcome, Reloaded, Snapshot, TableSource,
    UpdateSettings,
};
use crate::correction::{CorrectionModel, ModelUpdateError, ModelUpdater};
use crate::customizer::run_on_own_thread;
use crate::metrics as m;
use crate::retire::{trim_heap, RetireBin};
use crate::settings::RegionConfig;
use crate::speeds::persist::Saving;
use crate::speeds::wal::{self, BatchKind};
use crate::speeds::{
    read_csv, read_json, Batch, HistoricalProfile, LiveLayer, PendingTable, SpeedsError,
    TableReport,
};
use chrono::{DateTime, Utc};
use std::io::Read;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::time::Instant;
use tokio::sync::Notify;

/// Writer-side state: only update paths touch it, one at a time.
pub(super) struct Writer {
    pub(super) live: Option<LiveLayer>,
    pub(super) live_saved_at: Option<Instant>,
    pub(super) live_changed: bool,
}

/// One configured region's write side, for the life of the process.
pub struct RegionUpdater {
    /// The read side this updater publishes on (answers hold only this).
    reader: Arc<RegionReader>,
    pub(super) settings: UpdateSettings,
    pub(super) writer: tokio::sync::Mutex<Writer>,
    /// Superseded snapshots (with their profile metrics), freed on the `updates`
    /// thread once no request holds them (see [`crate::retire`]).
    pub(super) retired: Arc<RetireBin>,
    /// Observations arrived or their base changed: the live loop re-blends.
    pub(super) live_dirty: AtomicBool,
    /// Wakes the live loop early.
    pub(super) wake: Notify,
    generation: AtomicU64,
    loads: AtomicU64,
    /// The correction model's update path (the slot is the reader's).
    model: Arc<ModelUpdater>,
}

impl std::fmt::Debug for RegionUpdater {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RegionUpdater")
            .field("name", &self.reader.name)
            .finish()
    }
}

/// The updater reads what it publishes: every read of the region
/// ([`RegionReader::snapshot`], [`RegionReader::status`], its name and
/// configuration) is there on the write side too. Nothing leads back from
/// a reader to its updater.
impl std::ops::Deref for RegionUpdater {
    type Target = RegionReader;
    fn deref(&self) -> &RegionReader {
        &self.reader
    }
}

impl RegionUpdater {
    /// Creates the region and loads it (see [`Self::load_first`]).
    pub async fn open(cfg: RegionConfig, settings: UpdateSettings) -> Arc<RegionUpdater> {
        let h = Self::new(cfg, settings);
        h.load_first().await;
        h
    }

    /// Creates the region without loading anything: it reports itself
    /// loading (and answers come from the heuristic tier) until
    /// [`Self::load_first`] finishes.
    pub fn new(cfg: RegionConfig, settings: UpdateSettings) -> Arc<RegionUpdater> {
        let reader = Arc::new(RegionReader::new(cfg));
        let model = Arc::new(ModelUpdater::new(
            reader.name.clone(),
            reader.cfg.state_dir.clone(),
            reader.cfg.model.clone(),
            reader.correction.clone(),
        ));
        Arc::new(RegionUpdater {
            reader,
            settings,
            writer: tokio::sync::Mutex::new(Writer {
                live: None,
                live_saved_at: None,
                live_changed: false,
            }),
            retired: Arc::default(),
            live_dirty: AtomicBool::new(false),
            wake: Notify::new(),
            generation: AtomicU64::new(0),
            loads: AtomicU64::new(0),
            model,
        })
    }

    /// The read side, for the answer path.
    pub fn reader(&self) -> &Arc<RegionReader> {
        &self.reader
    }

    /// The first load: the artifact, then the historical table (by the
    /// rule in `load`), then the saved live layer with its write-ahead log
    /// replayed, then the correction model. A failed artifact leaves the
    /// region degraded; the error is in its status.
    pub async fn load_first(self: &Arc<Self>) {
        if let Err(e) = self.reload().await {
            tracing::warn!(region = %self.name, error = %e, "region starts degraded");
        }
        self.model.load_at_start();
        // Ready means ready to answer from the graph for any departure:
        // `reload` publishes the first snapshot only once every profile is
        // customized (a bounded amount of work: `query.profiles` metrics).
        self.reader.set_loaded();
    }

    /// Where an accepted model upload is kept.
    pub fn model_state_path(&self) -> std::path::PathBuf {
        self.model.model_state_path()
    }

    /// Checks, saves and serves an uploaded model file; returns the model
    /// now serving. A refused or unsaved file changes nothing.
    pub async fn put_model(
        &self,
        bytes: Vec<u8>,
    ) -> Result<Arc<CorrectionModel>, ModelUpdateError> {
        self.model.put_model(bytes).await
    }

    pub(super) fn set_status(&self, f: impl FnOnce(&mut super::RegionStatus)) {
        self.reader.set_status(f)
    }

    pub(super) fn record(&self, outcome: ReloadOutcome) {
        metrics::counter!(m::RELOADS, "region" => self.name.clone(), "table" => outcome.table, "outcome" => outcome.outcome)
            .increment(1);
        if let Some(r) = &outcome.report {
            for (kind, n) in &r.bad_by_kind {
                metrics::counter!(m::REJECTED_ROWS, "region" => self.name.clone(), "table" => outcome.table, "kind" => kind.clone())
                    .increment(*n);
            }
        }
        let is_live = outcome.table == "live";
        self.set_status(|s| {
            if is_live {
                s.last_live_batch = Some(outcome);
            } else {
                s.last_reload = Some(outcome);
            }
        });
    }

    pub(super) fn publish(&self, build: impl FnOnce(u64) -> Snapshot) -> Arc<Snapshot> {
        let g = self.generation.fetch_add(1, Ordering::SeqCst) + 1;
        let snap = Arc::new(build(g));
        if let Some(old) = self.reader.swap(snap.clone()) {
            self.retired.retire(buckets::RetiredSnapshot(old));
            self.sweep_retired();
        }
        metrics::gauge!(m::SNAPSHOT_GENERATION, "region" => self.name.clone()).set(g as f64);
        metrics::gauge!(m::REGION_READY, "region" => self.name.clone()).set(1.0);
        snap
    }

    /// Reloads the artifact (unless its file is unchanged) and chooses the
    /// historical table afresh (the newer of the configured file and the
    /// last upload). On failure the serving snapshot, if any, stays as it
    /// was.
    pub async fn reload(self: &Arc<Self>) -> Result<Reloaded, UpdateError> {
        let mut w = self.writer.lock().await;
        if let Some(cur) = self.snapshot() {
            let path = self.cfg.artifact.clone();
            let stamp = tokio::task::spawn_blocking(move || file_stamp(&path))
                .await
                .map_err(|e| UpdateError::Failed(UpdateFailure::LoadTask(e)))?;
            if stamp.is_some() && stamp == cur.artifact_stamp {
                return self.reload_tables(&w, cur).await;
            }
        }
        let loaded = match self.load_off_worker(&w).await? {
            Ok(x) => x,
            Err(e) => return Err(self.load_failed(Arc::new(e))),
        };
        let load_no = self.loads.fetch_add(1, Ordering::SeqCst) + 1;
        let Loaded {
            region,
            index,
            historical,
            restored_live,
            live_problems,
            artifact_stamp,
            at: now,
        } = loaded;
        let TableChoice { table, problems } = historical;
        let note = self.note_problems(&problems, Some(live_problems));
        // Live layer: keep the one held if the graph is the same size, else
        // bring back the saved one (read by the load).
        if let Some(restored) = restored_live {
            if restored.is_some() {
                // Replayed batches are saved with the layer at the next
                // round, which then empties the log.
                w.live_changed = true;
            }
            w.live = restored;
        }
        let free_flow = Arc::new(region.graph.edge_speed_kmh.clone());
        let region = Arc::new(region);
        let (historical, historical_source, historical_at) = split(table);
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
            historical,
            historical_at,
            historical_source,
            profiles,
            live: None,
            artifact_load: load_no,
            artifact_at: now,
            artifact_stamp,
        };
        fresh.live = self.live_for_new_graph(&mut w, &fresh, now).await;
        self.publish(|g| Snapshot {
            generation: g,
            ..fresh
        });
        self.reader.set_degraded(None);
        self.set_status(|s| s.degraded_reason = None);
        self.record(ReloadOutcome {
            table: "artifact",
            outcome: "accepted",
            at: now,
            error: note,
            report: None,
        });
        if w.live.is_some() {
            self.mark_live_dirty();
        }
        drop(w);
        Ok(Reloaded::Accepted)
    }

    /// A reload over the same artifact: chooses the historical table again
    /// and publishes only if it differs from the serving one.
    async fn reload_tables(
        self: &Arc<Self>,
        w: &Writer,
        cur: Arc<Snapshot>,
    ) -> Result<Reloaded, UpdateError> {
        let (cfg, index, v, name) = (
            self.cfg.clone(),
            cur.index.clone(),
            self.settings.validation.clone(),
            self.name.clone(),
        );
        let TableChoice { table, problems } =
            tokio::task::spawn_blocking(move || choose_historical(&cfg, &index, &v, &name))
                .await
                .map_err(|e| UpdateError::Failed(UpdateFailure::LoadTask(e)))?;
        let note = self.note_problems(&problems, None);
        let now = Utc::now();
        let same = match (&table, &cur.historical) {
            (Some(c), Some(h)) => {
                c.profile.version() == h.version()
                    && Some(&c.source) == cur.historical_source.as_ref()
            }
            (None, None) => true,
            _ => false,
        };
        if table.is_none() && cur.historical.is_some() && !problems.is_empty() {
            // Every candidate failed (say, a bad edit of the configured
            // file and no upload): keep serving the table that serves, and
            // report the rejection (status, readiness, metrics).
            self.record(ReloadOutcome {
                table: "historical",
                outcome: "rejected",
                at: now,
                error: note.clone(),
                report: None,
            });
            return Err(UpdateError::TablesRejected(note.unwrap_or_default()));
        }
        if same {
            self.record(ReloadOutcome {
                table: "historical",
                outcome: "unchanged",
                at: now,
                error: note,
                report: None,
            });
            return Ok(Reloaded::Unchanged);
        }
        let (historical, historical_source, historical_at) = split(table);
        // The serving profiles keep answering until all of the chosen
        // table's are customized; only then does the swap happen.
        let profiles = self
            .customize_profiles(&cur.region, &cur.free_flow_kmh, historical.as_ref())
            .await?;
        self.publish(|g| Snapshot {
            generation: g,
            region: cur.region.clone(),
            index: cur.index.clone(),
            free_flow_kmh: cur.free_flow_kmh.clone(),
            historical,
            historical_at,
            historical_source,
            profiles,
            live: cur.live.clone(),
            artifact_load: cur.artifact_load,
            artifact_at: cur.artifact_at,
            artifact_stamp: cur.artifact_stamp,
        });
        self.record(ReloadOutcome {
            table: "historical",
            outcome: "accepted",
            at: now,
            error: note,
            report: None,
        });
        if w.live.is_some() {
            self.mark_live_dirty();
        }
        Ok(Reloaded::Accepted)
    }

    /// Puts a load's problems into the region's status (the historical
    /// ones always, the live ones when the load read the live state) and
    /// returns their text for the outcome's `error`.
    fn note_problems(
        &self,
        historical: &[HistoricalNote],
        live: Option<Vec<String>>,
    ) -> Option<String> {
        let texts: Vec<String> = historical.iter().map(|n| n.to_string()).collect();
        let note = (!texts.is_empty()).then(|| texts.join("; "));
        self.set_status(|s| {
            s.historical_problems = texts;
            if let Some(l) = live {
                s.live_problems = l;
            }
        });
        note
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
            self.reader.set_degraded(Some(e.clone()));
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
            .ok_or_else(|| UpdateError::Unavailable(Degraded(self.reader.degraded())))
    }

    /// Observations arrived or their base changed: the live loop re-blends.
    pub(super) fn mark_live_dirty(&self) {
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
        self.put_historical_from(std::io::Cursor::new(csv)).await
    }

    /// [`put_historical`](Self::put_historical) from a stream, parsed and
    /// saved as it arrives ([`Self::read_historical`]): memory is the
    /// profile being built, not the table's text. The writer lock is taken
    /// once the table is read; if the graph was replaced meanwhile nothing
    /// is saved or served ([`UpdateError::GraphReplaced`]).
    pub async fn put_historical_from<R: Read + Send + 'static>(
        self: &Arc<Self>,
        input: R,
    ) -> Result<TableReport, UpdateError> {
        let read_on = self.current_or_unavailable()?;
        let (profile, report, pending) = match self.read_historical(&read_on, input).await? {
            Ok(x) => x,
            Err(e) => return Err(self.rejected("historical", Utc::now(), e)),
        };
        let w = self.writer.lock().await;
        let snap = self.same_graph(&read_on)?;
        self.save_pending(pending).await?;
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
            historical_source: Some(TableSource::Upload(historical_state_path(&self.cfg))),
            profiles,
            live: snap.live.clone(),
            artifact_load: snap.artifact_load,
            artifact_at: snap.artifact_at,
            artifact_stamp: snap.artifact_stamp,
        });
        // The upload replaced whatever the last load passed over.
        self.set_status(|s| s.historical_problems.clear());
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

    /// The serving snapshot, if it is still over the graph (the same edge
    /// index) that an upload was validated against.
    fn same_graph(&self, read_on: &Snapshot) -> Result<Arc<Snapshot>, UpdateError> {
        let cur = self.current_or_unavailable()?;
        if Arc::ptr_eq(&cur.index, &read_on.index) {
            Ok(cur)
        } else {
            Err(UpdateError::GraphReplaced)
        }
    }

    /// Runs `f`, which reads an upload as it arrives, on a thread of its
    /// own at the update threads' CPU priority: it waits on the client for
    /// as long as the client takes, so it must not hold the shared
    /// `updates` thread meanwhile.
    async fn read_off_worker<T: Send + 'static>(
        &self,
        f: impl FnOnce() -> T + Send + 'static,
    ) -> Option<T> {
        run_on_own_thread("hodos-upload", self.settings.priority, f).await
    }

    /// Parses the table as it arrives and writes it, as it passes, to a
    /// temporary file beside its place in the state directory (removed
    /// again unless the table is accepted and [`Self::save_pending`]
    /// completes it). The outer error is a failure to save (or a panicked
    /// job), the inner one a rejection.
    async fn read_historical<R: Read + Send + 'static>(
        &self,
        snap: &Snapshot,
        input: R,
    ) -> Result<Result<(HistoricalProfile, TableReport, PendingTable), SpeedsError>, UpdateError>
    {
        let index = snap.index.clone();
        let validation = self.settings.validation.clone();
        let path = historical_state_path(&self.cfg);
        self.read_off_worker(move || {
            if let Some(dir) = path.parent() {
                std::fs::create_dir_all(dir).map_err(|source| UpdateFailure::StateDir {
                    dir: dir.to_path_buf(),
                    cause: source,
                })?;
            }
            let mut pending = PendingTable::create(&path).map_err(UpdateFailure::Save)?;
            let saving = Saving {
                inner: input,
                to: &mut pending,
            };
            let r = HistoricalProfile::read(saving, &index, &validation);
            Ok::<_, UpdateFailure>(r.map(|(p, report)| (p, report, pending)))
        })
        .await
        .ok_or(UpdateError::Failed(UpdateFailure::ParseTask))?
        .map_err(UpdateError::Failed)
    }

    /// Completes the saved copy of an accepted table (header, sync,
    /// rename) on the `updates` thread.
    async fn save_pending(&self, pending: PendingTable) -> Result<(), UpdateError> {
        let path = historical_state_path(&self.cfg);
        self.settings
            .updates
            .run(move || {
                let r = pending.finish(&path);
                trim_heap();
                r
            })
            .await
            .ok_or(UpdateError::Failed(UpdateFailure::ParseTask))?
            .map_err(|e| UpdateError::Failed(UpdateFailure::Save(e)))
    }

    /// Applies a batch of live observations (JSON array or CSV). A batch
    /// without rows (`[]`, a CSV with only its header) is accepted with a
    /// report of 0 rows and changes nothing: no live layer is created, no
    /// log record written, no re-blend started.
    pub async fn put_live(&self, body: &[u8], csv: bool) -> Result<TableReport, UpdateError> {
        self.put_live_from(std::io::Cursor::new(body.to_vec()), csv)
            .await
    }

    /// [`put_live`](Self::put_live) from a stream, parsed as it arrives
    /// into the batch's compact form ([`crate::speeds::batch`]):
    /// memory is about 30 bytes per valid observation, not the batch's
    /// text. The writer lock is taken once the batch is read; if the graph
    /// was replaced meanwhile nothing is applied
    /// ([`UpdateError::GraphReplaced`]).
    pub async fn put_live_from<R: Read + Send + 'static>(
        &self,
        input: R,
        csv: bool,
    ) -> Result<TableReport, UpdateError> {
        let read_on = self.current_or_unavailable()?;
        let now = Utc::now();
        let (index, validation) = (read_on.index.clone(), self.settings.validation.clone());
        let read = self
            .read_off_worker(move || {
                if csv {
                    read_csv(&index, input, now, &validation)
                } else {
                    read_json(&index, input, now, &validation)
                }
            })
            .await
            .ok_or(UpdateError::Failed(UpdateFailure::LiveTask))?;
        let batch = match read {
            Ok(b) => b,
            Err(e) => return Err(self.rejected("live", now, e)),
        };
        if batch.report().rows == 0 {
            return Ok(batch.report().clone());
        }
        let mut w = self.writer.lock().await;
        let snap = self.same_graph(&read_on)?;
        let layer = w
            .live
            .take()
            .unwrap_or_else(|| LiveLayer::new(snap.index.num_edges()));
        let Some((layer, r)) = self.apply_batch(&snap, layer, batch, now).await else {
            return Err(UpdateError::Failed(UpdateFailure::LiveTask));
        };
        w.live = Some(layer);
        match r {
            Ok(Err(e)) => {
                w.live_changed = true;
                drop(w);
                self.mark_live_dirty();
                self.record(ReloadOutcome {
                    table: "live",
                    outcome: "failed",
                    at: now,
                    error: Some(e.to_string()),
                    report: None,
                });
                Err(UpdateError::Failed(UpdateFailure::Wal(e)))
            }
            Ok(Ok(report)) => {
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

    /// Applies a read batch on the `updates` thread, then appends its
    /// compact form to the write-ahead log and syncs it there, before the
    /// caller answers (the inner error: it could not be). The layer moves
    /// there and back; `None` if the job panicked. Heap memory the batch
    /// freed is given back to the kernel afterwards.
    async fn apply_batch(
        &self,
        snap: &Snapshot,
        mut layer: LiveLayer,
        batch: Batch,
        now: DateTime<Utc>,
    ) -> Option<(LiveLayer, BatchResult)> {
        let (index, validation) = (snap.index.clone(), self.settings.validation.clone());
        let (log, dir) = (live_wal_path(&self.cfg), self.cfg.state_dir.clone());
        self.settings
            .updates
            .run(move || {
                let r = layer.apply_batch(&index, &batch, now, &validation);
                let r = r.map(|report| {
                    let _ = std::fs::create_dir_all(&dir);
                    wal::append(&log, BatchKind::Compact, batch.encoded(), true).map(|()| report)
                });
                drop(batch);
                trim_heap();
                (layer, r)
            })
            .await
    }
}

/// An applied batch: rejected (outer error), accepted but not logged
/// (inner error), or accepted and durable.
type BatchResult = Result<Result<TableReport, wal::WalError>, SpeedsError>;

/// A chosen table as the snapshot's three historical fields.
fn split(
    table: Option<Chosen>,
) -> (
    Option<Arc<HistoricalProfile>>,
    Option<TableSource>,
    Option<DateTime<Utc>>,
) {
    match table {
        Some(c) => (Some(Arc::new(c.profile)), Some(c.source), Some(c.at)),
        None => (None, None, None),
    }
}
