//! Metric names and their recording: what the serving core counts.
//!
//! All series are prefixed `hodos_` and follow Prometheus naming (base units,
//! `_total` for counters, `_seconds` for durations). Labels are closed sets:
//! the matched route template (never the raw URI), the tier, the fallback
//! reason, the region name from configuration, an outcome word.
//!
//! Recording goes through the `metrics` facade; which exporter (if any)
//! renders the series is the HTTP layer's business
//! (its `exporter` module).

use crate::tier::{FallbackReason, Tier};
use metrics::SharedString;

pub const REQUEST_DURATION: &str = "hodos_request_duration_seconds";
pub const ANSWERS: &str = "hodos_answers_total";
pub const FALLBACKS: &str = "hodos_fallbacks_total";
pub const LIVE_AGE: &str = "hodos_live_data_age_seconds";
/// Age of the serving historical table (since it was loaded or uploaded).
pub const HISTORICAL_AGE: &str = "hodos_historical_data_age_seconds";
pub const SNAPSHOT_GENERATION: &str = "hodos_snapshot_generation";
pub const CUSTOMIZATION: &str = "hodos_customization_seconds";
pub const RELOADS: &str = "hodos_reloads_total";
pub const REJECTED_ROWS: &str = "hodos_rejected_rows_total";
pub const GRAPH_IN_FLIGHT: &str = "hodos_graph_work_in_flight";
pub const REGION_READY: &str = "hodos_region_ready";
pub const BUILD_INFO: &str = "hodos_build_info";

/// The `region` label of answers outside every region.
pub const NO_REGION: &str = "none";
pub const STATE_FILES_REFUSED: &str = "hodos_state_files_refused_total";
/// `ln(estimate / actual)` of completed trips posted to the admin API.
pub const TRIP_LOG_ERROR: &str = "hodos_trip_log_error";
/// `|estimate − actual| / actual` of the same trips.
pub const TRIP_ABS_PCT_ERROR: &str = "hodos_trip_abs_pct_error";
/// Completed trips posted, by region and outcome (`recorded`, `refused`).
pub const TRIPS_RECORDED: &str = "hodos_trips_recorded_total";

/// Describes every series (units and help text) to the installed recorder.
pub fn describe() {
    use metrics::{describe_counter, describe_gauge, describe_histogram, Unit};
    describe_histogram!(
        REQUEST_DURATION,
        Unit::Seconds,
        "Request latency by matched route and answering tier."
    );
    describe_counter!(ANSWERS, "Answers (ETAs or matrix cells) by route and tier.");
    describe_counter!(
        FALLBACKS,
        "Answers below the live tier, by route and fallback reason."
    );
    describe_gauge!(
        HISTORICAL_AGE,
        "Seconds since the serving historical table was loaded or uploaded, by region."
    );
    describe_gauge!(
        LIVE_AGE,
        Unit::Seconds,
        "Age of the newest live observation per region."
    );
    describe_gauge!(
        SNAPSHOT_GENERATION,
        "Generation of the serving snapshot per region."
    );
    describe_histogram!(
        CUSTOMIZATION,
        Unit::Seconds,
        "Time to customize a metric, by region and kind."
    );
    describe_counter!(
        RELOADS,
        "Table and artifact reloads by region, table and outcome."
    );
    describe_counter!(
        REJECTED_ROWS,
        "Rejected input rows by region, table and kind."
    );
    describe_gauge!(GRAPH_IN_FLIGHT, "Requests doing graph work right now.");
    describe_gauge!(
        BUILD_INFO,
        "Always 1; the labels name the running build (version, commit, profile)."
    );
    describe_gauge!(
        REGION_READY,
        "1 when the region serves from a graph, 0 when degraded."
    );
    describe_histogram!(
        TRIP_LOG_ERROR,
        "ln(estimate / actual) of posted completed trips, by region, tier and source (replayed: what hodos answers now for the trip's departure; served: the ETA the caller kept). Negative: too fast."
    );
    describe_histogram!(
        TRIP_ABS_PCT_ERROR,
        "|estimate - actual| / actual of posted completed trips (a fraction: 0.2 is 20 %), by region, tier and source."
    );
    describe_counter!(
        TRIPS_RECORDED,
        "Completed trips posted to the admin API, by region (none outside every region) and outcome (recorded, refused)."
    );
    describe_counter!(
        STATE_FILES_REFUSED,
        "Saved state files refused at load (damaged, wrong kind, no longer valid) or torn write-ahead log tails, by region and file (historical, live, wal)."
    );
}

/// Counts `n` answers of one route, region, tier and reason. `region` is a
/// configured region name or `none` (see `Catalog::region_label`).
pub fn answer(
    route: &'static str,
    region: SharedString,
    tier: Tier,
    reason: Option<FallbackReason>,
    n: u64,
) {
    if let Some(r) = reason {
        metrics::counter!(FALLBACKS, "route" => route, "region" => region.clone(), "reason" => r.as_str())
            .increment(n);
    }
    metrics::counter!(ANSWERS, "route" => route, "region" => region, "tier" => tier.as_str())
        .increment(n);
}

/// What identifies this build: crate version, git commit (set by the
/// build script, `unknown` outside a checkout) and profile.
pub fn build_labels() -> [(&'static str, &'static str); 3] {
    [
        ("version", env!("CARGO_PKG_VERSION")),
        ("commit", env!("HODOS_GIT_COMMIT")),
        (
            "profile",
            if cfg!(debug_assertions) {
                "debug"
            } else {
                "release"
            },
        ),
    ]
}

/// Pre-registers every labelled series at zero so dashboards see them from
/// the first scrape.
pub fn register_zero(routes: &[&'static str], regions: &[String]) {
    let labels = regions
        .iter()
        .map(|r| SharedString::from_owned(r.clone()))
        .chain([SharedString::const_str(NO_REGION)]);
    for region in labels {
        for &route in routes {
            for t in Tier::ALL {
                metrics::counter!(ANSWERS, "route" => route, "region" => region.clone(), "tier" => t.as_str())
                    .increment(0);
            }
            for r in FallbackReason::ALL {
                metrics::counter!(FALLBACKS, "route" => route, "region" => region.clone(), "reason" => r.as_str())
                    .increment(0);
            }
        }
    }
    let [v, c, p] = build_labels();
    metrics::gauge!(BUILD_INFO, v.0 => v.1, c.0 => c.1, p.0 => p.1).set(1.0);
    for region in regions {
        for table in ["historical", "live", "artifact"] {
            for outcome in ["accepted", "unchanged", "rejected", "failed"] {
                metrics::counter!(RELOADS, "region" => region.clone(), "table" => table, "outcome" => outcome)
                    .increment(0);
            }
        }
    }
    for region in regions {
        for file in ["historical", "live", "wal"] {
            metrics::counter!(STATE_FILES_REFUSED, "region" => region.clone(), "file" => file)
                .increment(0);
        }
    }
    metrics::gauge!(GRAPH_IN_FLIGHT).set(0.0);
}
