//! The HTTP API through `app()` with `oneshot`: the table of bad inputs and
//! their problem details (RFC 9457), each fallback tier, the admin token,
//! and the documents the service serves checked by outside parsers:
//! Prometheus text (prometheus-parse), GeoJSON (geojson crate, RFC 7946),
//! OpenAPI 3.1 (openapi-spec-validator, PyPI, when installed).

use axum::Router;
use hodos::http::{admin_app, app, AppState};
use hodos_test_service::http::{send, Resp};
use hodos_test_service::service::{at, city, config, TOKEN};
use hodos_test_service::tables;
use hodos_testkit::{HistoricalCsv, LiveCsv};
use serde_json::{json, Value};

async fn post_json(app: &Router, uri: &str, v: &Value) -> Resp {
    send(
        app,
        "POST",
        uri,
        Some("application/json"),
        serde_json::to_vec(v).unwrap(),
        None,
    )
    .await
}

fn coord(p: hodos::engine::geo::LatLon) -> Value {
    json!({"lat": p.lat, "lon": p.lon})
}

async fn state(extra: &str) -> (AppState, tempfile::TempDir) {
    let dir = tempfile::tempdir().unwrap();
    let st = AppState::open(config(dir.path(), extra)).await;
    assert!(
        st.service.degraded().is_empty(),
        "{:?}",
        st.service.degraded()
    );
    (st, dir)
}

/// (what, method, uri, content type, body, status, field or detail fragment)
type Case = (
    &'static str,
    &'static str,
    String,
    Option<&'static str>,
    Vec<u8>,
    u16,
    &'static str,
);

