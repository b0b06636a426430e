//! The operator files in `config/` name only series hodos really exports.
//!
//! A server on 127.0.0.1 port 0 (the test city) answers an ETA and a
//! matrix, takes one live observation and scores two completed trips,
//! then `/metrics` is scraped (with
//! `prometheus-parse`). Every `hodos_*` series in the Prometheus rules
//! (`config/prometheus/hodos-rules.yml`) and in the dashboard definition
//! (`config/grafana/hodos-dashboard.json`, which must parse as JSON with
//! panels and targets) must be a family in that scrape (a histogram's
//! `_bucket`, `_sum` and `_count` count as its family), and every
//! `hodos:*` recording a panel uses must be recorded by the rules. The
//! rules' own syntax and alerts are checked by promtool in `.ci/run`.

use hodos_test_service::running::{client, start};
use hodos_test_service::service::{at, city, config_text, TOKEN};
use serde_json::{json, Value};
use std::collections::BTreeSet;
use std::time::Duration;

/// Tokens of `text` that start with `prefix` and continue with
/// `[a-z0-9_:]`.
fn names(text: &str, prefix: &str) -> BTreeSet<String> {
    let mut out = BTreeSet::new();
    let mut rest = text;
    while let Some(i) = rest.find(prefix) {
        let tail = &rest[i..];
        let end = tail
            .find(|c: char| !(c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_' || c == ':'))
            .unwrap_or(tail.len());
        out.insert(tail[..end].to_string());
        rest = &tail[end..];
    }
    out
}

fn root(p: &str) -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join(p)
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn rules_and_dashboard_name_exported_series() {
    // Reads the process-wide metrics: alone in a child process.
    if !hodos_testkit::child::alone(module_path!(), "rules_and_dashboard_name_exported_series") {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let server = start(&config_text(
        &city().artifact,
        &dir.path().join("state"),
        "",
    ))
    .await;
    let (public, admin) = (server.public, server.admin);
    let client = client();
    let (x, y) = (at(0.2, 0.2), at(0.7, 0.8));
    let pt = |p: hodos::engine::geo::LatLon| json!({"lat": p.lat, "lon": p.lon});
    let r = client
        .post(format!("http://{public}/v1/eta"))
        .json(&json!({"from": pt(x), "to": pt(y)}))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 200);
    let r = client
        .post(format!("http://{public}/v1/eta/matrix"))
        .json(&json!({"from": [pt(x)], "to": [pt(y), pt(x)]}))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 200);
    let leaving = chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    let trips = format!(
        "id,from_lat,from_lon,to_lat,to_lon,leaving,duration_s,distance_m,vehicle,served_eta_s,served_tier,served_snapshot\n\
         a,{},{},{},{},{leaving},600,,,500,historical,\nb,{},{},{},{},{leaving},300,,,,,\n",
        x.lat, x.lon, y.lat, y.lon, y.lat, y.lon, x.lat, x.lon
    );
    let r = client
        .post(format!("http://{admin}/admin/trips"))
        .bearer_auth(TOKEN)
        .header("content-type", "text/csv")
        .body(trips)
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 200);
    // One live observation, so the live-age gauge exists.
    let obs = json!([{"segment": 0, "kmh": 30.0, "observed_at": leaving, "samples": 1}]);
    let r = client
        .post(format!("http://{admin}/admin/regions/testcity/live"))
        .bearer_auth(TOKEN)
        .json(&obs)
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 200);
    let mut text = String::new();
    for _ in 0..100 {
        text = client
            .get(format!("http://{public}/metrics"))
            .send()
            .await
            .unwrap()
            .text()
            .await
            .unwrap();
        if text.contains("\nhodos_live_data_age_seconds{") {
            break;
        }
        tokio::time::sleep(Duration::from_millis(100)).await;
    }
    server.stop().await;

    let scrape = prometheus_parse::Scrape::parse(text.lines().map(|l| Ok(l.to_string()))).unwrap();
    let mut exported: BTreeSet<String> = BTreeSet::new();
    for s in &scrape.samples {
        exported.insert(s.metric.clone());
        // prometheus-parse folds a histogram's series into one sample.
        if matches!(s.value, prometheus_parse::Value::Histogram(_)) {
            for suffix in ["_bucket", "_sum", "_count"] {
                exported.insert(format!("{}{suffix}", s.metric));
            }
        }
        for suffix in ["_bucket", "_sum", "_count"] {
            if let Some(base) = s.metric.strip_suffix(suffix) {
                exported.insert(base.to_string());
            }
        }
    }
    assert!(exported.contains("hodos_trip_log_error"), "{text}");

    let rules = std::fs::read_to_string(root("config/prometheus/hodos-rules.yml")).unwrap();
    let used_by_rules: BTreeSet<String> = rules
        .lines()
        .filter(|l| !l.trim_start().starts_with('#'))
        .flat_map(|l| names(l, "hodos_"))
        .collect();
    assert!(used_by_rules.len() >= 8, "{used_by_rules:?}");
    for n in &used_by_rules {
        assert!(
            exported.contains(n),
            "the rules use {n}, which /metrics does not export"
        );
    }
    let recorded: BTreeSet<String> = rules
        .lines()
        .filter_map(|l| l.trim().strip_prefix("- record: "))
        .map(|s| s.trim().to_string())
        .collect();

    let dash: Value = serde_json::from_str(
        &std::fs::read_to_string(root("config/grafana/hodos-dashboard.json")).unwrap(),
    )
    .expect("the dashboard is JSON");
    let panels = dash["panels"].as_array().expect("panels");
    assert!(panels.len() >= 10);
    for p in panels {
        let targets = p["targets"].as_array().expect("targets");
        assert!(!targets.is_empty(), "panel {} has no query", p["title"]);
        for t in targets {
            let expr = t["expr"].as_str().expect("expr");
            for n in names(expr, "hodos_") {
                assert!(
                    exported.contains(&n),
                    "panel {} uses {n}, not exported",
                    p["title"]
                );
            }
            for n in names(expr, "hodos:") {
                assert!(
                    recorded.contains(&n),
                    "panel {} uses {n}, not recorded by the rules",
                    p["title"]
                );
            }
        }
    }
}
