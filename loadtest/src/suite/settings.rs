//! The knobs shared by every scenario: pool sizes, run lengths, the
//! capacity-search criteria, the storm's schedule, the noise guard. Built
//! from the command line (`cli`) or, for the smoke, from its defaults.
//! `Wire` is the connections and drain of one run (`Settings::wire` for
//! an ordinary one).

use std::time::Duration;

/// Knobs shared by every scenario.
#[derive(Debug, Clone)]
pub struct Settings {
    pub connections: usize,
    pub overload_connections: usize,
    pub request_timeout: Duration,
    pub drain: Duration,
    /// Length of one capacity-search step.
    pub step: Duration,
    pub steady: Duration,
    pub overload: Duration,
    pub storm: Duration,
    /// A step fails when its p99 exceeds this.
    pub p99_limit_ms: f64,
    /// A step fails when more than this share of answers was shed
    /// (`overloaded` or `budget_exceeded`).
    pub max_shed_share: f64,
    pub growth: f64,
    pub refine: u32,
    pub max_rate: f64,
    pub live_every: Duration,
    pub table_every: Duration,
    pub live_batch: usize,
    pub table_edges: usize,
    pub tz: chrono_tz::Tz,
    pub seed: u64,
    /// Hard cap on requests of any one run.
    pub max_requests: u64,
    /// Run a step that failed on its tail alone once more.
    pub confirm: bool,
    pub realtime_pacer: bool,
    /// Longest wait for a quiet machine before each run.
    pub quiet_per_run: Duration,
    /// Runs redone when other work or the hypervisor spoiled them.
    pub noise_retries: u32,
    /// Whether noisy runs may be redone (off while admin streams run).
    pub retry_noisy: bool,
}

/// How one run's requests go out: over how many connections, and how long
/// answers are awaited after the last send.
#[derive(Debug, Clone, Copy)]
pub struct Wire {
    pub connections: usize,
    pub drain: Duration,
}

impl Settings {
    /// The connections and drain of an ordinary run.
    pub fn wire(&self) -> Wire {
        Wire {
            connections: self.connections,
            drain: self.drain,
        }
    }
}
