//! What the admin API answers in the corners a new user met: the bearer
//! scheme in any letter case, uploads to a region without a graph, reloads
//! that fail, empty live batches, and a refused file in the watched folder
//! being logged. Through the in-process routers with `oneshot`.

use axum::body::Body;
use axum::http::Request;
use hodos::config::Config;
use hodos::http::{admin_app, app, AppState};
use hodos_test_service::http::send;
use hodos_test_service::service::{at, city, config_text, TOKEN};
use hodos_testkit::LiveCsv;
use serde_json::json;
use std::path::Path;
use std::sync::{Arc, Mutex};
use tower::ServiceExt;

async fn open(artifact: &Path, state: &Path, extra_region: &str) -> AppState {
    let text = format!("{}{extra_region}\n", config_text(artifact, state, ""));
    AppState::open(Config::parse(&text).unwrap()).await
}

/// RFC 9110 §11.1 (and RFC 7235 §2.1 before it): "It uses a
/// case-insensitive token to identify the authentication scheme"; the
/// scheme and its credentials are separated by one or more spaces (1*SP).
#[tokio::test]
async fn bearer_scheme_is_case_insensitive() {
    let dir = tempfile::tempdir().unwrap();
    let admin = admin_app(open(&city().artifact, &dir.path().join("s"), "").await);
    for (header, want) in [
        (format!("Bearer {TOKEN}"), 200),
        (format!("bearer {TOKEN}"), 200),
        (format!("BEARER {TOKEN}"), 200),
        (format!("bEaReR  {TOKEN}"), 200),
        (format!("Basic {TOKEN}"), 401),
        (format!("bearer {TOKEN}x"), 401),
        (format!("bearer{TOKEN}"), 401),
    ] {
        let req = Request::get("/admin/status")
            .header("authorization", &header)
            .body(Body::empty())
            .unwrap();
        let r = admin.clone().oneshot(req).await.unwrap();
        assert_eq!(r.status(), want, "{header}");
    }
}

/// 404 names an unknown resource (RFC 9110 §15.5.5); a known region whose
/// artifact failed to load is a conflict with its state (§15.5.10, 409)
/// whose detail says why.
#[tokio::test]
async fn uploads_to_a_region_without_graph_say_why() {
    let dir = tempfile::tempdir().unwrap();
    let broken = dir.path().join("broken.hodos");
    std::fs::write(&broken, b"not an artifact").unwrap();
    let admin = admin_app(open(&broken, &dir.path().join("s"), "").await);
    let live = serde_json::to_vec(&hodos_test_service::tables::observations(
        3,
        20.0,
        &chrono::Utc::now().to_rfc3339(),
        1,
    ))
    .unwrap();
    for (m, uri, ct, body) in [
        (
            "PUT",
            "/admin/regions/testcity/historical",
            "text/csv",
            hodos_test_service::tables::every_edge_at_ten(20.0).into_bytes(),
        ),
        (
            "POST",
            "/admin/regions/testcity/live",
            "application/json",
            live,
        ),
    ] {
        let r = send(&admin, m, uri, Some(ct), body, Some(TOKEN)).await;
        assert_eq!(r.status, 409, "{m} {uri}: {}", r.text);
        assert_eq!(r.content_type, "application/problem+json");
        let p = r.json();
        let detail = p["detail"].as_str().unwrap();
        assert!(detail.contains("no graph loaded"), "{p}");
        assert!(detail.contains("broken.hodos"), "names the reason: {p}");
    }
    // An unknown region stays 404.
    let r = send(
        &admin,
        "POST",
        "/admin/regions/nowhere/live",
        Some("application/json"),
        b"[]".to_vec(),
        Some(TOKEN),
    )
    .await;
    assert_eq!(r.status, 404, "{}", r.text);
}

/// A reload that changed nothing because it failed answers an error
/// status (RFC 9110 §15.6.1 for the server-side artifact failure, §15.5.21
/// 422 for refused content) with problem details naming why; `unchanged`
/// stays 200.
#[tokio::test]
async fn failed_reloads_answer_an_error_status() {
    let dir = tempfile::tempdir().unwrap();
    let artifact = dir.path().join("city.hodos");
    std::fs::copy(&city().artifact, &artifact).unwrap();
    let configured = dir.path().join("historical.csv");
    std::fs::write(
        &configured,
        hodos_test_service::tables::every_edge_at_ten(20.0),
    )
    .unwrap();
    let st = open(
        &artifact,
        &dir.path().join("s"),
        &format!("historical = \"{}\"", configured.display()),
    )
    .await;
    assert!(
        st.service.degraded().is_empty(),
        "{:?}",
        st.service.degraded()
    );
    let admin = admin_app(st.clone());
    let reload = || async {
        send(
            &admin,
            "POST",
            "/admin/regions/testcity/reload",
            None,
            vec![],
            Some(TOKEN),
        )
        .await
    };
    let r = reload().await;
    assert_eq!(
        (r.status.as_u16(), r.json()["outcome"].as_str()),
        (200, Some("unchanged")),
        "{}",
        r.text
    );
    let generation = st.service.regions[0].status().generation;

    // Every historical candidate refused: 422, the table serving stays.
    std::thread::sleep(std::time::Duration::from_millis(20));
    std::fs::write(&configured, hodos_test_service::tables::corrupt()).unwrap();
    let r = reload().await;
    assert_eq!(r.status, 422, "{}", r.text);
    assert_eq!(r.content_type, "application/problem+json");
    let detail = r.json()["detail"].as_str().unwrap().to_string();
    assert!(detail.contains("historical.csv"), "{detail}");
    assert_eq!(st.service.regions[0].status().generation, generation);

    // The artifact no longer loads: 500 with the reason, snapshot kept.
    std::fs::write(&artifact, b"not an artifact any more").unwrap();
    let r = reload().await;
    assert_eq!(r.status, 500, "{}", r.text);
    assert_eq!(r.content_type, "application/problem+json");
    let p = r.json();
    assert!(
        p["detail"].as_str().unwrap().contains("city.hodos"),
        "names the artifact: {p}"
    );
    assert_eq!(st.service.regions[0].status().generation, generation);
}

