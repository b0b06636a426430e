//! The summary of one scenario run: rates, latency percentiles, errors,
//! answers by tier and reason, generator self-checks, server and machine
//! CPU use, notes and the timeline. Built from an engine `Outcome`; written
//! as a table row (`report`), as JSON and as SVG (`plot`).

use crate::model::latency::{curve, timeline, Percentiles, Window};
use crate::model::run::Outcome;
use crate::workload::Kind;
use serde::Serialize;
use std::collections::BTreeMap;

/// Server resource use during a scenario (when the server's pid is known).
#[derive(Debug, Clone, Serialize)]
pub struct ServerUse {
    pub pid: u32,
    /// Whether the server shares this process (then CPU includes the
    /// generator).
    pub in_process: bool,
    pub cpu_s: f64,
    pub cpu_ms_per_answer: f64,
    pub rss_mb: f64,
    pub hwm_mb: f64,
}

/// Generator self-checks.
#[derive(Debug, Clone, Serialize)]
pub struct GeneratorHealth {
    /// How late the pacer released tickets: large values mean the
    /// generator, not the server, was short of CPU.
    pub pacer_late_p99_ms: f64,
    pub pacer_late_max_ms: f64,
    /// Queueing for a free connection inside the generator.
    pub pool_wait_p99_ms: f64,
    pub reconnects: u64,
}

/// Everything reported for one scenario run.
#[derive(Debug, Clone, Serialize)]
pub struct Summary {
    pub scenario: String,
    pub system: String,
    pub workload: String,
    pub target_rate: f64,
    pub duration_s: f64,
    pub connections: usize,
    pub scheduled: u64,
    pub ok: u64,
    /// Good answers ÷ scheduled requests.
    pub answered_share: f64,
    /// Good answers ÷ (first scheduled time → last answer).
    pub achieved_rate: f64,
    pub latency_ms: Percentiles,
    pub errors: BTreeMap<String, u64>,
    pub error_total: u64,
    /// Unit of `answers`: `responses` or `cells`.
    pub answers_unit: &'static str,
    pub answers: BTreeMap<String, u64>,
    pub generator: GeneratorHealth,
    pub server: Option<ServerUse>,
    /// Machine-wide CPU during the run, to spot noise from other work.
    pub machine: Option<MachineUse>,
    /// What ran beside the load (a noisy neighbour, held sockets), if
    /// anything.
    pub beside: Option<BesideReport>,
    /// Free-form remarks (verdicts, admin traffic of a storm, ...).
    pub notes: Vec<String>,
    pub timeline: Vec<Window>,
    /// Latency by percentile for the plot (not written to JSON).
    #[serde(skip)]
    pub curve: Vec<(f64, f64)>,
}

/// CPU seconds spent on the whole machine during a run, split by who.
#[derive(Debug, Clone, Serialize)]
pub struct MachineUse {
    pub wall_s: f64,
    /// Busy CPU seconds over all cores (`/proc/stat`: user, nice, system,
    /// irq, softirq).
    pub busy_cpu_s: f64,
    /// CPU time the hypervisor gave to something else while this machine
    /// wanted it (steal): host contention no process here can see.
    pub stolen_cpu_s: f64,
    pub generator_cpu_s: f64,
    /// The server's, when it is a separate process.
    pub server_cpu_s: f64,
    /// The noisy neighbour the tool itself started beside the run (zero
    /// without one): known load, so not counted as other work.
    pub neighbour_cpu_s: f64,
    /// Everything else: other work on the machine competing with the run.
    pub other_cpu_s: f64,
    pub loadavg_1m_before: f64,
}

/// What ran beside one run: a noisy-neighbour process burning CPU, and
/// sockets held open (stalled bodies, idle connections).
#[derive(Debug, Clone, Serialize, Default)]
pub struct BesideReport {
    /// Pid of the neighbour process, when one ran.
    pub neighbour_pid: Option<u32>,
    /// Cores the neighbour burned over the run (its CPU seconds ÷ wall).
    pub neighbour_cores: Option<f64>,
    /// Connections that sent headers and one byte of body (asked, opened,
    /// still open at the end of the run).
    pub stalled_asked: usize,
    pub stalled_opened: usize,
    pub stalled_open_at_end: usize,
    /// Connections opened and never used (asked, opened, open at the end).
    pub idle_asked: usize,
    pub idle_opened: usize,
    pub idle_open_at_end: usize,
    /// Open descriptors of the server process before the sockets were
    /// opened and while they were held (`/proc/<pid>/fd`).
    pub server_fds_before: Option<usize>,
    pub server_fds_held: Option<usize>,
}

impl Summary {
    pub fn of(o: &Outcome) -> Summary {
        let t = &o.tally;
        let error_total = t.errors.values().sum();
        Summary {
            scenario: o.plan.scenario.clone(),
            system: o.plan.system.clone(),
            workload: o.plan.workload.kind.label(),
            target_rate: o.plan.rate,
            duration_s: o.plan.duration.as_secs_f64(),
            connections: o.plan.connections,
            scheduled: o.scheduled,
            ok: t.ok,
            answered_share: if o.scheduled == 0 {
                0.0
            } else {
                t.ok as f64 / o.scheduled as f64
            },
            achieved_rate: t.ok as f64 / o.elapsed.as_secs_f64().max(1e-9),
            latency_ms: Percentiles::of(&t.hist),
            errors: t.errors.clone(),
            error_total,
            answers_unit: if matches!(t.kind, Kind::Matrix { .. }) {
                "cells"
            } else {
                "responses"
            },
            answers: t.answers(),
            generator: GeneratorHealth {
                pacer_late_p99_ms: o.pacer_late.value_at_quantile(0.99) as f64 / 1000.0,
                pacer_late_max_ms: o.pacer_late.max() as f64 / 1000.0,
                pool_wait_p99_ms: t.wait.value_at_quantile(0.99) as f64 / 1000.0,
                reconnects: t.reconnects,
            },
            server: None,
            machine: None,
            beside: None,
            notes: Vec::new(),
            timeline: timeline(&t.samples, 250),
            curve: curve(&t.hist),
        }
    }

    /// Share of answers (or cells) with this fallback reason.
    pub fn reason_share(&self, reason: &str) -> f64 {
        let all: u64 = self.answers.values().sum();
        if all == 0 {
            return 0.0;
        }
        self.reason_count(reason) as f64 / all as f64
    }

    /// Answers (or cells) with this fallback reason.
    pub fn reason_count(&self, reason: &str) -> u64 {
        self.answers
            .iter()
            .filter(|(k, _)| {
                k.rsplit_once('/')
                    .map(|(_, r)| r == reason)
                    .unwrap_or(false)
            })
            .map(|(_, v)| v)
            .sum()
    }

    /// Share of answers (or cells) from the graph: any tier but `heuristic`.
    pub fn graph_share(&self) -> f64 {
        let all: u64 = self.answers.values().sum();
        if all == 0 {
            return 0.0;
        }
        let heuristic: u64 = self
            .answers
            .iter()
            .filter(|(k, _)| k.split('/').next() == Some("heuristic"))
            .map(|(_, v)| v)
            .sum();
        (all - heuristic) as f64 / all as f64
    }
}
