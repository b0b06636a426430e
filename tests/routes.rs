//! The route table (`hodos::http::routes`) against what the service
//! actually does: the OpenAPI document it serves (OpenAPI 3.1 Path Item and
//! Operation rules), the routers' answers and `Allow` headers (RFC 9110
//! §15.5.6: a 405 lists the methods the resource supports), the latency
//! and answer labels in the scraped Prometheus text (prometheus-parse), and
//! admission control on exactly the table's answer routes. Then the
//! mismatches a schema-driven tester found between the documents and the
//! service, one test each: every answer follows the document it is checked
//! against (OpenAPI 3.1, JSON Schema 2020-12, RFC 9457, RFC 9110).

mod common;

use axum::http::StatusCode;
use axum::Router;
use common::http::Resp;
use common::service::{at, config, TOKEN};
use hodos::http::routes::{self, Route, Verb, ADMIN, PUBLIC};
use hodos::http::{admin_app, app, AppState};
use serde_json::{json, Value};
use std::collections::BTreeSet;

/// One request with a JSON content type, with the admin token or none.
async fn send(app: &Router, method: &str, uri: &str, body: Vec<u8>, token: bool) -> Resp {
    let ct = Some("application/json");
    common::http::send(app, method, uri, ct, body, token.then_some(TOKEN)).await
}

async fn state(extra: &str) -> (AppState, tempfile::TempDir) {
    let dir = tempfile::tempdir().unwrap();
    let st = AppState::open(config(dir.path(), extra)).await;
    assert!(st.degraded().is_empty(), "{:?}", st.degraded());
    (st, dir)
}

/// A concrete URI for a template (the test config's one region).
fn concrete(path: &str) -> String {
    path.replace("{region}", "testcity")
}

/// Methods a request may name (RFC 9110 §9.3 plus PATCH, RFC 5789).
const METHODS: [&str; 6] = ["GET", "HEAD", "POST", "PUT", "DELETE", "PATCH"];

/// The methods a route serves: its table verbs, plus HEAD with GET (RFC
/// 9110 §9.3.2: a server answering GET answers HEAD).
fn served(r: &Route) -> BTreeSet<&'static str> {
    let mut m: BTreeSet<&'static str> = r.ops.iter().map(|o| o.verb.as_str()).collect();
    if m.contains("GET") {
        m.insert("HEAD");
    }
    m
}

#[tokio::test]
async fn table_router_document_and_labels_agree() {
    let (st, _d) = state("").await;
    let public = app(st.clone());
    let admin = admin_app(st);
    let table: Vec<(&Route, &Router, bool)> = PUBLIC
        .iter()
        .map(|r| (r, &public, false))
        .chain(ADMIN.iter().map(|r| (r, &admin, true)))
        .collect();

    // OpenAPI: each listener's Paths Object holds exactly its table's
    // templates, each Path Item exactly the table's methods (OpenAPI 3.1
    // §4.8.9: the fixed fields get, put, post, delete, options, head, patch,
    // trace). The public document lists no admin path; the admin document
    // is on the admin listener, behind the token like every admin route.
    let public_doc = send(&public, "GET", "/openapi.json", vec![], false)
        .await
        .json();
    let admin_doc = send(&admin, "GET", "/admin/openapi.json", vec![], true)
        .await
        .json();
    assert_eq!(
        send(&admin, "GET", "/admin/openapi.json", vec![], false)
            .await
            .status,
        StatusCode::UNAUTHORIZED
    );
    for (doc, routes) in [(&public_doc, PUBLIC), (&admin_doc, ADMIN)] {
        let documented: BTreeSet<&str> = doc["paths"]
            .as_object()
            .unwrap()
            .keys()
            .map(|k| k.as_str())
            .collect();
        let tabled: BTreeSet<&str> = routes.iter().map(|r| r.path).collect();
        assert_eq!(documented, tabled, "documented paths vs the route table");
        // No hard-coded listener: without `servers` the document is
        // relative to where it was fetched (OpenAPI 3.1 §4.8.1).
        assert!(doc.get("servers").is_none(), "{}", doc["servers"]);
    }
    // Every `$ref` of each document resolves within it.
    for doc in [&public_doc, &admin_doc] {
        for r in refs(doc) {
            let name = r.strip_prefix("#/components/schemas/").unwrap();
            assert!(doc["components"]["schemas"].get(name).is_some(), "{r}");
        }
    }
    let oas_methods = [
        "get", "put", "post", "delete", "options", "head", "patch", "trace",
    ];
    let mut operation_ids = BTreeSet::new();
    for (r, _, is_admin) in &table {
        let doc = if *is_admin { &admin_doc } else { &public_doc };
        let item = doc["paths"][r.path].as_object().unwrap();
        let doc_methods: BTreeSet<&str> = item
            .keys()
            .map(|k| k.as_str())
            .filter(|k| oas_methods.contains(k))
            .collect();
        let table_methods: BTreeSet<&str> = r.ops.iter().map(|o| o.verb.openapi_key()).collect();
        assert_eq!(doc_methods, table_methods, "{}", r.path);
        for (m, op) in item {
            // §4.8.10: operationId is unique among all operations.
            let id = op["operationId"].as_str().unwrap().to_string();
            assert!(
                operation_ids.insert(id.clone()),
                "{id} twice ({m} {})",
                r.path
            );
            // §4.8.12: every template expression has a path parameter.
            for name in r
                .path
                .split('{')
                .skip(1)
                .map(|s| s.split('}').next().unwrap())
            {
                assert!(
                    op["parameters"]
                        .as_array()
                        .into_iter()
                        .flatten()
                        .any(|p| p["in"] == "path" && p["name"] == name),
                    "{m} {}: no path parameter {name}",
                    r.path
                );
            }
        }
    }

    // Router: every table method is routed (not 404/405); every other
    // method is 405 with an Allow header naming exactly the table's methods.
    for (r, router, token) in &table {
        let uri = concrete(r.path);
        let want = served(r);
        for m in METHODS {
            let resp = send(router, m, &uri, vec![], *token).await;
            if want.contains(m) {
                assert!(
                    resp.status != StatusCode::NOT_FOUND
                        && resp.status != StatusCode::METHOD_NOT_ALLOWED,
                    "{m} {uri}: {} {}",
                    resp.status,
                    resp.text
                );
            } else {
                assert_eq!(resp.status, StatusCode::METHOD_NOT_ALLOWED, "{m} {uri}");
                let allow: BTreeSet<&str> = resp
                    .allow
                    .as_deref()
                    .unwrap_or_else(|| panic!("{m} {uri}: 405 without Allow"))
                    .split(',')
                    .map(str::trim)
                    .collect();
                assert_eq!(allow, want, "Allow of {uri}");
                // RFC 9457: a problem body like every other error (a HEAD
                // answer has no body, RFC 9110 §9.3.2).
                assert_eq!(resp.content_type, "application/problem+json", "{m} {uri}");
                if m == "HEAD" {
                    continue;
                }
                let p = resp.json();
                assert_eq!(p["status"], 405, "{p}");
                assert_eq!(p["type"], "urn:hodos:problem:method-not-allowed");
                assert!(p["detail"].as_str().unwrap().contains("Allow"), "{p}");
            }
        }
    }
    // Outside the table: the fallback's 404 on both routers.
    assert_eq!(
        send(&public, "GET", "/v1/nowhere", vec![], false)
            .await
            .status,
        StatusCode::NOT_FOUND
    );
    assert_eq!(
        send(&admin, "GET", "/admin/nowhere", vec![], true)
            .await
            .status,
        StatusCode::NOT_FOUND
    );

    // Labels, read back through prometheus-parse: latency is labelled with
    // exactly the public templates (every one was requested above) plus
    // `unmatched` for the fallback; answer counters exist for exactly the
    // table's answer routes.
    let text = send(&public, "GET", "/metrics", vec![], false).await.text;
    let scrape = prometheus_parse::Scrape::parse(text.lines().map(|l| Ok(l.to_string())))
        .expect("Prometheus text parses");
    let labels = |metric: &str| -> BTreeSet<String> {
        scrape
            .samples
            .iter()
            .filter(|s| s.metric == metric)
            .filter_map(|s| s.labels.get("route").map(str::to_string))
            .collect()
    };
    let mut want: BTreeSet<String> = PUBLIC.iter().map(|r| r.path.to_string()).collect();
    want.insert("unmatched".into());
    assert_eq!(labels("hodos_request_duration_seconds_count"), want);
    let answers: BTreeSet<String> = PUBLIC
        .iter()
        .filter(|r| r.answers)
        .map(|r| r.path.to_string())
        .collect();
    assert_eq!(labels("hodos_answers_total"), answers);
    assert_eq!(
        routes::answer_paths()
            .into_iter()
            .map(str::to_string)
            .collect::<BTreeSet<_>>(),
        answers
    );
}