#[tokio::test]
async fn bad_inputs_get_problem_details() {
    let (st, _d) = state("").await;
    let app = app(st);
    let (a, b) = (coord(at(0.3, 0.3)), coord(at(0.7, 0.6)));
    let big = vec![b' '; 300 * 1024];
    let cases: Vec<Case> = vec![
        (
            "malformed JSON",
            "POST",
            "/v1/eta".into(),
            Some("application/json"),
            b"{\"from\": {".to_vec(),
            400,
            "malformed JSON",
        ),
        (
            "wrong type",
            "POST",
            "/v1/eta".into(),
            Some("application/json"),
            serde_json::to_vec(&json!({"from": {"lat": "north", "lon": 1.0}, "to": b})).unwrap(),
            422,
            "from.lat",
        ),
        (
            "missing field",
            "POST",
            "/v1/eta".into(),
            Some("application/json"),
            serde_json::to_vec(&json!({"from": a})).unwrap(),
            422,
            "to",
        ),
        (
            "missing lon",
            "POST",
            "/v1/eta".into(),
            Some("application/json"),
            serde_json::to_vec(&json!({"from": {"lat": 1.0}, "to": b})).unwrap(),
            422,
            "from.lon",
        ),
        (
            "lat out of range",
            "POST",
            "/v1/eta".into(),
            Some("application/json"),
            serde_json::to_vec(&json!({"from": {"lat": 95.0, "lon": 0.0}, "to": b})).unwrap(),
            422,
            "from.lat must be within -90..90",
        ),
        (
            "lon out of range",
            "POST",
            "/v1/eta".into(),
            Some("application/json"),
            serde_json::to_vec(&json!({"from": a, "to": {"lat": 0.0, "lon": -181.0}})).unwrap(),
            422,
            "to.lon must be within -180..180",
        ),
        // JSON has no NaN or Infinity literals (RFC 8259 §6): a syntax error.
        (
            "NaN literal",
            "POST",
            "/v1/eta".into(),
            Some("application/json"),
            br#"{"from":{"lat":NaN,"lon":0},"to":{"lat":0,"lon":0}}"#.to_vec(),
            400,
            "malformed JSON",
        ),
        (
            "Infinity by overflow",
            "POST",
            "/v1/eta".into(),
            Some("application/json"),
            br#"{"from":{"lat":1e999,"lon":0},"to":{"lat":0,"lon":0}}"#.to_vec(),
            400,
            "malformed JSON",
        ),
        (
            "NaN in the query string",
            "GET",
            "/v1/eta?from=NaN,0&to=1,1".into(),
            None,
            vec![],
            422,
            // Refused by the documented pattern (decimal digits only).
            "from",
        ),
        (
            "inf in the query string",
            "GET",
            "/v1/eta?from=0,inf&to=1,1".into(),
            None,
            vec![],
            422,
            // Refused by the documented pattern (decimal digits only).
            "from",
        ),
        (
            "empty matrix",
            "POST",
            "/v1/eta/matrix".into(),
            Some("application/json"),
            serde_json::to_vec(&json!({"from": [], "to": [b]})).unwrap(),
            422,
            "from must list at least one coordinate",
        ),
        (
            "matrix over the cell limit",
            "POST",
            "/v1/eta/matrix".into(),
            Some("application/json"),
            serde_json::to_vec(&json!({"from": vec![a.clone(); 201], "to": vec![b.clone(); 200]}))
                .unwrap(),
            422,
            "the limit is 40000",
        ),
        (
            "body over the size limit",
            "POST",
            "/v1/eta".into(),
            Some("application/json"),
            big,
            413,
            "over the limit",
        ),
        (
            "unknown body field",
            "POST",
            "/v1/eta".into(),
            Some("application/json"),
            serde_json::to_vec(&json!({"from": a, "to": b, "avoid": "tolls"})).unwrap(),
            422,
            "unknown field",
        ),
        (
            "unknown query parameter",
            "GET",
            "/v1/eta?from=1,1&to=2,2&mode=walk".into(),
            None,
            vec![],
            422,
            "mode is not a known parameter",
        ),
        (
            "unparseable leaving",
            "POST",
            "/v1/eta".into(),
            Some("application/json"),
            serde_json::to_vec(&json!({"from": a, "to": b, "leaving": "tomorrow at 8"})).unwrap(),
            422,
            "leaving must be an RFC 3339 date-time",
        ),
        (
            "unparseable leaving (GET)",
            "GET",
            "/v1/eta?from=1,1&to=2,2&leaving=08:00".into(),
            None,
            vec![],
            422,
            "leaving",
        ),
        (
            "zero budget",
            "POST",
            "/v1/eta".into(),
            Some("application/json"),
            serde_json::to_vec(&json!({"from": a, "to": b, "budget_ms": 0})).unwrap(),
            422,
            "budget_ms must be at least 1",
        ),
        (
            "negative budget",
            "POST",
            "/v1/eta".into(),
            Some("application/json"),
            serde_json::to_vec(&json!({"from": a, "to": b, "budget_ms": -5})).unwrap(),
            422,
            "budget_ms",
        ),
        (
            "missing query coordinate",
            "GET",
            "/v1/eta?from=1,1".into(),
            None,
            vec![],
            422,
            "to is required",
        ),
        (
            "wrong media type",
            "POST",
            "/v1/eta".into(),
            Some("text/plain"),
            b"hello".to_vec(),
            415,
            "application/json",
        ),
        (
            "unknown path",
            "GET",
            "/v2/teleport".into(),
            None,
            vec![],
            404,
            "no such endpoint",
        ),
    ];
    for (what, method, uri, ct, body, status, needle) in cases {
        let r = send(&app, method, &uri, ct, body, None).await;
        assert_eq!(r.status.as_u16(), status, "{what}: {}", r.text);
        assert_eq!(r.content_type, "application/problem+json", "{what}");
        let p = r.json();
        // RFC 9457 §3.1 members.
        assert_eq!(p["status"], status, "{what}");
        assert!(
            p["type"].is_string() && p["title"].is_string(),
            "{what}: {p}"
        );
        let detail = p["detail"].as_str().unwrap_or_default();
        let field = p["field"].as_str().unwrap_or_default();
        assert!(detail.contains(needle) || field == needle, "{what}: {p}");
    }
}

/// The departure time is `leaving`; the former name `depart_at` is refused
/// like any unknown field (422, `urn:hodos:problem:invalid-field`), in every
/// request shape, with a problem naming the old field and the new one.
/// Source: the API rename documented in `http::dto::request` (the issue
/// "Names of our own"); RFC 9457 §3.1 for the members.
#[tokio::test]
async fn the_former_departure_field_is_refused_naming_leaving() {
    let (st, _d) = state("").await;
    let app = app(st);
    let (a, b) = (coord(at(0.3, 0.3)), coord(at(0.7, 0.6)));
    let when = "2026-12-07T08:15:00+01:00";
    let bodies = [
        ("/v1/eta", json!({"from": a, "to": b, "depart_at": when})),
        ("/v1/route", json!({"from": a, "to": b, "depart_at": when})),
        (
            "/v1/eta/matrix",
            json!({"from": [a], "to": [b], "depart_at": when}),
        ),
    ];
    for (uri, body) in &bodies {
        let r = post_json(&app, uri, body).await;
        assert_eq!(r.status.as_u16(), 422, "{uri}: {}", r.text);
        assert_eq!(r.content_type, "application/problem+json", "{uri}");
        let p = r.json();
        assert_eq!(p["field"], "depart_at", "{uri}: {p}");
        assert_eq!(
            p["detail"], "depart_at is an unknown field; the departure time is `leaving`",
            "{uri}: {p}"
        );
    }
    let r = send(
        &app,
        "GET",
        &format!("/v1/eta?from=1,1&to=2,2&depart_at={when}"),
        None,
        vec![],
        None,
    )
    .await;
    assert_eq!(r.status.as_u16(), 422, "{}", r.text);
    let p = r.json();
    assert_eq!(p["field"], "depart_at", "{p}");
    assert!(p["detail"].as_str().unwrap().contains("`leaving`"), "{p}");
    // The new name is taken in the same places (an answer, not a problem).
    let ok = json!({"from": a, "to": b, "leaving": when});
    for uri in ["/v1/eta", "/v1/route"] {
        let r = post_json(&app, uri, &ok).await;
        assert_eq!(r.status.as_u16(), 200, "{uri}: {}", r.text);
    }
    let r = post_json(
        &app,
        "/v1/eta/matrix",
        &json!({"from": [a], "to": [b], "leaving": when}),
    )
    .await;
    assert_eq!(r.status.as_u16(), 200, "{}", r.text);
    let r = send(
        &app,
        "GET",
        "/v1/eta?from=1,1&to=2,2&leaving=2026-12-07T08:15:00Z",
        None,
        vec![],
        None,
    )
    .await;
    assert_eq!(r.status.as_u16(), 200, "{}", r.text);
}

