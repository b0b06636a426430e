//! The Prometheus exporter: the process-wide recorder that renders the
//! series [`hodos_serving::metrics`] names and records, for `GET /metrics`.

use hodos_serving::metrics::{
    describe, CUSTOMIZATION, REQUEST_DURATION, TRIP_ABS_PCT_ERROR, TRIP_LOG_ERROR,
};
use metrics_exporter_prometheus::{Matcher, PrometheusBuilder, PrometheusHandle};
use std::sync::OnceLock;

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
            .and_then(|b| {
                // ln(estimate/actual): ±0.1 is about ±10 %, ±0.7 a factor of 2.
                b.set_buckets_for_metric(
                    Matcher::Full(TRIP_LOG_ERROR.into()),
                    &[
                        -1.5, -1.0, -0.7, -0.5, -0.3, -0.2, -0.1, -0.05, 0.0, 0.05, 0.1, 0.2, 0.3,
                        0.5, 0.7, 1.0, 1.5,
                    ],
                )
            })
            .and_then(|b| {
                b.set_buckets_for_metric(
                    Matcher::Full(TRIP_ABS_PCT_ERROR.into()),
                    &[0.05, 0.1, 0.2, 0.3, 0.5, 0.75, 1.0, 2.0, 5.0],
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
