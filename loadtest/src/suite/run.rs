//! The suite's order: cold start, capacity search per workload, steady
//! runs at half capacity, ETAs at 90% of capacity and at half beside a
//! noisy neighbour, a steady run with held sockets between two without,
//! overload, the stale feed, a steady run and the reload storm at the same
//! rate, with memory readings between; the figures
//! held against the goals are kept in a `SuiteOutcome` until the memory
//! phase (on a fresh server) is done.

use crate::goals::STEADY_SHARE_OF_CAPACITY;
use crate::model::Summary;
use crate::suite::ctx::Ctx;
use crate::suite::pools::Workset;
use crate::suite::records::SuiteOutcome;

impl Ctx {
    /// The whole run: every scenario, back to back, and the goals.
    pub async fn suite(&mut self) {
        self.header();
        self.memory_now("ready");
        self.cold_start().await;
        let sets = self.worksets();
        let caps = self.capacities(&sets).await;
        let eta_cap = caps[0].hodos;
        let steady = self.steady_runs(&sets, &caps).await;
        let half = eta_cap
            .map(|c| c * STEADY_SHARE_OF_CAPACITY)
            .unwrap_or(100.0);
        let no_shed = self.no_shed_runs(eta_cap).await;
        let held = match eta_cap {
            Some(_) => Some(self.held_sockets(half).await),
            None => None,
        };
        let overloads = self.overloads(&sets, &caps).await;
        if let Some(sum) = self.stale_feed(half, self.s.steady).await {
            self.runs.push(sum);
        }
        self.memory_now("after the stale feed (free-flow + live blend)");
        let (pre, storm) = self.storm_beside_steady(half).await;
        self.memory_now("after the reload storm");
        self.outcome = Some(SuiteOutcome {
            caps,
            steady,
            overloads,
            pre,
            storm,
            no_shed,
            held,
        });
    }

    /// The workloads measured, in order (single ETA first), with the first
    /// rate of their capacity search.
    fn worksets(&self) -> [Workset; 4] {
        let set = |name, w: &crate::workload::Workload, start| Workset {
            name,
            w: w.clone(),
            start,
        };
        [
            set("eta", &self.w.eta, 1000.0),
            set("matrix1x50", &self.w.m1x50, 200.0),
            set("matrix20x20", &self.w.m20x20, 40.0),
            set("route", &self.w.route, 500.0),
        ]
    }

    /// A steady ETA run at `rate`, then the reload storm at the same rate.
    async fn storm_beside_steady(&mut self, rate: f64) -> (Summary, Option<Summary>) {
        let len = self.s.steady;
        let pre = self.drive_eta("steady-eta-pre-storm", rate, len).await;
        self.runs.push(pre.clone());
        let storm = self.reload_storm(rate, self.s.storm).await;
        if let Some(st) = &storm {
            self.runs.push(st.clone());
        }
        (pre, storm)
    }
}