#[tokio::test]
async fn every_tier_and_reason() {
    let (st, _d) = state("").await;
    let region = st.service.regions[0].clone();
    let pub_app = app(st.clone());
    let admin = admin_app(st.clone());
    let (a, b) = (at(0.25, 0.3), at(0.75, 0.7));
    let trip = json!({"from": coord(a), "to": coord(b), "budget_ms": 2000});

    // No live data yet, no table → free_flow, no_live_data; all of the
    // time on free-flow speeds.
    let r = post_json(&pub_app, "/v1/eta", &trip).await.json();
    assert_eq!(
        (r["tier"].as_str(), r["fallback_reason"].as_str()),
        (Some("free_flow"), Some("no_live_data")),
        "{r}"
    );
    assert_eq!(
        r["sources"],
        json!({"live": 0.0, "historical": 0.0, "free_flow": 1.0})
    );
    let historical_eta = r["eta_s"].as_f64().unwrap();
    assert!(historical_eta > 0.0 && r["meters"].as_f64().unwrap() > 0.0);
    assert!(r["from_snap_m"].as_f64().unwrap() < 500.0);

    // Fresh live observations on every edge (half speed) → live, slower.
    let now = chrono::Utc::now().to_rfc3339();
    let c = city();
    let batch = tables::observations(usize::MAX, 12.0, &now, 3);
    let r = send(
        &admin,
        "POST",
        "/admin/regions/testcity/live",
        Some("application/json"),
        serde_json::to_vec(&batch).unwrap(),
        Some(TOKEN),
    )
    .await;
    assert_eq!(r.status, 200, "{}", r.text);
    assert!(region.refresh_live(true).await);
    let r = post_json(&pub_app, "/v1/eta", &trip).await.json();
    assert_eq!(r["tier"], "live", "{r}");
    assert!(r["fallback_reason"].is_null());
    assert_eq!(
        r["sources"],
        json!({"live": 1.0, "historical": 0.0, "free_flow": 0.0})
    );
    assert!(
        r["eta_s"].as_f64().unwrap() > historical_eta,
        "12 km/h everywhere must be slower: {r} vs {historical_eta}"
    );
    assert!(r["speeds_age_s"].as_f64().unwrap() < 60.0);

    // An artifact reload keeps serving the live tier: the blend for the new
    // graph is customized before the swap. (A reload over an unchanged
    // artifact file keeps the loaded graph, so the file is touched first.)
    std::fs::File::options()
        .write(true)
        .open(&hodos_test_service::service::city().artifact)
        .unwrap()
        .set_modified(std::time::SystemTime::now())
        .unwrap();
    let gen_before = region.status().generation;
    region.reload().await.unwrap();
    assert!(region.status().generation > gen_before);
    let r = post_json(&pub_app, "/v1/eta", &trip).await.json();
    assert_eq!(r["tier"], "live", "right after a reload: {r}");

    // A departure next week is not "now": free_flow (no table), and no
    // fallback reason.
    let later_t = chrono::Utc::now() + chrono::Duration::days(7);
    let later = later_t.to_rfc3339();
    let r = post_json(
        &pub_app,
        "/v1/eta",
        &json!({"from": coord(a), "to": coord(b), "leaving": later, "budget_ms": 2000}),
    )
    .await
    .json();
    assert_eq!(r["tier"], "free_flow", "{r}");
    assert!(r["fallback_reason"].is_null(), "{r}");
    // It names its hour of week (chrono: days since Monday × 24 + hour, in
    // the region's UTC) and the profile that answered; without a table that
    // is the one free-flow profile.
    use chrono::{Datelike, Timelike};
    let hour = later_t.weekday().num_days_from_monday() * 24 + later_t.hour();
    assert_eq!(r["hour_of_week"].as_u64(), Some(u64::from(hour)), "{r}");
    assert_eq!(r["profile"]["index"], 0, "{r}");

    // Observations older than the TTL (600 s) → free_flow (no table),
    // live_stale.
    let old = (chrono::Utc::now() - chrono::Duration::seconds(3600)).to_rfc3339();
    let (st2, _d2) = state("").await;
    let r2 = st2.service.regions[0].clone();
    let stale = tables::observations(50, 20.0, &old, 1);
    r2.put_live(&serde_json::to_vec(&stale).unwrap(), false)
        .await
        .unwrap();
    r2.refresh_live(true).await;
    let r = post_json(&app(st2.clone()), "/v1/eta", &trip).await.json();
    assert_eq!(
        (r["tier"].as_str(), r["fallback_reason"].as_str()),
        (Some("free_flow"), Some("live_stale")),
        "{r}"
    );

    // One fresh observation on a single road of a region without a table:
    // the route is (almost) all free-flow, so never live, and the reason
    // does not claim the region has no live data.
    let (st3, _d3) = state("").await;
    let r3 = st3.service.regions[0].clone();
    let one = tables::observations(1, 20.0, &chrono::Utc::now().to_rfc3339(), 1);
    r3.put_live(&serde_json::to_vec(&one).unwrap(), false)
        .await
        .unwrap();
    assert!(r3.refresh_live(true).await);
    let r = post_json(&app(st3.clone()), "/v1/eta", &trip).await.json();
    assert_eq!(r["tier"], "free_flow", "{r}");
    assert!(
        r["fallback_reason"] == "no_live_on_route" || r["fallback_reason"] == "live_minority",
        "{r}"
    );
    assert!(r["speeds_age_s"].is_null(), "no live age claimed: {r}");

    // Far off-road but inside the coverage → heuristic, off_network.
    let corner = hodos::engine::geo::LatLon::new(c.lo.lat - 0.04, c.lo.lon - 0.04);
    let r = post_json(
        &pub_app,
        "/v1/eta",
        &json!({"from": coord(corner), "to": coord(b)}),
    )
    .await
    .json();
    assert_eq!(
        (r["tier"].as_str(), r["fallback_reason"].as_str()),
        (Some("heuristic"), Some("off_network")),
        "{r}"
    );
    assert!(r["eta_s"].as_f64().unwrap() > 0.0);
    assert!(r["sources"].is_null(), "heuristic answers have no sources");

    // Outside every region → heuristic, outside_regions, no snapshot.
    let r = send(
        &pub_app,
        "GET",
        "/v1/eta?from=10,10&to=10.1,10.1",
        None,
        vec![],
        None,
    )
    .await
    .json();
    assert_eq!(
        (r["tier"].as_str(), r["fallback_reason"].as_str()),
        (Some("heuristic"), Some("outside_regions")),
        "{r}"
    );
    assert!(r["snapshot"].is_null());

    // A tiny budget on a big matrix → budget_exceeded cells, all answered.
    let from: Vec<Value> = (0..150)
        .map(|i| coord(at(0.1 + 0.8 * (i as f64 / 150.0), 0.2)))
        .collect();
    let to: Vec<Value> = (0..150)
        .map(|i| coord(at(0.15, 0.1 + 0.8 * (i as f64 / 150.0))))
        .collect();
    let warm = post_json(
        &pub_app,
        "/v1/eta/matrix",
        &json!({"from": from[..2], "to": to[..2], "budget_ms": 2000}),
    )
    .await;
    assert_eq!(warm.status, 200);
    let r = post_json(
        &pub_app,
        "/v1/eta/matrix",
        &json!({"from": from, "to": to, "budget_ms": 1}),
    )
    .await;
    assert_eq!(r.status, 200, "{}", r.text);
    let m = r.json();
    let tiers: Vec<&str> = m["tier"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|row| row.as_array().unwrap().iter().map(|t| t.as_str().unwrap()))
        .collect();
    let reasons: Vec<Option<&str>> = m["fallback_reason"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|row| row.as_array().unwrap().iter().map(|t| t.as_str()))
        .collect();
    assert_eq!(tiers.len(), 150 * 150);
    assert!(
        reasons.contains(&Some("budget_exceeded")),
        "a 1 ms budget cannot cover 22,500 cells"
    );
    for (t, r) in tiers.iter().zip(&reasons) {
        if *r == Some("budget_exceeded") {
            assert_eq!(*t, "heuristic");
        }
    }
    assert!(m["eta_s"].as_array().unwrap().iter().all(|row| row
        .as_array()
        .unwrap()
        .iter()
        .all(|v| v.as_f64().unwrap() >= 0.0)));

    // Saturated graph concurrency → overloaded, still answered.
    let (st3, _d3) = state("graph_concurrency = 0").await;
    let r = post_json(&app(st3), "/v1/eta", &trip).await;
    assert_eq!(r.status, 200);
    let r = r.json();
    assert_eq!(
        (r["tier"].as_str(), r["fallback_reason"].as_str()),
        (Some("heuristic"), Some("overloaded")),
        "{r}"
    );

    // Admission control: with no request allowed in flight, every answer
    // route sheds to the heuristic tier at once (200, `overloaded`), bad
    // input is still refused, and the in-flight count returns to zero.
    let (st4, _d4) = state("max_in_flight = 0").await;
    let shed_app = app(st4.clone());
    for uri in ["/v1/eta", "/v1/route"] {
        let r = post_json(&shed_app, uri, &trip).await;
        assert_eq!(r.status, 200, "{uri}");
        let r = r.json();
        assert_eq!(
            (r["tier"].as_str(), r["fallback_reason"].as_str()),
            (Some("heuristic"), Some("overloaded")),
            "{uri}: {r}"
        );
        assert!(r["eta_s"].as_f64().unwrap() > 0.0);
    }
    let m = post_json(
        &shed_app,
        "/v1/eta/matrix",
        &json!({"from": from[..2], "to": to[..3]}),
    )
    .await;
    assert_eq!(m.status, 200);
    let m = m.json();
    let reasons: Vec<&str> = m["fallback_reason"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|row| row.as_array().unwrap().iter())
        .map(|v| v.as_str().unwrap())
        .collect();
    assert_eq!(reasons, vec!["overloaded"; 6], "{m}");
    let bad = post_json(
        &shed_app,
        "/v1/eta",
        &json!({"from": {"lat": 91.0, "lon": 0.0}, "to": trip["to"]}),
    )
    .await;
    assert_eq!(
        bad.status, 422,
        "validation still runs when shed: {}",
        bad.text
    );
    let (a, b) = (trip["from"].clone(), trip["to"].clone());
    let q = format!(
        "/v1/eta?from={},{}&to={},{}",
        a["lat"], a["lon"], b["lat"], b["lon"]
    );
    let r = send(&shed_app, "GET", &q, None, Vec::new(), None).await;
    assert_eq!(r.status, 200, "{}", r.text);
    assert_eq!(r.json()["fallback_reason"].as_str(), Some("overloaded"));
    assert_eq!(st4.catalog.admission.in_flight(), 0);
}

