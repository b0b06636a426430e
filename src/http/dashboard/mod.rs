//! The dashboard a person keeps open: `GET /dashboard` (one page with its
//! script and style inline), the vendored chart library
//! (`/dashboard/uplot.js`, `/dashboard/uplot.css`: uPlot, MIT, in
//! `vendor/`), and `GET /dashboard/data`, a JSON snapshot of the counters
//! the page polls every two seconds and turns into rates and quantiles.
//!
//! The snapshot is read from the same Prometheus registry `/metrics`
//! renders (its text, parsed here), so the page and `/metrics` can never
//! disagree, and it needs no Prometheus server. It sits on the public
//! listener, read-only, beside `/metrics`, which already publishes the
//! same figures there; the admin listener's token would have to live in
//! the browser to poll it.
//!
//! # Layout
//!
//! - this file: the handlers and [`Snapshot`], built from the exposition
//!   text by [`snapshot`];
//! - `page.html`: the page (its words and look are hodos's own);
//! - `vendor/`: uPlot 1.6.32, unmodified.

use super::AppState;
use axum::extract::State;
use axum::http::header;
use axum::response::IntoResponse;
use axum::Json;
use serde::Serialize;
use std::collections::BTreeMap;

const PAGE: &str = include_str!("page.html");
const UPLOT_JS: &str = include_str!("vendor/uPlot.iife.min.js");
const UPLOT_CSS: &str = include_str!("vendor/uPlot.min.css");

pub async fn page() -> impl IntoResponse {
    (
        [
            (header::CONTENT_TYPE, "text/html; charset=utf-8"),
            (header::CACHE_CONTROL, "no-cache"),
        ],
        PAGE,
    )
}

pub async fn uplot_js() -> impl IntoResponse {
    (
        [
            (header::CONTENT_TYPE, "text/javascript; charset=utf-8"),
            (header::CACHE_CONTROL, "max-age=86400"),
        ],
        UPLOT_JS,
    )
}

pub async fn uplot_css() -> impl IntoResponse {
    (
        [
            (header::CONTENT_TYPE, "text/css; charset=utf-8"),
            (header::CACHE_CONTROL, "max-age=86400"),
        ],
        UPLOT_CSS,
    )
}

pub async fn data(State(state): State<AppState>) -> Json<Snapshot> {
    Json(snapshot(&state.prometheus.render()))
}

/// Latency of the answer routes: cumulative counts per upper bound.
#[derive(Debug, Clone, Default, Serialize, PartialEq)]
pub struct Latency {
    pub count: f64,
    pub sum_s: f64,
    /// `(le, cumulative count)`, ascending; `+Inf` as `null`.
    pub buckets: Vec<(Option<f64>, f64)>,
}

/// Completed trips scored, per tier.
#[derive(Debug, Clone, Default, Serialize, PartialEq)]
pub struct TripError {
    pub count: f64,
    /// Sum of |estimate − actual| / actual.
    pub ape_sum: f64,
}

/// The counters at one moment (every figure is a running total since the
/// process started, or a current value; the page differences them).
#[derive(Debug, Clone, Default, Serialize, PartialEq)]
pub struct Snapshot {
    /// Milliseconds since 1970.
    pub at_ms: i64,
    /// Answers by region and tier (ETAs and matrix cells).
    pub answers: BTreeMap<String, BTreeMap<String, f64>>,
    /// Answers with a fallback reason, by region and reason.
    pub fallbacks: BTreeMap<String, BTreeMap<String, f64>>,
    /// Latency of `/v1/*` requests.
    pub latency: Latency,
    /// Age of the newest live observation, seconds, by region.
    pub live_age_s: BTreeMap<String, f64>,
    /// Age of the serving historical table, seconds, by region.
    pub historical_age_s: BTreeMap<String, f64>,
    /// 1 when the region serves from a graph.
    pub region_ready: BTreeMap<String, f64>,
    /// Table and reload outcomes (accepted, rejected, failed, unchanged).
    pub reloads: BTreeMap<String, f64>,
    /// Completed trips scored (source `replayed`), by tier.
    pub trips: BTreeMap<String, TripError>,
}

/// A series' labels, as `(name, value)` pairs.
type Labels<'a> = Vec<(&'a str, &'a str)>;

/// One exposition line: name, labels, value.
fn parse_line(line: &str) -> Option<(&str, Labels<'_>, f64)> {
    if line.starts_with('#') || line.trim().is_empty() {
        return None;
    }
    let (head, value) = line.rsplit_once(' ')?;
    let value: f64 = match value {
        "+Inf" => f64::INFINITY,
        "-Inf" => f64::NEG_INFINITY,
        v => v.parse().ok()?,
    };
    let (name, labels) = match head.split_once('{') {
        Some((n, rest)) => (n, rest.strip_suffix('}')?),
        None => (head, ""),
    };
    let mut out = Vec::new();
    // Label values of hodos's own series hold no `",` sequence.
    for pair in labels.split("\",").filter(|p| !p.is_empty()) {
        let (k, v) = pair.split_once("=\"")?;
        out.push((k.trim_start_matches(','), v.trim_end_matches('"')));
    }
    Some((name, out, value))
}

