//! One run as data: the `Plan` the engine is given (target, workload,
//! rate, bounds) and the `Outcome` it returns (what was scheduled, the
//! merged tally, the pacer's own lateness, the elapsed time).

use crate::model::tally::Tally;
use crate::workload::Workload;
use hdrhistogram::Histogram;
use std::net::SocketAddr;
use std::time::Duration;

/// One run at one rate.
#[derive(Debug, Clone)]
pub struct Plan {
    /// Scenario name (report key).
    pub scenario: String,
    /// `hodos` or `baseline`.
    pub system: String,
    pub target: SocketAddr,
    pub workload: Workload,
    /// Arrivals per second.
    pub rate: f64,
    /// No ticket is scheduled after this.
    pub duration: Duration,
    /// No more tickets than this.
    pub max_requests: u64,
    /// Size of the connection pool.
    pub connections: usize,
    /// Longest wait for one answer once sent.
    pub request_timeout: Duration,
    /// How long after the last scheduled time answers are still awaited.
    pub drain: Duration,
    /// Run the pacer thread at the lowest real-time priority.
    pub realtime_pacer: bool,
}

/// What one run measured.
#[derive(Debug)]
pub struct Outcome {
    pub plan: Plan,
    /// Tickets the pacer released.
    pub scheduled: u64,
    /// Merged counts and latencies of all connections.
    pub tally: Tally,
    /// How late the pacer released tickets (µs): the generator's own error.
    pub pacer_late: Histogram<u64>,
    /// From the first scheduled time to the last answer.
    pub elapsed: Duration,
}