#[tokio::test]
async fn unreachable_pair_and_degraded_region() {
    // Two islands of the city's size with no road between them: the
    // artifact is assembled as it is, as `hodos build` keeps only the
    // largest strongly connected component.
    let c = city();
    let gap = (c.hi.lon - c.lo.lon) * 0.7;
    let g = hodos::engine::import::synthetic::islands(10, c.lo, gap);
    let calibration = hodos::engine::calibration::Calibration::fixed(1.3, 30.0);
    let art = hodos::engine::build::assemble("test:two-islands".into(), g.clone(), calibration);
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("islands.hodos");
    art.save(&path).unwrap();
    let text = hodos_test_service::service::config_text(&path, &dir.path().join("state"), "");
    let st = AppState::open(hodos::config::Config::parse(&text).unwrap()).await;
    let a = app(st);
    let (p, q) = (g.node_pos(5), g.node_pos(150));
    let r = post_json(&a, "/v1/eta", &json!({"from": coord(p), "to": coord(q)}))
        .await
        .json();
    assert_eq!(
        (r["tier"].as_str(), r["fallback_reason"].as_str()),
        (Some("heuristic"), Some("unreachable")),
        "{r}"
    );

    // A region whose artifact does not load starts degraded: heuristic
    // answers with region_unavailable; readiness names it.
    let broken = dir.path().join("broken.hodos");
    std::fs::write(&broken, b"not an artifact").unwrap();
    let text = hodos_test_service::service::config_text(&broken, &dir.path().join("state2"), "");
    let st = AppState::open(hodos::config::Config::parse(&text).unwrap()).await;
    assert_eq!(st.service.degraded().len(), 1);
    let a = app(st);
    let r = post_json(&a, "/v1/eta", &json!({"from": coord(p), "to": coord(q)})).await;
    assert_eq!(r.status, 200);
    let r = r.json();
    assert_eq!(
        (r["tier"].as_str(), r["fallback_reason"].as_str()),
        (Some("heuristic"), Some("region_unavailable")),
        "{r}"
    );
    let ready = send(&a, "GET", "/readyz", None, vec![], None).await;
    assert_eq!(
        ready.status, 503,
        "a readiness probe acts on the status code"
    );
    let ready = ready.json();
    assert_eq!(ready["degraded_regions"], 1);
    // No graph: every answer is an estimate (was `degraded` before the
    // readiness states were split), and the instance is not ready.
    assert_eq!(ready["regions"][0]["state"], "estimates_only");
    assert_eq!(ready["status"], "not_ready");
    assert!(
        ready["regions"][0]["reason"]
            .as_str()
            .unwrap()
            .contains("broken.hodos"),
        "{ready}"
    );
}

