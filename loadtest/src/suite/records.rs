//! What the suite records: capacity searches and their steps, memory
//! readings, overload runs, the no-shed and held-sockets runs, the live
//! batch, what runs beside a run, the goals with their verdicts (all written to
//! `results.json`), and the figures kept for the goals until the memory
//! phase is done. Plain data below `ctx` and the scenarios.

use crate::model::Summary;
use serde::Serialize;

/// One capacity-search step's verdict.
#[derive(Debug, Clone, Serialize)]
pub struct Step {
    pub rate: f64,
    pub pass: bool,
    pub why: String,
    pub achieved: f64,
    pub p99_ms: f64,
    pub errors: u64,
    /// Cores taken by other work and by the hypervisor during the step.
    pub other_cores: f64,
    pub stolen_cores: f64,
}

impl Step {
    pub(crate) fn of(rate: f64, why: &Option<String>, s: &Summary) -> Step {
        Step {
            rate,
            pass: why.is_none(),
            why: why.clone().unwrap_or_else(|| "ok".into()),
            achieved: s.achieved_rate,
            p99_ms: s.latency_ms.p99,
            errors: s.error_total,
            other_cores: s
                .machine
                .as_ref()
                .map(|m| m.other_cpu_s / m.wall_s.max(1e-9))
                .unwrap_or(0.0),
            stolen_cores: s
                .machine
                .as_ref()
                .map(|m| m.stolen_cpu_s / m.wall_s.max(1e-9))
                .unwrap_or(0.0),
        }
    }
}

/// A capacity search.
#[derive(Debug, Clone, Serialize)]
pub struct Probe {
    pub scenario: String,
    pub system: String,
    pub workload: String,
    /// The last rate that passed every criterion.
    pub capacity: Option<f64>,
    pub steps: Vec<Step>,
}

/// The capacity of one workload on hodos and on the baseline.
#[derive(Debug, Clone)]
pub struct Capacity {
    pub workload: String,
    pub hodos: Option<f64>,
    pub baseline: Option<f64>,
}

/// Resident memory of the server at one moment.
#[derive(Debug, Clone, Serialize)]
pub struct Memory {
    pub when: String,
    pub rss_mb: f64,
    pub hwm_mb: f64,
    /// Smallest and largest VmRSS over a sampling window, when sampled.
    pub min_rss_mb: Option<f64>,
    pub max_rss_mb: Option<f64>,
}

/// One overload run and, where a baseline runs, the baseline at the same
/// offered rate (the machine's own ceiling for that load).
#[derive(Clone)]
pub struct Overload {
    pub workload: String,
    /// Multiple of the capacity offered.
    pub k: f64,
    pub hodos: Summary,
    pub baseline: Option<Summary>,
}

/// The suite's figures, kept until the memory phase is done.
pub struct SuiteOutcome {
    pub(crate) caps: Vec<Capacity>,
    pub(crate) steady: Option<Summary>,
    pub(crate) overloads: Vec<Overload>,
    /// The steady run just before the storm, at the storm's rate.
    pub(crate) pre: Summary,
    pub(crate) storm: Option<Summary>,
    pub(crate) no_shed: NoShed,
    pub(crate) held: Option<HeldRuns>,
}

/// What the next runs have beside them (set by a scenario, reset after).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum Beside {
    #[default]
    Nothing,
    /// A child process spinning this many threads throughout each run.
    Neighbour { threads: usize },
    /// Stalled bodies and idle sockets held open throughout each run.
    Sockets { stalled: usize, idle: usize },
}

/// The no-shed runs: ETAs at 90% of the capacity, and at 50% beside a
/// noisy neighbour.
#[derive(Clone)]
pub struct NoShed {
    pub at90: Option<Summary>,
    pub neighbour: Option<Summary>,
}

/// The held-sockets runs: a steady ETA run without the sockets, with them,
/// and without them again, at the same rate.
#[derive(Clone)]
pub struct HeldRuns {
    pub before: Summary,
    pub held: Summary,
    pub after: Summary,
}

/// The 100 MiB live batch of the memory phase.
#[derive(Debug, Clone, Serialize)]
pub struct LiveBatch {
    pub bytes: usize,
    pub observations: usize,
    /// HTTP status of the upload (0: no answer).
    pub status: u16,
    pub answer_s: f64,
    /// Server VmRSS just before the upload, MB.
    pub rss_before_mb: f64,
    /// Largest VmRSS sampled (every 50 ms) and VmHWM (reset just before the
    /// upload through `/proc/<pid>/clear_refs`, when allowed) from the
    /// upload until the settle time, MB.
    pub rss_max_sampled_mb: f64,
    pub hwm_mb: f64,
    pub hwm_was_reset: bool,
    /// VmRSS the settle time after the answer, MB.
    pub rss_after_mb: f64,
    pub settle_s: f64,
    pub in_process: bool,
}

/// One goal and how the run did against it.
#[derive(Debug, Clone, Serialize)]
pub struct Goal {
    pub goal: String,
    pub measured: String,
    /// The baseline in the same run, where the goal is a ratio to it (or
    /// where it shows what the machine allows).
    pub baseline: Option<String>,
    pub pass: Option<bool>,
}
