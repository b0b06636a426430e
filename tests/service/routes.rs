//! The route table (`hodos::http::routes`) against what the service
//! actually does: the OpenAPI document it serves (OpenAPI 3.1 Path Item and
//! Operation rules), the routers' answers and `Allow` headers (RFC 9110
//! §15.5.6: a 405 lists the methods the resource supports), the latency
//! and answer labels in the scraped Prometheus text (prometheus-parse), and
//! admission control on exactly the table's answer routes. Then the
//! mismatches a schema-driven tester found between the documents and the
//! service, one test each: every answer follows the document it is checked
//! against (OpenAPI 3.1, JSON Schema 2020-12, RFC 9457, RFC 9110).

use axum::http::StatusCode;
use axum::Router;
use hodos::http::routes::{self, Route, Verb, ADMIN, PUBLIC};
use hodos::http::{admin_app, app, AppState};
use hodos_test_service::http::Resp;
use hodos_test_service::service::{at, config, TOKEN};
use serde_json::{json, Value};
use std::collections::BTreeSet;

/// One request with a JSON content type, with the admin token or none.
async fn send(app: &Router, method: &str, uri: &str, body: Vec<u8>, token: bool) -> Resp {
    let ct = Some("application/json");
    hodos_test_service::http::send(app, method, uri, ct, body, token.then_some(TOKEN)).await
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
    // Reads the process-wide metrics: alone in a child process.
    if !hodos_testkit::child::alone(module_path!(), "table_router_document_and_labels_agree") {
        return;
    }
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

/// `GET`/`POST` of `uri` on the public router, JSON body as text.
async fn post_text(app: &Router, uri: &str, body: &str) -> Resp {
    send(app, "POST", uri, body.as_bytes().to_vec(), false).await
}

/// A 422 problem naming `field` (RFC 9457 plus our `field`/`rule`), in
/// our own words: no serde or Rust type wording reaches the caller.
fn assert_refused(r: &Resp, field: &str) -> String {
    assert_eq!(r.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", r.text);
    let p = r.json();
    assert_eq!(p["field"], field, "{p}");
    let rule = p["rule"].as_str().unwrap().to_string();
    for internal in ["u64", "f64", "invalid type", "expected", "struct"] {
        assert!(!r.text.contains(internal), "{internal:?} in {}", r.text);
    }
    rule
}

/// A coordinate object for `at`.
fn obj(p: hodos::engine::geo::LatLon) -> Value {
    json!({"lat": p.lat, "lon": p.lon})
}

/// Admin 422 for a table refused before its rows were read (a bad header)
/// has no `report` key: the document's Problem says `report` is a
/// TableReport object (JSON Schema 2020-12: `null` is no object).
#[tokio::test]
async fn refused_table_problem_has_no_null_report() {
    let (st, _d) = state("").await;
    let admin = admin_app(st.clone());
    let r = hodos_test_service::http::send(
        &admin,
        "PUT",
        "/admin/regions/testcity/historical",
        Some("text/csv"),
        b"no,such,columns\n1,2,3\n".to_vec(),
        Some(TOKEN),
    )
    .await;
    assert_eq!(r.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", r.text);
    let p = r.json();
    assert!(p.get("report").is_none(), "{p}");
    assert_eq!(p["type"], "urn:hodos:problem:table-rejected");
    let doc = send(&admin, "GET", "/admin/openapi.json", vec![], true)
        .await
        .json();
    let schema = &doc["components"]["schemas"]["Problem"]["properties"]["report"];
    assert_eq!(
        schema["$ref"], "#/components/schemas/TableReport",
        "{schema}"
    );
}

/// `to` has the same documented pattern as `from`, and the service takes
/// exactly the strings the pattern takes. The cases are worked by hand
/// against the pattern (ECMA-262 regular expressions, which OpenAPI 3.1
/// `pattern` uses): matching strings in range answer 200, the rest 422.
#[tokio::test]
async fn query_coordinates_follow_the_documented_pattern() {
    let (st, _d) = state("").await;
    let public = app(st);
    let doc = send(&public, "GET", "/openapi.json", vec![], false)
        .await
        .json();
    let params = doc["paths"]["/v1/eta"]["get"]["parameters"]
        .as_array()
        .unwrap();
    let pattern = |name: &str| {
        params.iter().find(|p| p["name"] == name).unwrap()["schema"]["pattern"]
            .as_str()
            .unwrap_or_else(|| panic!("{name} has no pattern"))
            .to_string()
    };
    assert_eq!(pattern("from"), pattern("to"));
    let (p, q) = (at(0.2, 0.2), at(0.8, 0.8));
    let from = format!("{:.5},{:.5}", p.lat, p.lon);
    let eta = |to: &str| format!("/v1/eta?from={from}&to={to}");
    let ok = send(
        &public,
        "GET",
        &eta(&format!("{:.5},{:.5}", q.lat, q.lon)),
        vec![],
        false,
    )
    .await;
    assert_eq!(ok.status, StatusCode::OK, "{}", ok.text);
    // Not matched by the pattern: exponent, plus sign, blank, missing
    // digits, leading zero on a three-digit longitude, 3-digit latitude.
    for bad in [
        "1e1,2", "%2B1,2", "%201,2", "1.,2", ".5,2", "1,099", "100,2", "1;2",
    ] {
        let r = send(&public, "GET", &eta(bad), vec![], false).await;
        assert_refused(&r, "to");
    }
    // Matched syntax, out of range: the pattern refuses these too (90.5
    // and 180.1 fail its 90(\.0+)? and 180(\.0+)? branches).
    for (bad, field) in [("90.5,0", "to.lat"), ("0,180.1", "to.lon")] {
        let r = send(&public, "GET", &eta(bad), vec![], false).await;
        assert_refused(&r, field);
    }
}

/// `leaving: null` is refused with a problem naming the field, as the
/// schema says `type: string` (omit it to leave now).
#[tokio::test]
async fn null_leaving_is_refused_naming_the_field() {
    let (st, _d) = state("").await;
    let public = app(st);
    let (p, q) = (at(0.2, 0.2), at(0.8, 0.8));
    for (uri, body) in [
        (
            "/v1/eta",
            json!({"from": obj(p), "to": obj(q), "leaving": null}),
        ),
        (
            "/v1/route",
            json!({"from": obj(p), "to": obj(q), "leaving": null}),
        ),
        (
            "/v1/eta/matrix",
            json!({"from": [obj(p)], "to": [obj(q)], "leaving": null}),
        ),
    ] {
        let r = post_text(&public, uri, &body.to_string()).await;
        let rule = assert_refused(&r, "leaving");
        assert!(rule.contains("RFC 3339") && rule.contains("null"), "{rule}");
    }
    let doc = send(&public, "GET", "/openapi.json", vec![], false)
        .await
        .json();
    assert_eq!(
        doc["components"]["schemas"]["EtaRequest"]["properties"]["leaving"]["type"],
        "string"
    );
}

/// `budget_ms` is `type: integer`; JSON Schema 2020-12 §6.1.1 counts
/// 147700.0 as an integer ("a number with a zero fractional part"), so it
/// is taken. Non-integral, negative, string and null budgets are refused
/// with our rule naming the field, never a Rust type name.
#[tokio::test]
async fn budget_ms_takes_integral_numbers_and_refuses_the_rest_in_our_words() {
    let (st, _d) = state("").await;
    let public = app(st);
    let (p, q) = (at(0.2, 0.2), at(0.8, 0.8));
    let trip = |budget: &str| {
        format!(
            r#"{{"from": {}, "to": {}, "budget_ms": {budget}}}"#,
            obj(p),
            obj(q)
        )
    };
    for good in ["147700.0", "147700", "1.477e5"] {
        let r = post_text(&public, "/v1/eta", &trip(good)).await;
        assert_eq!(r.status, StatusCode::OK, "{good}: {}", r.text);
    }
    // 2^53 = 9007199254740992 is one over the documented maximum.
    for bad in [
        "147700.5",
        "-1",
        "\"147700\"",
        "null",
        "true",
        "0",
        "1e30",
        "9007199254740992",
    ] {
        let r = post_text(&public, "/v1/eta", &trip(bad)).await;
        let rule = assert_refused(&r, "budget_ms");
        assert!(rule.contains("at least 1"), "{bad}: {rule}");
    }
}

/// Coordinates are objects `{lat, lon}` (the Coord schema); an array is
/// refused with a rule that says so, since `[lon, lat]` (GeoJSON order)
/// would otherwise answer for a point elsewhere. A body that is an array
/// instead of an object is refused too.
#[tokio::test]
async fn coordinate_arrays_are_refused() {
    let (st, _d) = state("").await;
    let public = app(st);
    let (p, q) = (at(0.2, 0.2), at(0.8, 0.8));
    let arr = |x: hodos::engine::geo::LatLon| json!([x.lat, x.lon]);
    let cases = [
        ("/v1/eta", json!({"from": arr(p), "to": obj(q)}), "from"),
        ("/v1/route", json!({"from": obj(p), "to": arr(q)}), "to"),
        (
            "/v1/eta/matrix",
            json!({"from": [obj(p)], "to": [arr(q)]}),
            "to[0]",
        ),
        ("/v1/eta", json!([obj(p), obj(q)]), "body"),
    ];
    for (uri, body, field) in cases {
        let r = post_text(&public, uri, &body.to_string()).await;
        let rule = assert_refused(&r, field);
        assert!(rule.contains("object"), "{uri} {body}: {rule}");
    }
}

/// Live JSON refuses duplicate keys like the public API (last-wins would
/// take `{"kmh": 500, ..., "kmh": 12}` as 12 without a word) and refuses
/// an observation written as an array of its fields; both are bad rows
/// in the validation report (here the only row, so the batch is rejected).
#[tokio::test]
async fn live_json_refuses_duplicate_keys_and_arrays() {
    let (st, _d) = state("").await;
    let admin = admin_app(st);
    let now = chrono::Utc::now().to_rfc3339();
    let one = hodos_test_service::tables::observations(1, 12.0, &now, 3).remove(0);
    let text = one.to_string();
    let dup = format!("[{{\"kmh\": 500,{}]", &text[1..]);
    let fields = json!([[null, null, one["tail"], one["head"], 12.0, now, 3]]).to_string();
    let post = |body: String| {
        let admin = admin.clone();
        async move {
            hodos_test_service::http::send(
                &admin,
                "POST",
                "/admin/regions/testcity/live",
                Some("application/json"),
                body.into_bytes(),
                Some(TOKEN),
            )
            .await
        }
    };
    // The well-formed row is taken (so the refusals below are about form).
    let r = post(format!("[{text}]")).await;
    assert_eq!(r.status, StatusCode::OK, "{}", r.text);
    for (body, says) in [
        (dup, "duplicate key `kmh`"),
        (fields, "must be a JSON object"),
    ] {
        let r = post(body).await;
        assert_eq!(r.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", r.text);
        let e = &r.json()["report"]["first_errors"][0];
        assert_eq!(e["index"], 0, "{e}");
        assert_eq!(e["kind"], "malformed_row", "{e}");
        assert!(e["message"].as_str().unwrap().contains(says), "{e}");
    }
}

/// An integral JSON number is an integer (JSON Schema 2020-12 validation
/// §6.1.1): a live observation with `samples: 3.0` is taken like
/// `samples: 3`.
#[tokio::test]
async fn live_json_takes_integral_numbers_as_integers() {
    let (st, _d) = state("").await;
    let admin = admin_app(st);
    let now = chrono::Utc::now().to_rfc3339();
    let mut one = hodos_test_service::tables::observations(1, 12.0, &now, 3).remove(0);
    one["samples"] = json!(3.0);
    let r = hodos_test_service::http::send(
        &admin,
        "POST",
        "/admin/regions/testcity/live",
        Some("application/json"),
        json!([one]).to_string().into_bytes(),
        Some(TOKEN),
    )
    .await;
    assert_eq!(r.status, StatusCode::OK, "{}", r.text);
    assert_eq!(r.json()["report"]["accepted"], 1, "{}", r.text);
}