#[tokio::test]
async fn admin_requires_the_token() {
    let (st, _d) = state("").await;
    let admin = admin_app(st);
    for token in [None, Some("wrong"), Some("")] {
        for (m, uri) in [
            ("GET", "/admin/status"),
            ("POST", "/admin/regions/testcity/reload"),
            ("PUT", "/admin/regions/testcity/historical"),
            ("POST", "/admin/regions/testcity/live"),
        ] {
            let r = send(&admin, m, uri, None, vec![], token).await;
            assert_eq!(r.status, 401, "{m} {uri} with {token:?}");
            assert_eq!(r.content_type, "application/problem+json");
        }
    }
    let r = send(&admin, "GET", "/admin/status", None, vec![], Some(TOKEN)).await;
    assert_eq!(r.status, 200);
    let s = r.json();
    assert_eq!(s["regions"][0]["region"], "testcity");
    assert!(s["regions"][0]["generation"].as_u64().unwrap() >= 1);
    // No table: one free-flow profile for all 168 hours, factor 1.
    let p = &s["regions"][0]["profiles"];
    assert_eq!(p["count"], 1, "{p}");
    assert_eq!(p["exact"], true);
    assert_eq!(p["hour_profile"].as_array().unwrap().len(), 168);
    assert!(p["hour_factor"]
        .as_array()
        .unwrap()
        .iter()
        .all(|f| f == 1.0));
    assert!(p["metric_bytes"].as_u64().unwrap() > 0);
    assert!(p["hour_deviation_max"]
        .as_array()
        .unwrap()
        .iter()
        .all(|d| d == 0.0));
}