/// An empty batch carries no observation, so by the live tier's own rule
/// (answers from live speeds only where observations are held) it can
/// change no answer: 200 with a report of 0 rows, and the fallback reason
/// stays what it was (here none: free-flow, no table, no live layer).
#[tokio::test]
async fn an_empty_live_batch_changes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let st = open(&city().artifact, &dir.path().join("s"), "").await;
    let (public, admin) = (app(st.clone()), admin_app(st.clone()));
    let trip = serde_json::to_vec(&json!({
        "from": {"lat": at(0.2, 0.2).lat, "lon": at(0.2, 0.2).lon},
        "to": {"lat": at(0.8, 0.8).lat, "lon": at(0.8, 0.8).lon},
    }))
    .unwrap();
    let eta = || async {
        send(
            &public,
            "POST",
            "/v1/eta",
            Some("application/json"),
            trip.clone(),
            None,
        )
        .await
        .json()
    };
    let before = eta().await;
    assert_eq!(before["tier"], "free_flow", "{before}");
    let generation = st.service.regions[0].status().generation;
    for (ct, body) in [
        ("application/json", b"[]".to_vec()),
        (
            "text/csv",
            LiveCsv::with_header().into_string().into_bytes(),
        ),
    ] {
        let r = send(
            &admin,
            "POST",
            "/admin/regions/testcity/live",
            Some(ct),
            body,
            Some(TOKEN),
        )
        .await;
        assert_eq!(r.status, 200, "{ct}: {}", r.text);
        let v = r.json();
        assert_eq!(v["report"]["rows"], 0, "{v}");
        assert_eq!(v["report"]["accepted"], 0, "{v}");
        st.service.regions[0].refresh_live(true).await;
        let after = eta().await;
        assert_eq!(
            (&after["tier"], &after["fallback_reason"]),
            (&before["tier"], &before["fallback_reason"]),
            "{ct}: {after}"
        );
        assert_eq!(st.service.regions[0].status().generation, generation);
        assert_eq!(st.service.regions[0].status().live_edges, 0);
    }
    assert!(
        !dir.path().join("s").join("live.wal").exists()
            || std::fs::metadata(dir.path().join("s").join("live.wal"))
                .unwrap()
                .len()
                == 0,
        "nothing to replay"
    );
}

/// A `tracing` writer into a shared buffer.
#[derive(Clone, Default)]
struct Buf(Arc<Mutex<Vec<u8>>>);

impl std::io::Write for Buf {
    fn write(&mut self, b: &[u8]) -> std::io::Result<usize> {
        self.0.lock().unwrap().extend_from_slice(b);
        Ok(b.len())
    }
    fn flush(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

/// A refused file in the watched folder is renamed to `.rejected` and
/// logged at warn with its name and the reason (the operator's only other
/// clue is the new extension).
#[tokio::test(flavor = "current_thread")]
async fn a_rejected_watched_file_is_logged() {
    let dir = tempfile::tempdir().unwrap();
    let incoming = dir.path().join("incoming");
    std::fs::create_dir_all(&incoming).unwrap();
    let st = open(
        &city().artifact,
        &dir.path().join("s"),
        &format!("live_dir = \"{}\"", incoming.display()),
    )
    .await;
    std::fs::write(incoming.join("bad-batch.csv"), b"no,such,columns\n1,2,3\n").unwrap();
    let buf = Buf::default();
    let out = buf.clone();
    let subscriber = tracing_subscriber::fmt()
        .with_writer(move || out.clone())
        .with_ansi(false)
        .with_max_level(tracing::Level::WARN)
        .finish();
    let _guard = tracing::subscriber::set_default(subscriber);
    hodos::serving::snapshot::LiveLoop::new(st.service.regions[0].clone())
        .scan_dir()
        .await;
    assert!(incoming.join("bad-batch.rejected").exists());
    let log = String::from_utf8(buf.0.lock().unwrap().clone()).unwrap();
    let line = log
        .lines()
        .find(|l| l.contains("bad-batch.csv"))
        .unwrap_or_else(|| panic!("no log line names the file: {log:?}"));
    assert!(line.contains("WARN"), "{line}");
    assert!(line.contains("reason="), "{line}");
}
