//! Prometheus metrics: names, labels and the process-wide recorder.
//!
//! All series are prefixed `hodos_` and follow Prometheus naming (base units,
//! `_total` for counters, `_seconds` for durations). Labels are closed sets:
//! the matched route template (never the raw URI), the tier, the fallback
//! reason, the region name from configuration, an outcome word.

use crate::tier::{FallbackReason, Tier};
use metrics_exporter_prometheus::{Matcher, PrometheusBuilder, PrometheusHandle};
use std::sync::OnceLock;

pub const REQUEST_DURATION: &str = "hodos_request_duration_seconds";
pub const ANSWERS: &str = "hodos_answers_total";
pub const FALLBACKS: &str = "hodos_fallbacks_total";
pub const LIVE_AGE: &str = "hodos_live_data_age_seconds";
pub const SNAPSHOT_GENERATION: &str = "hodos_snapshot_generation";
pub const CUSTOMIZATION: &str = "hodos_customization_seconds";
pub const RELOADS: &str = "hodos_reloads_total";
pub const REJECTED_ROWS: &str = "hodos_rejected_rows_total";
pub const GRAPH_IN_FLIGHT: &str = "hodos_graph_work_in_flight";
pub const REGION_READY: &str = "hodos_region_ready";

/// The process-wide recorder (installed once; later calls share it).
pub fn handle() -> PrometheusHandle {
    static H: OnceLock<PrometheusHandle> = OnceLock::new();
    H.get_or_init(|| {
        let recorder = PrometheusBuilder::new()
            .set_buckets_for_metric(
                Matcher::Full(REQUEST_DURATION.into()),
                &[
                    0.0001, 0.00025, 0.0005, 0.001, 0.002, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25,
                    1.0, 5.0,
                ],
            )
            .and_then(|b| {
                b.set_buckets_for_metric(
                    Matcher::Full(CUSTOMIZATION.into()),
                    &[0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 10.0],
                )
            })
            .expect("static bucket lists are non-empty")
            .build_recorder();
        let handle = recorder.handle();
        // Another recorder may already be installed (a test harness); then
        // this handle still renders our series only if ours is global, so
        // install it and ignore the "already set" case.
        let _ = metrics::set_global_recorder(recorder);
        describe();
        handle
    })
    .clone()
}

fn describe() {
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
        REGION_READY,
        "1 when the region serves from a graph, 0 when degraded."
    );
}

pub fn answer(route: &'static str, tier: Tier, reason: Option<FallbackReason>, n: u64) {
    metrics::counter!(ANSWERS, "route" => route, "tier" => tier.as_str()).increment(n);
    if let Some(r) = reason {
        metrics::counter!(FALLBACKS, "route" => route, "reason" => r.as_str()).increment(n);
    }
}

/// Pre-registers every labelled series at zero so dashboards see them from
/// the first scrape.
pub fn register_zero(routes: &[&'static str], regions: &[String]) {
    for &route in routes {
        for t in Tier::ALL {
            metrics::counter!(ANSWERS, "route" => route, "tier" => t.as_str()).increment(0);
        }
        for r in FallbackReason::ALL {
            metrics::counter!(FALLBACKS, "route" => route, "reason" => r.as_str()).increment(0);
        }
    }
    for region in regions {
        for table in ["historical", "live", "artifact"] {
            for outcome in ["accepted", "rejected", "failed"] {
                metrics::counter!(RELOADS, "region" => region.clone(), "table" => table, "outcome" => outcome)
                    .increment(0);
            }
        }
    }
    metrics::gauge!(GRAPH_IN_FLIGHT).set(0.0);
}