#[tokio::test]
async fn rejected_table_is_reported_and_never_served() {
    // Reads the process-wide metrics: alone in a child process.
    if !hodos_testkit::child::alone(
        module_path!(),
        "rejected_table_is_reported_and_never_served",
    ) {
        return;
    }
    let (st, _d) = state("").await;
    let admin = admin_app(st.clone());
    let c = city();
    let mut csv = HistoricalCsv::with_header();
    for (i, (f, t)) in c.edges.iter().take(100).enumerate() {
        // 20% bad rows (speed 0), over the 5% default threshold.
        let v = if i % 5 == 0 { 0.0 } else { 25.0 };
        csv.row(f, t, 10, v);
    }
    let csv = csv.into_string();
    let before = st.service.regions[0].status().generation;
    let r = send(
        &admin,
        "PUT",
        "/admin/regions/testcity/historical",
        Some("text/csv"),
        csv.into_bytes(),
        Some(TOKEN),
    )
    .await;
    assert_eq!(r.status, 422, "{}", r.text);
    let p = r.json();
    assert_eq!(p["report"]["rejected"], true, "{p}");
    assert!(p["report"]["first_errors"][0]["line"].as_u64().unwrap() >= 2);
    let s = send(&admin, "GET", "/admin/status", None, vec![], Some(TOKEN))
        .await
        .json();
    assert_eq!(s["regions"][0]["last_reload"]["outcome"], "rejected");
    assert!(s["regions"][0]["last_reload"]["error"].as_str().is_some());
    assert_eq!(
        st.service.regions[0].status().generation,
        before,
        "a rejected table never replaces serving data"
    );
    let metrics = send(&app(st), "GET", "/metrics", None, vec![], None)
        .await
        .text;
    assert!(
        metrics.contains(
            r#"hodos_reloads_total{region="testcity",table="historical",outcome="rejected"}"#
        ),
        "{metrics}"
    );
}