/// Every `$ref` string in a document.
fn refs(v: &Value) -> Vec<String> {
    match v {
        Value::Object(m) => m
            .iter()
            .flat_map(|(k, v)| match (k.as_str(), v) {
                ("$ref", Value::String(r)) => vec![r.clone()],
                _ => refs(v),
            })
            .collect(),
        Value::Array(a) => a.iter().flat_map(refs).collect(),
        _ => vec![],
    }
}

/// A valid request for each operation of an answer route.
fn valid_request(path: &str, verb: Verb) -> (String, Vec<u8>) {
    let (p, q) = (at(0.2, 0.2), at(0.8, 0.8));
    let c = |x: hodos::engine::geo::LatLon| json!({"lat": x.lat, "lon": x.lon});
    let trip = json!({"from": c(p), "to": c(q)});
    match (path, verb) {
        (routes::ETA, Verb::Get) => (
            format!("{path}?from={},{}&to={},{}", p.lat, p.lon, q.lat, q.lon),
            vec![],
        ),
        (routes::ETA | routes::ROUTE, Verb::Post) => {
            (path.to_string(), serde_json::to_vec(&trip).unwrap())
        }
        (routes::MATRIX, Verb::Post) => (
            path.to_string(),
            serde_json::to_vec(&json!({"from": [c(p)], "to": [c(q)]})).unwrap(),
        ),
        other => panic!("no sample request for answer route {other:?}: add one"),
    }
}

/// Admission control covers exactly the table's answer routes: with no
/// request allowed in flight each of their operations sheds to the
/// heuristic tier (`overloaded`), and every other route still answers.
#[tokio::test]
async fn admission_covers_the_answer_routes() {
    let (st, _d) = state("max_in_flight = 0").await;
    let public = app(st.clone());
    for r in PUBLIC {
        if r.answers {
            for op in r.ops {
                let (uri, body) = valid_request(r.path, op.verb);
                let resp = send(&public, op.verb.as_str(), &uri, body, false).await;
                assert_eq!(resp.status, StatusCode::OK, "{uri}: {}", resp.text);
                assert!(
                    resp.text.contains("\"overloaded\""),
                    "{} {uri} not shed: {}",
                    op.verb.as_str(),
                    resp.text
                );
            }
        } else {
            for op in r.ops {
                let resp = send(&public, op.verb.as_str(), r.path, vec![], false).await;
                assert!(resp.status.is_success(), "{}: {}", r.path, resp.status);
            }
        }
    }
    assert_eq!(st.catalog.admission.in_flight(), 0);
}
