//! Capacity search: grow the rate by `growth` while a step passes, shrink
//! it while none has, then bisect between the last pass and the first
//! failure `refine` times. A step fails on any error, an achieved rate
//! below 95% of the target, a p99 above the limit, or too many answers shed
//! (criteria in `goals`); one that failed on its tail alone is run once
//! more. The capacity is the last passing rate.

use crate::goals::STEP_MIN_ACHIEVED_SHARE;
use crate::model::Summary;
use crate::suite::ctx::{Ctx, System};
use crate::suite::pools::Workset;
use crate::suite::records::{Capacity, Probe, Step};
use crate::suite::settings::{Settings, Wire};
use crate::workload::Workload;
use std::time::Duration;

/// Where the search goes after a step: the next rate, or `None` when done.
/// `refined` counts the bisection steps taken so far.
fn next_rate(s: &Settings, good: Option<f64>, bad: Option<f64>, refined: &mut u32) -> Option<f64> {
    match (good, bad) {
        (Some(g), None) => {
            let r = g * s.growth;
            (r <= s.max_rate).then_some(r)
        }
        (None, Some(b)) => {
            let r = b / s.growth;
            (r >= 1.0).then_some(r)
        }
        (Some(g), Some(b)) => {
            if *refined >= s.refine || b / g < 1.04 {
                return None;
            }
            *refined += 1;
            Some((g + b) / 2.0)
        }
        (None, None) => None,
    }
}

impl Ctx {
    /// Capacity search for one workload on one system, from `start`.
    pub async fn probe(&mut self, scenario: &str, sys: System, w: &Workload, start: f64) -> Probe {
        let mut rate = start;
        let (mut good, mut bad): (Option<f64>, Option<f64>) = (None, None);
        let mut steps = Vec::new();
        let mut refined = 0;
        for _ in 0..16 {
            let (s, why) = self.step(scenario, sys, w, rate).await;
            steps.push(Step::of(rate, &why, &s));
            if why.is_none() {
                good = Some(rate);
            } else {
                bad = Some(rate);
            }
            // Let queues and sockets settle between steps.
            tokio::time::sleep(Duration::from_millis(800)).await;
            match next_rate(&self.s, good, bad, &mut refined) {
                Some(r) => rate = r,
                None => break,
            }
        }
        let p = Probe {
            scenario: scenario.to_string(),
            system: sys.name().to_string(),
            workload: w.kind.label(),
            capacity: good,
            steps,
        };
        self.print(format!(
            "capacity  {:<26} {:<8} {}",
            scenario,
            sys.name(),
            match good {
                Some(g) => format!("{g:.0} req/s (last passing step)"),
                None => "none (no step passed)".into(),
            }
        ));
        self.probes.push(p.clone());
        p
    }

    /// One step at `rate` (run again once if it failed on its tail alone)
    /// and why it failed, if it did.
    async fn step(
        &mut self,
        scenario: &str,
        sys: System,
        w: &Workload,
        rate: f64,
    ) -> (Summary, Option<String>) {
        let name = format!("{scenario}@{rate:.0}");
        let len = self.s.step;
        let wire = Wire {
            connections: self.s.connections,
            drain: Duration::from_secs(2),
        };
        let mut s = self.drive(&name, sys, w, rate, len, wire).await;
        let mut why = self.verdict(&s);
        // Other work on a shared machine can spoil one step's tail: a
        // step that failed on its tail alone is run once more.
        if why.is_some()
            && s.error_total == 0
            && s.achieved_rate >= STEP_MIN_ACHIEVED_SHARE * rate
            && self.s.confirm
        {
            tokio::time::sleep(Duration::from_millis(800)).await;
            let again = format!("{name}(again)");
            s = self.drive(&again, sys, w, rate, len, wire).await;
            why = self.verdict(&s);
        }
        (s, why)
    }

    /// Why a capacity step failed, if it did.
    fn verdict(&self, s: &Summary) -> Option<String> {
        if s.error_total > 0 {
            return Some(format!("{} errors", s.error_total));
        }
        if s.achieved_rate < STEP_MIN_ACHIEVED_SHARE * s.target_rate {
            return Some(format!(
                "achieved {:.0} < {:.0}% of {:.0}",
                s.achieved_rate,
                100.0 * STEP_MIN_ACHIEVED_SHARE,
                s.target_rate
            ));
        }
        if s.latency_ms.p99 > self.s.p99_limit_ms {
            return Some(format!(
                "p99 {:.2} ms > {} ms",
                s.latency_ms.p99, self.s.p99_limit_ms
            ));
        }
        let shed = s.reason_share("overloaded") + s.reason_share("budget_exceeded");
        if shed > self.s.max_shed_share {
            return Some(format!("{:.1}% of answers shed", 100.0 * shed));
        }
        None
    }
}

impl Ctx {
    /// Capacity search for each workload, on the baseline (when it runs)
    /// and on hodos.
    pub(crate) async fn capacities(&mut self, sets: &[Workset]) -> Vec<Capacity> {
        let mut caps = Vec::new();
        for set in sets {
            let name = format!("capacity-{}", set.name);
            let base = if self.baseline.is_some() {
                self.probe(&name, System::Baseline, &set.w, set.start * 4.0)
                    .await
                    .capacity
            } else {
                None
            };
            let hod = self
                .probe(&name, System::Hodos, &set.w, set.start)
                .await
                .capacity;
            caps.push(Capacity {
                workload: set.name.to_string(),
                hodos: hod,
                baseline: base,
            });
        }
        caps
    }
}