#[tokio::test]
async fn metrics_geojson_and_openapi_parse_with_outside_tools() {
    // Reads the process-wide metrics: alone in a child process.
    if !hodos_testkit::child::alone(
        module_path!(),
        "metrics_geojson_and_openapi_parse_with_outside_tools",
    ) {
        return;
    }
    let (st, _d) = state("").await;
    let a = app(st.clone());
    let admin = admin_app(st);
    let (p, q) = (at(0.2, 0.2), at(0.8, 0.8));
    let trip = json!({"from": coord(p), "to": coord(q), "budget_ms": 2000});
    assert_eq!(post_json(&a, "/v1/eta", &trip).await.status, 200);

    // Route geometry: a GeoJSON LineString (RFC 7946) per the geojson crate,
    // starting and ending at the snapped points.
    let r = post_json(&a, "/v1/route", &trip).await;
    assert_eq!(r.status, 200, "{}", r.text);
    let v = r.json();
    let geom: geojson::Geometry =
        serde_json::from_value(v["geometry"].clone()).expect("GeoJSON geometry");
    match geom.value {
        geojson::GeometryValue::LineString { coordinates: line } => {
            assert!(line.len() >= 2);
            let first = &line[0];
            assert!(
                (first[1] - p.lat).abs() < 0.01 && (first[0] - p.lon).abs() < 0.01,
                "[lon, lat] order"
            );
            // The polyline's length matches the reported distance.
            let pts: Vec<hodos::engine::geo::LatLon> = line
                .iter()
                .map(|c| hodos::engine::geo::LatLon::new(c[1], c[0]))
                .collect();
            let len = hodos::engine::geo::polyline_length_m(&pts);
            let meters = v["meters"].as_f64().unwrap();
            assert!(
                (len - meters).abs() <= 0.01 * meters + 1.0,
                "geometry {len} m vs reported {meters} m"
            );
        }
        other => panic!("expected a LineString, got {other:?}"),
    }

    // Prometheus text exposition, parsed by prometheus-parse.
    let text = send(&a, "GET", "/metrics", None, vec![], None).await.text;
    let lines = text.lines().map(|l| Ok(l.to_string()));
    let scrape = prometheus_parse::Scrape::parse(lines).expect("Prometheus text parses");
    let names: std::collections::HashSet<String> =
        scrape.samples.iter().map(|s| s.metric.clone()).collect();
    for want in [
        "hodos_request_duration_seconds",
        "hodos_answers_total",
        "hodos_fallbacks_total",
        "hodos_snapshot_generation",
        "hodos_customization_seconds",
        "hodos_reloads_total",
        "hodos_graph_work_in_flight",
    ] {
        assert!(names.contains(want), "missing {want}; have {names:?}");
    }
    // Latency is a real histogram (buckets), not a summary.
    assert!(scrape
        .samples
        .iter()
        .any(|s| s.metric == "hodos_request_duration_seconds"
            && matches!(s.value, prometheus_parse::Value::Histogram(_))));
    let routes: std::collections::HashSet<String> = scrape
        .samples
        .iter()
        .filter(|s| s.metric == "hodos_request_duration_seconds_count")
        .filter_map(|s| s.labels.get("route").map(|r| r.to_string()))
        .collect();
    assert!(
        routes.contains("/v1/eta") && routes.contains("/v1/route"),
        "{routes:?}"
    );
    assert!(
        routes.iter().all(|r| !r.contains('?')),
        "routes are templates, never raw URIs"
    );
    // Per region: answers, fallbacks and latency carry the configured region
    // name (or `none` outside every region), nothing else; the ETA answered
    // above in "testcity" is counted there.
    for metric in [
        "hodos_answers_total",
        "hodos_fallbacks_total",
        "hodos_request_duration_seconds_count",
    ] {
        let regions: std::collections::BTreeSet<String> = scrape
            .samples
            .iter()
            .filter(|s| s.metric == metric)
            .map(|s| s.labels.get("region").unwrap_or("<missing>").to_string())
            .collect();
        let allowed: std::collections::BTreeSet<String> =
            ["testcity".to_string(), "none".to_string()].into();
        assert!(
            regions.is_subset(&allowed) && regions.contains("testcity"),
            "{metric}: region labels {regions:?}"
        );
    }
    let eta_here: f64 = scrape
        .samples
        .iter()
        .filter(|s| {
            s.metric == "hodos_answers_total"
                && s.labels.get("route") == Some("/v1/eta")
                && s.labels.get("region") == Some("testcity")
        })
        .map(|s| match s.value {
            prometheus_parse::Value::Counter(v) => v,
            _ => 0.0,
        })
        .sum();
    assert!(eta_here >= 1.0, "ETA counted in its region: {eta_here}");
    // Build info: one series, value 1, labelled with this crate's version.
    let info: Vec<_> = scrape
        .samples
        .iter()
        .filter(|s| s.metric == "hodos_build_info")
        .collect();
    assert_eq!(info.len(), 1, "one build info series");
    assert_eq!(
        info[0].labels.get("version"),
        Some(env!("CARGO_PKG_VERSION"))
    );
    assert!(info[0].labels.get("commit").is_some_and(|c| !c.is_empty()));
    assert!(matches!(info[0].value, prometheus_parse::Value::Gauge(v) if v == 1.0));

    // OpenAPI 3.1: every served path is documented, the public paths in
    // the public document and the admin paths in the admin document (on
    // the admin listener), and an external validator (openapi-spec-validator
    // from PyPI) accepts both documents.
    let doc = send(&a, "GET", "/openapi.json", None, vec![], None)
        .await
        .json();
    let admin_doc = send(
        &admin,
        "GET",
        "/admin/openapi.json",
        None,
        vec![],
        Some(TOKEN),
    )
    .await
    .json();
    for (d, paths) in [
        (
            &doc,
            &[
                "/v1/eta",
                "/v1/eta/matrix",
                "/v1/route",
                "/healthz",
                "/readyz",
                "/metrics",
                "/dashboard",
                "/dashboard/data",
                "/dashboard/uplot.js",
                "/dashboard/uplot.css",
                "/openapi.json",
            ][..],
        ),
        (
            &admin_doc,
            &[
                "/admin/openapi.json",
                "/admin/status",
                "/admin/trips",
                "/admin/regions/{region}/historical",
                "/admin/regions/{region}/live",
                "/admin/regions/{region}/model",
                "/admin/regions/{region}/reload",
            ][..],
        ),
    ] {
        assert_eq!(d["openapi"], "3.1.0");
        assert_eq!(d["paths"].as_object().unwrap().len(), paths.len());
        for path in paths {
            assert!(d["paths"][path].is_object(), "{path} undocumented");
        }
    }
    let dir = tempfile::tempdir().unwrap();
    for (name, d) in [("openapi.json", &doc), ("admin-openapi.json", &admin_doc)] {
        let f = dir.path().join(name);
        std::fs::write(&f, serde_json::to_vec_pretty(d).unwrap()).unwrap();
        let out = std::process::Command::new("python3")
            .args(["-c", "import sys, json\nfrom openapi_spec_validator import validate\nvalidate(json.load(open(sys.argv[1])))\nprint('valid')", f.to_str().unwrap()])
            .output();
        match out {
            Ok(o) if String::from_utf8_lossy(&o.stderr).contains("No module named") => {
                eprintln!("SKIPPED: openapi-spec-validator is not installed (pip install openapi-spec-validator; .ci/run does)");
            }
            Ok(o) => assert!(
                o.status.success(),
                "openapi-spec-validator on {name}: {}{}",
                String::from_utf8_lossy(&o.stdout),
                String::from_utf8_lossy(&o.stderr)
            ),
            Err(e) => eprintln!("SKIPPED: python3 not runnable: {e}"),
        }
    }
}

