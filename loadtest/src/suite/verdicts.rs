//! The suite's figures held against the goals (thresholds in `goals`):
//! single-ETA capacity against the baseline's, p99 at half that rate, no
//! `overloaded` at 90% of it and at half beside a noisy neighbour, held
//! sockets beside a steady run, overload, the reload storm against the
//! steady run before it, server memory with two customized metrics, and
//! memory around a 100 MiB live batch. Printed after the table as a table
//! of goal / measured / baseline in the same run / verdict, and written to
//! `results.json`.

use crate::goals::{
    DEFAULT_BUDGET_MS, ETA_CAPACITY_VS_BASELINE, HELD_P99_VS_PLAIN, IDLE_SOCKETS,
    LIVE_BATCH_KEPT_VS_SIZE, LIVE_BATCH_PEAK_VS_SIZE, NEIGHBOUR_SHARE_OF_CAPACITY,
    NO_SHED_SHARE_OF_CAPACITY, OVERLOAD_ANSWERED_SHARE, OVERLOAD_P99_MS, STALLED_BODIES,
    STEADY_ETA_P99_MS, STORM_P99_VS_STEADY, TWO_METRICS_RSS_MB,
};
use crate::model::Summary;
use crate::suite::ctx::Ctx;
use crate::suite::records::{Capacity, Goal, HeldRuns, LiveBatch, NoShed, Overload, SuiteOutcome};

/// Capacity of one workload (a goal for single ETAs, reported for others).
fn capacity_goal(c: &Capacity) -> Goal {
    let eta = c.workload == "eta";
    let (pass, measured, baseline) = match (c.hodos, c.baseline) {
        (Some(h), Some(b)) => (
            if eta {
                Some(h / b >= ETA_CAPACITY_VS_BASELINE)
            } else {
                None
            },
            format!("hodos {h:.0}/s = {:.0}% of the baseline's", 100.0 * h / b),
            Some(format!("{b:.0}/s")),
        ),
        (Some(h), None) => (
            if eta { Some(false) } else { None },
            format!("hodos {h:.0}/s"),
            None,
        ),
        _ => (Some(false), "no passing step".to_string(), None),
    };
    Goal {
        goal: if eta {
            format!(
                "single ETA max sustainable rate (<= 1% shed, p99 <= 10 ms) >= {:.0}% of the baseline's",
                100.0 * ETA_CAPACITY_VS_BASELINE
            )
        } else {
            format!("{} max sustainable rate (reported, no goal)", c.workload)
        },
        measured,
        baseline,
        pass,
    }
}

/// Single ETAs at half the capacity.
fn steady_goal(s: &Summary, base: Option<&Summary>) -> Goal {
    Goal {
        goal: format!("single ETA at half the max rate: p99 <= {STEADY_ETA_P99_MS} ms"),
        measured: format!(
            "{:.0}/s: p50 {:.3} ms, p99 {:.3} ms, p99.9 {:.3} ms",
            s.target_rate, s.latency_ms.p50, s.latency_ms.p99, s.latency_ms.p999
        ),
        baseline: base.map(|b| format!("p99 {:.3} ms", b.latency_ms.p99)),
        pass: Some(s.latency_ms.p99 <= STEADY_ETA_P99_MS && s.error_total == 0),
    }
}

/// `overloaded` answers of a run, with errors and p99.
fn shed_line(what: &str, s: &Summary) -> String {
    format!(
        "{what} {:.0}/s: {} of {} answers `overloaded`, {} errors, p99 {:.3} ms",
        s.target_rate,
        s.reason_count("overloaded"),
        s.answers.values().sum::<u64>(),
        s.error_total,
        s.latency_ms.p99
    )
}

/// No `overloaded` at or below 90% of the capacity (the 90% run and the
/// half-rate steady run).
fn no_shed_goal(n: &NoShed, steady: Option<&Summary>) -> Option<Goal> {
    let at90 = n.at90.as_ref()?;
    let mut parts = vec![shed_line(
        &format!("{:.0}%", 100.0 * NO_SHED_SHARE_OF_CAPACITY),
        at90,
    )];
    let mut shed = at90.reason_count("overloaded");
    if let Some(s) = steady {
        parts.push(shed_line("50%", s));
        shed += s.reason_count("overloaded");
    }
    Some(Goal {
        goal: format!(
            "no `overloaded` answers at or below {:.0}% of the measured ETA capacity",
            100.0 * NO_SHED_SHARE_OF_CAPACITY
        ),
        measured: parts.join("; "),
        baseline: None,
        pass: Some(shed == 0),
    })
}