fn label<'a>(labels: &[(&str, &'a str)], key: &str) -> &'a str {
    labels
        .iter()
        .find(|(k, _)| *k == key)
        .map(|(_, v)| *v)
        .unwrap_or("")
}

/// The snapshot of an exposition text.
pub fn snapshot(text: &str) -> Snapshot {
    use hodos_serving::metrics as m;
    let mut s = Snapshot {
        at_ms: chrono::Utc::now().timestamp_millis(),
        ..Snapshot::default()
    };
    let mut buckets: BTreeMap<u64, (Option<f64>, f64)> = BTreeMap::new();
    let add = |map: &mut BTreeMap<String, f64>, k: &str, v: f64| {
        *map.entry(k.to_string()).or_default() += v;
    };
    for line in text.lines() {
        let Some((name, labels, v)) = parse_line(line) else {
            continue;
        };
        let region = label(&labels, "region");
        let answer_route = label(&labels, "route").starts_with("/v1/");
        match name {
            n if n == m::ANSWERS => add(
                s.answers.entry(region.into()).or_default(),
                label(&labels, "tier"),
                v,
            ),
            n if n == m::FALLBACKS => add(
                s.fallbacks.entry(region.into()).or_default(),
                label(&labels, "reason"),
                v,
            ),
            n if n == m::LIVE_AGE => {
                s.live_age_s.insert(region.into(), v);
            }
            n if n == m::HISTORICAL_AGE => {
                s.historical_age_s.insert(region.into(), v);
            }
            n if n == m::REGION_READY => {
                s.region_ready.insert(region.into(), v);
            }
            n if n == m::RELOADS => add(&mut s.reloads, label(&labels, "outcome"), v),
            _ if name == format!("{}_count", m::REQUEST_DURATION) && answer_route => {
                s.latency.count += v
            }
            _ if name == format!("{}_sum", m::REQUEST_DURATION) && answer_route => {
                s.latency.sum_s += v
            }
            _ if name == format!("{}_bucket", m::REQUEST_DURATION) && answer_route => {
                let le = match label(&labels, "le") {
                    "+Inf" => None,
                    x => x.parse::<f64>().ok(),
                };
                let key = le.map_or(u64::MAX, f64::to_bits);
                buckets.entry(key).or_insert((le, 0.0)).1 += v;
            }
            _ if label(&labels, "source") == "replayed"
                && (name == format!("{}_count", m::TRIP_ABS_PCT_ERROR)
                    || name == format!("{}_sum", m::TRIP_ABS_PCT_ERROR)) =>
            {
                let t = s.trips.entry(label(&labels, "tier").into()).or_default();
                if name.ends_with("_count") {
                    t.count += v;
                } else {
                    t.ape_sum += v;
                }
            }
            _ => {}
        }
    }
    // Positive bounds sort by their bits; +Inf (u64::MAX) last.
    s.latency.buckets = buckets.into_values().collect();
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The Prometheus text exposition format (prometheus.io, "Exposition
    /// formats": `name{label="value",...} value`), on lines as the
    /// exporter writes them.
    #[test]
    fn snapshot_sums_what_the_exposition_says() {
        let text = r#"# HELP hodos_answers_total Answers.
# TYPE hodos_answers_total counter
hodos_answers_total{route="/v1/eta",region="a",tier="live"} 7
hodos_answers_total{route="/v1/eta/matrix",region="a",tier="live"} 5
hodos_answers_total{route="/v1/eta",region="none",tier="heuristic"} 2
hodos_fallbacks_total{route="/v1/eta",region="none",reason="outside_regions"} 2
hodos_request_duration_seconds_bucket{route="/v1/eta",tier="live",region="a",le="0.001"} 3
hodos_request_duration_seconds_bucket{route="/v1/eta",tier="live",region="a",le="+Inf"} 4
hodos_request_duration_seconds_bucket{route="/metrics",tier="none",region="none",le="+Inf"} 9
hodos_request_duration_seconds_count{route="/v1/eta",tier="live",region="a"} 4
hodos_trip_abs_pct_error_sum{region="a",tier="live",source="replayed"} 0.5
hodos_trip_abs_pct_error_count{region="a",tier="live",source="replayed"} 2
hodos_trip_abs_pct_error_count{region="a",tier="live",source="served"} 9
hodos_live_data_age_seconds{region="a"} 12.5
"#;
        let s = snapshot(text);
        assert_eq!(s.answers["a"]["live"], 12.0);
        assert_eq!(s.answers["none"]["heuristic"], 2.0);
        assert_eq!(s.fallbacks["none"]["outside_regions"], 2.0);
        assert_eq!(s.latency.count, 4.0);
        assert_eq!(s.latency.buckets, vec![(Some(0.001), 3.0), (None, 4.0)]);
        assert_eq!(
            s.trips["live"],
            TripError {
                count: 2.0,
                ape_sum: 0.5
            }
        );
        assert_eq!(s.live_age_s["a"], 12.5);
    }
}
