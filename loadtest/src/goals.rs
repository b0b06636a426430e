//! The goals the suite holds its figures against, and the criteria of a
//! capacity-search step, as one table of named constants. The goal texts
//! printed by the suite are formatted from these numbers, so the table and
//! the printed goals cannot drift apart.
//!
//! Where they come from: the load goals are stated in BENCHMARKS.md (the
//! table of the load suite: capacity, half-rate p99, overload, reload
//! storm, server memory); the step criteria in loadtest/README.md
//! ("Capacity search").

/// Single-ETA capacity of hodos as a share of the baseline's capacity.
/// BENCHMARKS.md: "single ETA max sustainable rate ≥ 80% of the baseline's".
pub const ETA_CAPACITY_VS_BASELINE: f64 = 0.8;

/// Rate of the steady runs as a share of the measured capacity.
/// BENCHMARKS.md: "p99 ≤ 2 ms at half that rate".
pub const STEADY_SHARE_OF_CAPACITY: f64 = 0.5;

/// p99 of single ETAs at half the capacity, ms.
/// BENCHMARKS.md: "p99 ≤ 2 ms at half that rate".
pub const STEADY_ETA_P99_MS: f64 = 2.0;

/// Offered rates of the overload runs, as multiples of the capacity.
/// BENCHMARKS.md: "overload 2×" and "overload 3×" (and the 1×50 matrix
/// runs at the same multiples); loadtest/README.md, workload "overload".
pub const OVERLOAD_MULTIPLES: [f64; 2] = [2.0, 3.0];

/// Share of overload requests that must be answered.
/// BENCHMARKS.md: "overload 2×: 100% answered, p99 ≤ 20 ms".
pub const OVERLOAD_ANSWERED_SHARE: f64 = 1.0;

/// p99 of the overload runs, ms.
/// BENCHMARKS.md: "overload 2×: 100% answered, p99 ≤ 20 ms".
pub const OVERLOAD_P99_MS: f64 = 20.0;

/// p99 during the reload storm as a multiple of the steady p99 at the same
/// rate. BENCHMARKS.md: "reload storm: 0 errors, p99 ≤ 1.5× steady".
pub const STORM_P99_VS_STEADY: f64 = 1.5;

/// Resident memory of the server process with the NY region and two
/// customized metrics, MB. BENCHMARKS.md: "server RSS, NY + two customized
/// metrics ≤ 250 MB".
pub const TWO_METRICS_RSS_MB: f64 = 250.0;

/// A capacity step fails when it achieved less than this share of its
/// target rate. loadtest/README.md: "an achieved rate below 95% of the
/// target".
pub const STEP_MIN_ACHIEVED_SHARE: f64 = 0.95;

/// A capacity step fails above this p99, ms (default of `--p99-limit-ms`).
/// loadtest/README.md: "p99 above `--p99-limit-ms` (10)".
pub const STEP_P99_LIMIT_MS: f64 = 10.0;

/// A capacity step fails when more than this share of answers was shed
/// (`overloaded`, `budget_exceeded`; default of `--max-shed-share`).
/// loadtest/README.md: "more than `--max-shed-share` (1%) of answers shed".
pub const STEP_MAX_SHED_SHARE: f64 = 0.01;
