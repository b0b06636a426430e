//! The live loop of one region, on its own: a background task that, at
//! most once per `recustomize_ms` (sooner when woken by an accepted
//! batch), re-blends and publishes the live tier through the region's
//! [`RegionUpdater`], frees retired snapshots, keeps the data-age gauges
//! current, and applies the watched folder of live CSV files. It is
//! started and stopped by [`crate::service::Service`].
//!
//! The watched folder's `std::fs` calls run on tokio's blocking pool.

use super::{age_s, RegionUpdater};
use crate::metrics as m;
use chrono::Utc;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::{Duration, Instant};

/// The `*.csv` files of the watched folder, sorted; `None` if it cannot be
/// read.
fn list_csv(dir: &Path) -> Option<Vec<PathBuf>> {
    let entries = std::fs::read_dir(dir).ok()?;
    let mut files: Vec<PathBuf> = entries
        .flatten()
        .map(|e| e.path())
        .filter(|p| p.extension().map(|x| x == "csv").unwrap_or(false))
        .collect();
    files.sort();
    Some(files)
}

/// Renames an applied file to `.done` or `.rejected`.
fn mark(f: &Path, ext: &str) {
    if let Err(e) = std::fs::rename(f, f.with_extension(ext)) {
        tracing::warn!(file = %f.display(), error = %e, "could not mark live file");
    }
}

/// The live loop and watched folder of one region.
#[derive(Debug, Clone)]
pub struct LiveLoop {
    region: Arc<RegionUpdater>,
}

impl LiveLoop {
    pub fn new(region: Arc<RegionUpdater>) -> Self {
        LiveLoop { region }
    }

    /// Runs the live loop until `shutdown` resolves: re-customizes at most
    /// every `recustomize_ms` when observations arrived, and scans the
    /// watched directory.
    pub async fn run(self, shutdown: impl std::future::Future<Output = ()>) {
        tokio::pin!(shutdown);
        let interval = Duration::from_millis(self.region.settings.live.recustomize_ms);
        let watch_every = Duration::from_secs_f64(self.region.settings.live.watch_interval_s);
        let mut last_scan = Instant::now() - watch_every;
        loop {
            tokio::select! {
                _ = &mut shutdown => break,
                _ = self.region.wake.notified() => {},
                _ = tokio::time::sleep(interval) => {},
            }
            let started = Instant::now();
            self.region.refresh_live(false).await;
            self.region.sweep_retired();
            self.record_live_age();
            if self.region.cfg.live_dir.is_some() && last_scan.elapsed() >= watch_every {
                last_scan = Instant::now();
                self.scan_dir().await;
            }
            // At most one re-customization per interval.
            let spent = started.elapsed();
            if spent < interval {
                tokio::select! {
                    _ = &mut shutdown => break,
                    _ = tokio::time::sleep(interval - spent) => {},
                }
            }
        }
    }

    /// Sets the live-age gauge from the serving blend's newest observation,
    /// and the historical-age gauge from when the serving table was taken.
    fn record_live_age(&self) {
        if let Some(snap) = self.region.snapshot() {
            if let Some(t) = snap.historical_at {
                metrics::gauge!(m::HISTORICAL_AGE, "region" => self.region.name.clone())
                    .set(age_s(Utc::now(), t));
            }
            if let Some(l) = &snap.live {
                if let Some(n) = l.newest_observed_at {
                    metrics::gauge!(m::LIVE_AGE, "region" => self.region.name.clone())
                        .set(age_s(Utc::now(), n));
                }
            }
        }
    }

    /// Applies every `*.csv` file in the watched directory, then renames it
    /// to `.done` or `.rejected` so nothing is applied twice or lost. The
    /// listing, reading and renaming run on tokio's blocking pool.
    pub async fn scan_dir(&self) {
        let Some(dir) = self.region.cfg.live_dir.clone() else {
            return;
        };
        if !self.region.loaded() {
            // Files wait for the first load rather than be refused.
            return;
        }
        let Ok(Some(files)) = tokio::task::spawn_blocking(move || list_csv(&dir)).await else {
            return;
        };
        for f in files {
            let path = f.clone();
            let Ok(Ok(file)) =
                tokio::task::spawn_blocking(move || std::fs::File::open(&path)).await
            else {
                continue;
            };
            // Read as a stream, like an upload.
            let outcome = self.region.put_live_from(file, true).await;
            let ext = match &outcome {
                Ok(_) => "done",
                Err(e) => {
                    // The operator finds the file renamed; the log says why.
                    tracing::warn!(
                        region = %self.region.name,
                        file = %f.display(),
                        reason = %e,
                        "live file rejected (renamed to .rejected)"
                    );
                    "rejected"
                }
            };
            let _ = tokio::task::spawn_blocking(move || mark(&f, ext)).await;
        }
    }
}