#[tokio::test]
async fn watched_directory_applies_and_marks_files() {
    let dir = tempfile::tempdir().unwrap();
    let incoming = dir.path().join("incoming");
    std::fs::create_dir_all(&incoming).unwrap();
    let mut cfg = config(dir.path(), "");
    cfg.regions[0].live_dir = Some(incoming.clone());
    let st = AppState::open(cfg).await;
    let region = st.service.regions[0].clone();
    let now = chrono::Utc::now().to_rfc3339();
    let mut good = LiveCsv::with_header();
    for (f, t) in city().edges.iter().take(40) {
        good.row(f, t, 15, &now, 2);
    }
    let good = good.into_string();
    std::fs::write(incoming.join("001-good.csv"), &good).unwrap();
    // Every row refers to an edge that does not exist: rejected whole.
    let mut bad = LiveCsv::with_header();
    bad.row(999999991, 999999992, 15, &now, 1);
    std::fs::write(incoming.join("002-bad.csv"), bad.into_string()).unwrap();
    std::fs::write(incoming.join("notes.txt"), "ignored").unwrap();
    hodos::serving::snapshot::LiveLoop::new(region.clone())
        .scan_dir()
        .await;
    assert!(incoming.join("001-good.done").exists());
    assert!(incoming.join("002-bad.rejected").exists());
    assert!(
        incoming.join("notes.txt").exists(),
        "only .csv files are taken"
    );
    let st = region.status();
    let last = st.last_live_batch.expect("a live batch was recorded");
    assert_eq!(last.outcome, "rejected");
    region.refresh_live(true).await;
    assert_eq!(region.status().live_edges, 40);
}