/// No `overloaded` at half the capacity beside a process burning one core,
/// while answers arrive within their budget.
fn neighbour_goal(n: &NoShed) -> Option<Goal> {
    let s = n.neighbour.as_ref()?;
    let cores = s
        .beside
        .as_ref()
        .and_then(|b| b.neighbour_cores)
        .map(|c| format!("{c:.2} cores"))
        .unwrap_or_else(|| "did not run".into());
    let within = s.latency_ms.p99 <= DEFAULT_BUDGET_MS && s.error_total == 0;
    let ran = s.beside.as_ref().and_then(|b| b.neighbour_cores).is_some();
    Some(Goal {
        goal: format!(
            "no `overloaded` at {:.0}% of the ETA capacity while another process burns one core, answers within their budget (p99 <= {DEFAULT_BUDGET_MS} ms)",
            100.0 * NEIGHBOUR_SHARE_OF_CAPACITY
        ),
        measured: format!(
            "{}; max {:.1} ms; neighbour burned {cores}",
            shed_line("", s).trim_start(),
            s.latency_ms.max
        ),
        baseline: None,
        pass: Some(ran && within && s.reason_count("overloaded") == 0),
    })
}

/// Held sockets beside a steady run: answered from the graph, p99 within
/// the noise allowance of the runs without them.
fn held_goal(h: &HeldRuns) -> Goal {
    let s = &h.held;
    let plain = h.before.latency_ms.p99.max(h.after.latency_ms.p99);
    let ratio = s.latency_ms.p99 / plain.max(1e-9);
    let b = s.beside.clone().unwrap_or_default();
    let fds = match (b.server_fds_before, b.server_fds_held) {
        (Some(a), Some(z)) => format!("; server descriptors {a} -> {z}"),
        _ => String::new(),
    };
    let all_opened = b.stalled_opened == STALLED_BODIES && b.idle_opened == IDLE_SOCKETS;
    Goal {
        goal: format!(
            "{STALLED_BODIES} stalled bodies + {IDLE_SOCKETS} idle sockets held during a steady ETA run: answered from the graph, p99 <= {HELD_P99_VS_PLAIN}x the same run without them"
        ),
        measured: format!(
            "{:.0}/s: {:.2}% from the graph, {} `overloaded`, {} errors, p99 {:.3} ms vs {:.3} / {:.3} ms without (before / after): {ratio:.2}x; opened {}/{} stalled, {}/{} idle, still open at the end {} / {}{fds}",
            s.target_rate,
            100.0 * s.graph_share(),
            s.reason_count("overloaded"),
            s.error_total,
            s.latency_ms.p99,
            h.before.latency_ms.p99,
            h.after.latency_ms.p99,
            b.stalled_opened,
            STALLED_BODIES,
            b.idle_opened,
            IDLE_SOCKETS,
            b.stalled_open_at_end,
            b.idle_open_at_end
        ),
        baseline: None,
        pass: Some(
            all_opened
                && s.error_total == 0
                && s.graph_share() >= 1.0
                && ratio <= HELD_P99_VS_PLAIN,
        ),
    }
}

/// One overload run (with the baseline at the same rate, when it ran).
fn overload_goal(o: &Overload) -> Goal {
    let (k, s) = (o.k, &o.hodos);
    let base = o.baseline.as_ref().map(|b| {
        format!(
            "{:.2}% answered, p99 {:.1} ms, achieved {:.0}/s",
            100.0 * b.answered_share,
            b.latency_ms.p99,
            b.achieved_rate
        )
    });
    let what = if o.workload == "eta" {
        String::new()
    } else {
        format!("{} ", o.workload)
    };
    let shed = s.reason_share("overloaded") + s.reason_share("budget_exceeded");
    Goal {
        goal: format!(
            "overload {what}{k:.0}x: {:.0}% answered, p99 <= {OVERLOAD_P99_MS} ms (the default budget), share shed reported",
            100.0 * OVERLOAD_ANSWERED_SHARE
        ),
        measured: format!(
            "{:.0}/s: {:.2}% answered, p99 {:.1} ms, max {:.1} ms, shed {:.1}%{}, achieved {:.0}/s",
            s.target_rate,
            100.0 * s.answered_share,
            s.latency_ms.p99,
            s.latency_ms.max,
            100.0 * shed,
            if o.workload == "eta" { "" } else { " of cells" },
            s.achieved_rate
        ),
        baseline: base,
        pass: Some(s.answered_share >= OVERLOAD_ANSWERED_SHARE && s.latency_ms.p99 <= OVERLOAD_P99_MS),
    }
}

