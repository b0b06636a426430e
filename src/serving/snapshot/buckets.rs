//! The request path's historical bucket metrics: one customized metric per
//! (table version, hour of week), made on the customizer thread on first
//! use (or by the warm-up), kept in a small copy-on-write list; evicted ones
//! are freed on the `updates` thread once no request holds them. Each
//! bucket metric labels its edges historical or free-flow
//! ([`crate::serving::speeds::sources::hour_classes`]) so answers report
//! their sources.

use super::{RegionHandle, Snapshot};
use crate::engine::region::Metric;
use crate::serving::metrics as m;
use crate::serving::retire::Retiree;
use crate::serving::speeds::{sources, HistoricalProfile};
use chrono::Utc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, OnceLock};
use std::time::Instant;
use tokio::sync::Notify;

/// A bucket metric being (or done being) customized.
#[derive(Debug, Default)]
pub(super) struct Slot {
    cell: OnceLock<Arc<Metric>>,
    /// Set by whoever queues the customization, so it is queued once.
    pub(super) started: AtomicBool,
    notify: Notify,
}

/// The bucket list: (historical key, hour, slot), newest last.
pub(super) type Buckets = Vec<(String, u8, Arc<Slot>)>;

/// Slots dropped from the bucket list; in use while a request or a bucket
/// job holds a slot or its metric.
struct EvictedSlots(Vec<Arc<Slot>>);

impl Retiree for EvictedSlots {
    fn in_use(&self) -> bool {
        self.0.iter().any(|s| {
            Arc::strong_count(s) > 1
                || s.cell
                    .get()
                    .map(|m| Arc::strong_count(m) > 1)
                    .unwrap_or(false)
        })
    }
}

impl RegionHandle {
    /// The historical metric for an hour of the week, customizing it on a
    /// blocking thread if needed; waits at most until `deadline`.
    pub async fn bucket(
        &self,
        snap: &Snapshot,
        hour: u8,
        deadline: Instant,
    ) -> Option<Arc<Metric>> {
        let key = snap.historical_key();
        // Without a table every hour is free-flow: one shared slot.
        let hour = if snap.historical.is_some() {
            hour
        } else {
            u8::MAX
        };
        let slot = self.slot(&key, hour);
        if let Some(mtr) = slot.cell.get() {
            return Some(mtr.clone());
        }
        if !slot.started.swap(true, Ordering::SeqCst) {
            self.spawn_bucket(snap, hour, slot.clone());
        }
        loop {
            let notified = slot.notify.notified();
            tokio::pin!(notified);
            notified.as_mut().enable();
            if let Some(mtr) = slot.cell.get() {
                return Some(mtr.clone());
            }
            let left = deadline.checked_duration_since(Instant::now())?;
            if tokio::time::timeout(left, notified).await.is_err() {
                return slot.cell.get().cloned();
            }
        }
    }

    /// The slot of (`key`, `hour`), added to the list if missing (evicting
    /// the oldest beyond the cache size, and every slot of a superseded
    /// table).
    pub(super) fn slot(&self, key: &str, hour: u8) -> Arc<Slot> {
        let list = self.buckets.load();
        if let Some((_, _, s)) = list.iter().find(|(k, h, _)| k == key && *h == hour) {
            return s.clone();
        }
        let cap = self.settings.bucket_cache + 2;
        // Buckets of superseded tables leave the list as soon as a new one
        // is made, and are freed once the requests holding them finish.
        let current = self.snapshot().map(|s| s.historical_key());
        loop {
            let cur = self.buckets.load_full();
            if let Some((_, _, s)) = cur.iter().find(|(k, h, _)| k == key && *h == hour) {
                return s.clone();
            }
            let s = Arc::new(Slot::default());
            let mut v: Vec<_> = cur
                .iter()
                .filter(|(k, _, _)| k == key || Some(k) == current.as_ref())
                .cloned()
                .collect();
            v.push((key.to_string(), hour, s.clone()));
            while v.len() > cap {
                v.remove(0);
            }
            let evicted: Vec<Arc<Slot>> = cur
                .iter()
                .filter(|(_, _, o)| !v.iter().any(|(_, _, n)| Arc::ptr_eq(o, n)))
                .map(|(_, _, o)| o.clone())
                .collect();
            let prev = self.buckets.compare_and_swap(&cur, Arc::new(v));
            if Arc::ptr_eq(&prev, &cur) {
                // Evicted buckets may be the only holders of a metric of
                // tens of MB: this request must not be the one to free it.
                if !evicted.is_empty() {
                    self.retired.retire(EvictedSlots(evicted));
                    self.sweep_retired();
                }
                return s;
            }
        }
    }

    /// Frees, on the `updates` thread, whatever retired data no request
    /// holds any more. Called after every publish and every live-loop
    /// round, so leftovers go within a round.
    pub fn sweep_retired(&self) {
        if !self.retired.is_empty() {
            let bin = self.retired.clone();
            self.settings.updates.spawn(move || drop(bin.sweep()));
        }
    }

    /// Retired items not yet freed, and retired since start.
    pub fn retired(&self) -> (usize, u64) {
        (self.retired.len(), self.retired.total())
    }

    fn spawn_bucket(&self, snap: &Snapshot, hour: u8, slot: Arc<Slot>) {
        let job = self.bucket_job(snap, snap.historical.clone(), hour, slot);
        self.settings.customizer.spawn(job);
    }

    /// The customizer job that fills `slot` with the metric of `hist` (or
    /// free-flow) for `hour` on `snap`'s graph and wakes its waiters.
    pub(super) fn bucket_job(
        &self,
        snap: &Snapshot,
        hist: Option<Arc<HistoricalProfile>>,
        hour: u8,
        slot: Arc<Slot>,
    ) -> impl FnOnce() + Send + 'static {
        let region = snap.region.clone();
        let ff = snap.free_flow_kmh.clone();
        let name = self.name.clone();
        move || {
            let t = Instant::now();
            let speeds = match &hist {
                Some(h) => h.speeds_for_hour(&ff, hour),
                None => ff.to_vec(),
            };
            let classes = sources::hour_classes(hist.as_deref(), speeds.len(), hour);
            let weights = crate::engine::metric::from_speeds(&region.graph, &speeds);
            let metric = region.metric_with_classes(weights, classes);
            metrics::histogram!(m::CUSTOMIZATION, "region" => name, "kind" => "historical")
                .record(t.elapsed().as_secs_f64());
            let _ = slot.cell.set(Arc::new(metric));
            slot.notify.notify_waiters();
        }
    }

    /// Starts customizing the current and the next hour in the background.
    pub fn warm(&self) {
        if let Some(snap) = self.snapshot() {
            let h = crate::serving::speeds::hour_of_week(Utc::now(), self.tz);
            for hour in [h, (h + 1) % 168] {
                let hour = if snap.historical.is_some() {
                    hour
                } else {
                    u8::MAX
                };
                let slot = self.slot(&snap.historical_key(), hour);
                if !slot.started.swap(true, Ordering::SeqCst) {
                    self.spawn_bucket(&snap, hour, slot);
                }
            }
        }
    }
}
