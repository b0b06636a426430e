//! What the suite records: capacity searches and their steps, memory
//! readings, overload runs, the goals with their verdicts (all written to
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
}

/// One goal and how the run did against it.
#[derive(Debug, Clone, Serialize)]
pub struct Goal {
    pub goal: String,
    pub measured: String,
    pub pass: Option<bool>,
}