/// The live batch: peak growth against its size, and memory afterwards.
fn live_batch_goals(lb: &LiveBatch) -> Vec<Goal> {
    let size_mb = lb.bytes as f64 / 1048576.0;
    let peak = if lb.hwm_was_reset {
        lb.hwm_mb.max(lb.rss_max_sampled_mb)
    } else {
        lb.rss_max_sampled_mb
    };
    let growth = peak - lb.rss_before_mb;
    let kept = lb.rss_after_mb - lb.rss_before_mb;
    let ok = lb.status == 200 && !lb.in_process;
    let answer = format!(
        "{size_mb:.1} MiB, {} observations: HTTP {} in {:.2} s",
        lb.observations, lb.status, lb.answer_s
    );
    vec![
        Goal {
            goal: format!(
                "a {size_mb:.0} MiB live batch: peak server RSS growth <= {LIVE_BATCH_PEAK_VS_SIZE}x the batch size"
            ),
            measured: format!(
                "{answer}; VmRSS {:.1} MB before, peak {:.1} MB ({}): growth {growth:.1} MB = {:.2}x",
                lb.rss_before_mb,
                peak,
                if lb.hwm_was_reset {
                    "VmHWM reset before the upload"
                } else {
                    "sampled every 50 ms"
                },
                growth / size_mb.max(1e-9)
            ),
            baseline: None,
            pass: Some(ok && growth <= LIVE_BATCH_PEAK_VS_SIZE * size_mb),
        },
        Goal {
            goal: format!(
                "memory returned after the live batch: VmRSS {:.0} s after the answer <= before + {:.0}% of the batch size",
                lb.settle_s,
                100.0 * LIVE_BATCH_KEPT_VS_SIZE
            ),
            measured: format!(
                "VmRSS {:.1} MB before, {:.1} MB {:.0} s after: {kept:+.1} MB = {:.0}% of the batch",
                lb.rss_before_mb,
                lb.rss_after_mb,
                lb.settle_s,
                100.0 * kept / size_mb.max(1e-9)
            ),
            baseline: None,
            pass: Some(ok && kept <= LIVE_BATCH_KEPT_VS_SIZE * size_mb),
        },
    ]
}

/// A table cell: `|` would end the cell early.
fn cell(s: &str) -> String {
    s.replace('|', "/")
}

impl Ctx {
    /// Holds the suite's figures against the goals and prints them.
    pub fn finish_goals(&mut self) {
        if let Some(o) = self.outcome.take() {
            self.goals(&o);
        }
    }

    fn goals(&mut self, o: &SuiteOutcome) {
        let steady_base = self
            .runs
            .iter()
            .find(|r| r.scenario == "steady-eta-half" && r.system == "baseline")
            .cloned();
        let mut g: Vec<Goal> = o.caps.iter().map(capacity_goal).collect();
        g.extend(
            o.steady
                .as_ref()
                .map(|s| steady_goal(s, steady_base.as_ref())),
        );
        g.extend(no_shed_goal(&o.no_shed, o.steady.as_ref()));
        g.extend(neighbour_goal(&o.no_shed));
        g.extend(o.held.as_ref().map(held_goal));
        g.extend(o.overloads.iter().map(overload_goal));
        g.extend(o.storm.as_ref().map(|st| self.storm_goal(st, &o.pre)));
        g.extend(self.memory_goal());
        if let Some(lb) = &self.live_batch {
            g.extend(live_batch_goals(lb));
        }
        self.print(String::new());
        self.print("goals".into());
        self.print("| goal | measured | baseline (same run) | verdict |".into());
        self.print("|---|---|---|---|".into());
        for x in &g {
            let line = format!(
                "| {} | {} | {} | {} |",
                cell(&x.goal),
                cell(&x.measured),
                cell(x.baseline.as_deref().unwrap_or("—")),
                match x.pass {
                    Some(true) => "met",
                    Some(false) => "MISSED",
                    None => "info",
                },
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
            baseline: None,
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
            baseline: None,
            pass: Some(worst <= TWO_METRICS_RSS_MB && !self.server.in_process),
        })
    }
}
