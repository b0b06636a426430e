//! The suite's figures held against the goals (thresholds in `goals`):
//! single-ETA capacity against the baseline's, p99 at half that rate,
//! overload, the reload storm against the steady run before it, and server
//! memory with two customized metrics. Printed after the table and written
//! to `results.json`.

use crate::goals::{
    ETA_CAPACITY_VS_BASELINE, OVERLOAD_ANSWERED_SHARE, OVERLOAD_P99_MS, STEADY_ETA_P99_MS,
    STORM_P99_VS_STEADY, TWO_METRICS_RSS_MB,
};
use crate::model::Summary;
use crate::suite::ctx::Ctx;
use crate::suite::records::{Capacity, Goal, Overload, SuiteOutcome};

/// Capacity of one workload (a goal for single ETAs, reported for others).
fn capacity_goal(c: &Capacity) -> Goal {
    let eta = c.workload == "eta";
    let (pass, measured) = match (c.hodos, c.baseline) {
        (Some(h), Some(b)) => (
            if eta {
                Some(h / b >= ETA_CAPACITY_VS_BASELINE)
            } else {
                None
            },
            format!("hodos {h:.0}/s, baseline {b:.0}/s: {:.0}%", 100.0 * h / b),
        ),
        (Some(h), None) => (None, format!("hodos {h:.0}/s, no baseline")),
        _ => (Some(false), "no passing step".to_string()),
    };
    Goal {
        goal: if eta {
            format!(
                "single ETA max sustainable rate >= {:.0}% of the baseline's",
                100.0 * ETA_CAPACITY_VS_BASELINE
            )
        } else {
            format!("{} max sustainable rate (reported, no goal)", c.workload)
        },
        measured,
        pass,
    }
}

/// Single ETAs at half the capacity.
fn steady_goal(s: &Summary) -> Goal {
    Goal {
        goal: format!("single ETA at half the max rate: p99 <= {STEADY_ETA_P99_MS} ms"),
        measured: format!(
            "{:.0}/s: p50 {:.3} ms, p99 {:.3} ms, p99.9 {:.3} ms",
            s.target_rate, s.latency_ms.p50, s.latency_ms.p99, s.latency_ms.p999
        ),
        pass: Some(s.latency_ms.p99 <= STEADY_ETA_P99_MS && s.error_total == 0),
    }
}

/// One overload run (with the baseline at the same rate, when it ran).
fn overload_goal(o: &Overload) -> Goal {
    let (k, s) = (o.k, &o.hodos);
    let base = o
        .baseline
        .as_ref()
        .map(|b| {
            format!(
                "; baseline at the same rate: {:.2}% answered, p99 {:.1} ms, achieved {:.0}/s",
                100.0 * b.answered_share,
                b.latency_ms.p99,
                b.achieved_rate
            )
        })
        .unwrap_or_default();
    let what = if o.workload == "eta" {
        String::new()
    } else {
        format!("{} ", o.workload)
    };
    Goal {
        goal: format!(
            "overload {what}{k:.0}x: {:.0}% answered, p99 <= {OVERLOAD_P99_MS} ms (overloaded share reported)",
            100.0 * OVERLOAD_ANSWERED_SHARE
        ),
        measured: format!(
            "{:.0}/s: {:.2}% answered, p99 {:.1} ms, max {:.1} ms, overloaded {:.1}%, achieved {:.0}/s{base}",
            s.target_rate,
            100.0 * s.answered_share,
            s.latency_ms.p99,
            s.latency_ms.max,
            100.0 * s.reason_share("overloaded"),
            s.achieved_rate
        ),
        pass: Some(s.answered_share >= OVERLOAD_ANSWERED_SHARE && s.latency_ms.p99 <= OVERLOAD_P99_MS),
    }
}

impl Ctx {
    /// Holds the suite's figures against the goals and prints them.
    pub fn finish_goals(&mut self) {
        if let Some(o) = self.outcome.take() {
            self.goals(&o);
        }
    }

    fn goals(&mut self, o: &SuiteOutcome) {
        let mut g: Vec<Goal> = o.caps.iter().map(capacity_goal).collect();
        g.extend(o.steady.as_ref().map(steady_goal));
        g.extend(o.overloads.iter().map(overload_goal));
        g.extend(o.storm.as_ref().map(|st| self.storm_goal(st, &o.pre)));
        g.extend(self.memory_goal());
        println!();
        println!("goals");
        for x in &g {
            let line = format!(
                "  [{}] {} — {}",
                match x.pass {
                    Some(true) => "met",
                    Some(false) => "MISSED",
                    None => "info",
                },
                x.goal,
                x.measured
            );
            self.print(line);
        }
        self.goals = g;
    }

    /// The reload storm against the steady run before it.
    fn storm_goal(&self, st: &Summary, pre: &Summary) -> Goal {
        let admin_failed: u64 = self
            .admin
            .iter()
            .filter(|(n, _)| n.starts_with("reload-storm"))
            .map(|(_, r)| r.failed.values().sum::<u64>())
            .sum();
        let ratio = st.latency_ms.p99 / pre.latency_ms.p99.max(1e-9);
        Goal {
            goal: format!(
                "reload storm: zero errors, p99 <= {STORM_P99_VS_STEADY}x the steady p99 at the same rate"
            ),
            measured: format!(
                "{:.0}/s: {} query errors, {} admin failures, p99 {:.3} ms vs steady {:.3} ms ({:.2}x)",
                st.target_rate, st.error_total, admin_failed, st.latency_ms.p99, pre.latency_ms.p99, ratio
            ),
            pass: Some(st.error_total == 0 && admin_failed == 0 && ratio <= STORM_P99_VS_STEADY),
        }
    }

    /// Server memory with two customized metrics (the sampled reading of
    /// the memory phase, else the one after the stale feed).
    fn memory_goal(&self) -> Option<Goal> {
        let m = self
            .memory
            .iter()
            .find(|m| m.max_rss_mb.is_some())
            .or_else(|| {
                self.memory
                    .iter()
                    .find(|m| m.when.starts_with("after the stale"))
            })?;
        let peak = self.memory.iter().map(|m| m.hwm_mb).fold(0.0, f64::max);
        let worst = m.max_rss_mb.unwrap_or(m.rss_mb);
        Some(Goal {
            goal: format!(
                "server resident memory with NY and two customized metrics <= {TWO_METRICS_RSS_MB} MB"
            ),
            measured: format!(
                "VmRSS {:.1} MB (max {:.1}) with free-flow + live metrics [{}]; peak VmHWM seen {:.1} MB{}",
                m.rss_mb,
                worst,
                m.when,
                peak,
                if self.server.in_process {
                    " (in process: includes the generator)"
                } else {
                    ""
                }
            ),
            pass: Some(worst <= TWO_METRICS_RSS_MB && !self.server.in_process),
        })
    }
}
