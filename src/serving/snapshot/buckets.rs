//! The historical tier's metrics: the hours of the week grouped into at most
//! `query.profiles` representative profiles
//! ([`HourGrouping`](crate::speeds::HourGrouping)), one customized
//! metric per profile, all made on the customizer thread before the
//! snapshot that holds them is published. A request maps its departure
//! hour to a profile and finds the metric ready: no departure time waits
//! for a customization, and none is evicted while its table serves.
//! Superseded profile metrics leave with their snapshot through `retire`.

use super::error::{UpdateError, UpdateFailure};
use super::{RegionUpdater, Snapshot};
use crate::metrics as m;
use crate::retire::Retiree;
use crate::speeds::{sources, HistoricalProfile, HourGrouping};
use hodos_engine::region::{Metric, Region};
use std::sync::Arc;
use std::time::Instant;

/// Every profile metric of one (artifact load, historical table).
#[derive(Debug)]
pub struct Profiles {
    /// Hour → profile, representatives, deviations, heuristic factors.
    pub grouping: HourGrouping,
    /// One customized metric per profile, in profile order.
    pub metrics: Vec<Arc<Metric>>,
    /// Seconds the grouping and all customizations took (load-time cost).
    pub build_s: f64,
}

/// The profile an answer used: its index and representative hour.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ProfileUsed {
    pub index: u8,
    /// The hour of week whose speeds the profile's metric holds.
    pub representative_hour: u8,
}

impl Profiles {
    /// The profile and metric serving an hour of the week.
    pub fn for_hour(&self, hour: u8) -> (ProfileUsed, &Arc<Metric>) {
        let p = self.grouping.profile_of(hour);
        let used = ProfileUsed {
            index: p,
            representative_hour: self.grouping.representatives[p as usize],
        };
        (used, &self.metrics[p as usize])
    }

    /// Heap bytes of all profile metrics (weights and customized arcs).
    pub fn heap_bytes(&self) -> usize {
        self.metrics.iter().map(|m| metric_bytes(m)).sum()
    }

    /// Whether a request still holds one of the metrics.
    fn metrics_in_use(&self) -> bool {
        self.metrics.iter().any(|m| Arc::strong_count(m) > 1)
    }
}

/// Heap bytes of one metric.
pub fn metric_bytes(m: &Metric) -> usize {
    m.weights.capacity() * std::mem::size_of::<u32>() + m.customized.heap_bytes()
}

/// The metric of one profile: `hist`'s speeds for `hour` (free-flow where
/// the table has no row, or everywhere without a table), customized.
pub(super) fn profile_metric(
    region: &Region,
    free_flow: &[f32],
    hist: Option<&HistoricalProfile>,
    hour: u8,
) -> Metric {
    let speeds = match hist {
        Some(h) => h.speeds_for_hour(free_flow, hour),
        None => free_flow.to_vec(),
    };
    // Each edge's source class (historical where the hour has a row,
    // free-flow elsewhere) so answers report the sources of their time.
    let classes = sources::hour_classes(hist, speeds.len(), hour);
    let weights = hodos_engine::metric::from_speeds(&region.graph, &speeds);
    region.metric_with_classes(weights, classes)
}

/// A superseded snapshot: in use while a request holds it or any of its
/// profile metrics (a matrix job holds a metric without the snapshot).
pub(super) struct RetiredSnapshot(pub Arc<Snapshot>);

impl Retiree for RetiredSnapshot {
    fn in_use(&self) -> bool {
        Arc::strong_count(&self.0) > 1 || self.0.profiles.metrics_in_use()
    }
}

impl RegionUpdater {
    /// Groups the hours of `hist` (or one free-flow profile without a
    /// table) and customizes every profile, each as its own job on the
    /// customizer thread (live blends can run between them). Returns once
    /// all are ready; the caller publishes only then.
    pub(super) async fn customize_profiles(
        &self,
        region: &Arc<Region>,
        free_flow: &Arc<Vec<f32>>,
        hist: Option<&Arc<HistoricalProfile>>,
    ) -> Result<Arc<Profiles>, UpdateError> {
        let t = Instant::now();
        let failed = || UpdateError::Failed(UpdateFailure::CustomizeTask);
        let k = self.settings.profiles;
        let grouping = match hist {
            Some(h) => {
                let (h, ff, r) = (h.clone(), free_flow.clone(), region.clone());
                self.settings
                    .customizer
                    .run(move || HourGrouping::new(&h, &ff, &r.graph.edge_len_m, k))
                    .await
                    .ok_or_else(failed)?
            }
            None => HourGrouping::free_flow(),
        };
        let mut metrics = Vec::with_capacity(grouping.len());
        for &hour in &grouping.representatives {
            let (h, ff, r, name) = (
                hist.cloned(),
                free_flow.clone(),
                region.clone(),
                self.name.clone(),
            );
            let metric = self
                .settings
                .customizer
                .run(move || {
                    let t = Instant::now();
                    let mtr = profile_metric(&r, &ff, h.as_deref(), hour);
                    metrics::histogram!(m::CUSTOMIZATION, "region" => name, "kind" => "historical")
                        .record(t.elapsed().as_secs_f64());
                    mtr
                })
                .await
                .ok_or_else(failed)?;
            metrics.push(Arc::new(metric));
        }
        let profiles = Profiles {
            grouping,
            metrics,
            build_s: t.elapsed().as_secs_f64(),
        };
        let (dev_median, dev_max) = profiles.grouping.deviation_summary();
        tracing::info!(
            region = %self.name,
            table = hist.map(|h| h.version()).unwrap_or("free-flow"),
            profiles = profiles.grouping.len(),
            exact = profiles.grouping.exact,
            deviation_median = dev_median,
            deviation_max = dev_max,
            metric_mb = profiles.heap_bytes() as f64 / 1e6,
            seconds = profiles.build_s,
            "hour-of-week profiles customized"
        );
        Ok(Arc::new(profiles))
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
}
