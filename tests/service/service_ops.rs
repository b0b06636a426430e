//! The service as a real server on 127.0.0.1 port 0: hot swaps under
//! concurrent load (zero failed requests, corrupt tables change nothing),
//! live updates reaching answers, restart recovery from disk, and graceful
//! shutdown. Every loop here is bounded in count and time.

use hodos::http::{bind, AppState};
use hodos::server::run as serve;
use hodos_test_service::service::{at, config, TOKEN};
use hodos_test_service::tables;
use serde_json::{json, Value};
use std::net::SocketAddr;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

struct Server {
    public: SocketAddr,
    admin: SocketAddr,
    stop: Option<tokio::sync::oneshot::Sender<()>>,
    task: tokio::task::JoinHandle<()>,
    state: AppState,
}

async fn start(state: AppState) -> Server {
    let p = bind("127.0.0.1:0".parse().unwrap()).await.unwrap();
    let a = bind("127.0.0.1:0".parse().unwrap()).await.unwrap();
    let (public, admin) = (p.local_addr().unwrap(), a.local_addr().unwrap());
    let (tx, rx) = tokio::sync::oneshot::channel::<()>();
    let st = state.clone();
    let task = tokio::spawn(async move {
        serve(st, p, a, async move {
            let _ = rx.await;
        })
        .await
        .unwrap();
    });
    Server {
        public,
        admin,
        stop: Some(tx),
        task,
        state,
    }
}

impl Server {
    async fn stop(mut self) {
        if let Some(tx) = self.stop.take() {
            let _ = tx.send(());
        }
        tokio::time::timeout(Duration::from_secs(20), self.task)
            .await
            .expect("drains in time")
            .unwrap();
    }
}

fn client() -> reqwest::Client {
    reqwest::Client::builder()
        .timeout(Duration::from_secs(10))
        .build()
        .unwrap()
}

fn trip_body(hour_offset_days: i64) -> Value {
    let (a, b) = (at(0.2, 0.25), at(0.8, 0.7));
    // A fixed future departure: the historical tier, a fixed bucket.
    let depart = (chrono::Utc::now() + chrono::Duration::days(hour_offset_days))
        .format("%Y-%m-%dT10:00:00Z")
        .to_string();
    json!({"from": {"lat": a.lat, "lon": a.lon}, "to": {"lat": b.lat, "lon": b.lon}, "leaving": depart, "budget_ms": 2000})
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn fifty_hot_swaps_under_load_fail_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let srv = start(AppState::open(config(dir.path(), "")).await).await;
    let http = client();
    let eta_url = format!("http://{}/v1/eta", srv.public);
    let put_url = format!("http://{}/admin/regions/testcity/historical", srv.admin);
    let stop = Arc::new(AtomicBool::new(false));
    let (ok, failed) = (Arc::new(AtomicU64::new(0)), Arc::new(AtomicU64::new(0)));
    let mut workers = Vec::new();
    for w in 0..4 {
        let (http, url, stop, ok, failed) = (
            http.clone(),
            eta_url.clone(),
            stop.clone(),
            ok.clone(),
            failed.clone(),
        );
        workers.push(tokio::spawn(async move {
            let body = trip_body(1 + w);
            let deadline = Instant::now() + Duration::from_secs(120);
            while !stop.load(Ordering::Relaxed) && Instant::now() < deadline {
                match http.post(&url).json(&body).send().await {
                    Ok(r) if r.status().is_success() => {
                        let v: Value = r.json().await.unwrap();
                        assert!(v["eta_s"].as_f64().unwrap() >= 0.0);
                        ok.fetch_add(1, Ordering::Relaxed);
                    }
                    _ => {
                        failed.fetch_add(1, Ordering::Relaxed);
                    }
                }
            }
        }));
    }
    let probe = trip_body(1);
    let eta_now = || async {
        let v: Value = http
            .post(&eta_url)
            .json(&probe)
            .send()
            .await
            .unwrap()
            .json()
            .await
            .unwrap();
        (
            v["eta_s"].as_f64().unwrap(),
            v["tier"].as_str().unwrap().to_string(),
        )
    };
    let (good, bad) = (tables::every_edge_at_ten(0.0), tables::corrupt());
    let mut good_swaps = 0u64;
    for i in 0..50 {
        if i % 2 == 0 {
            // Alternate between two speeds so consecutive good tables differ.
            let t = if (i / 2) % 2 == 0 {
                good.replace(",0\n", ",20\n")
            } else {
                good.replace(",0\n", ",40\n")
            };
            let r = http
                .put(&put_url)
                .bearer_auth(TOKEN)
                .body(t)
                .send()
                .await
                .unwrap();
            assert_eq!(
                r.status(),
                200,
                "good table {i}: {}",
                r.text().await.unwrap()
            );
            good_swaps += 1;
        } else {
            let before = eta_now().await;
            let r = http
                .put(&put_url)
                .bearer_auth(TOKEN)
                .body(bad.clone())
                .send()
                .await
                .unwrap();
            assert_eq!(r.status(), 422, "corrupt table {i} must be rejected");
            let after = eta_now().await;
            assert_eq!(before, after, "a rejected table changed answers (swap {i})");
        }
    }
    stop.store(true, Ordering::Relaxed);
    for w in workers {
        w.await.unwrap();
    }
    let (ok, failed) = (ok.load(Ordering::Relaxed), failed.load(Ordering::Relaxed));
    eprintln!("hot swap: {good_swaps} good and {} corrupt tables while 4 tasks made {ok} requests; {failed} failed", 50 - good_swaps);
    assert_eq!(failed, 0);
    assert!(ok > 50, "the query tasks ran during the swaps ({ok})");
    // Every swap retired the snapshot it replaced (src/retire.rs), and with
    // the query tasks gone the background sweeps free them all: nothing
    // superseded is kept, and no request had to free one.
    let region = srv.state.service.regions[0].clone();
    let (_, retired) = region.retired();
    assert!(
        retired >= good_swaps,
        "{retired} items retired for {good_swaps} swaps"
    );
    let deadline = Instant::now() + Duration::from_secs(20);
    while region.retired().0 > 0 && Instant::now() < deadline {
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
    assert_eq!(region.retired().0, 0, "retired data left unfreed");
    srv.stop().await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn live_post_reaches_answers_and_restart_restores_data() {
    let dir = tempfile::tempdir().unwrap();
    let srv = start(AppState::open(config(dir.path(), "")).await).await;
    let http = client();
    let eta_url = format!("http://{}/v1/eta", srv.public);
    let (a, b) = (at(0.3, 0.3), at(0.7, 0.7));
    let now_trip = json!({"from": {"lat": a.lat, "lon": a.lon}, "to": {"lat": b.lat, "lon": b.lon}, "budget_ms": 2000});
    let v: Value = http
        .post(&eta_url)
        .json(&now_trip)
        .send()
        .await
        .unwrap()
        .json()
        .await
        .unwrap();
    assert_eq!(v["tier"], "free_flow", "no table yet: {v}");

    // Upload a historical table, then post live observations and time how
    // long until answers reflect them (the live loop re-customizes).
    let t = tables::every_edge_at_ten(33.0);
    let r = http
        .put(format!(
            "http://{}/admin/regions/testcity/historical",
            srv.admin
        ))
        .bearer_auth(TOKEN)
        .body(t)
        .send()
        .await
        .unwrap();
    assert_eq!(r.status(), 200);
    let obs_time = chrono::Utc::now().to_rfc3339();
    let batch = tables::observations(usize::MAX, 9.0, &obs_time, 2);
    let posted = Instant::now();
    let r = http
        .post(format!("http://{}/admin/regions/testcity/live", srv.admin))
        .bearer_auth(TOKEN)
        .json(&batch)
        .send()
        .await
        .unwrap();
    assert_eq!(r.status(), 200, "{}", r.text().await.unwrap());
    let mut reflected = None;
    while posted.elapsed() < Duration::from_secs(10) {
        let v: Value = http
            .post(&eta_url)
            .json(&now_trip)
            .send()
            .await
            .unwrap()
            .json()
            .await
            .unwrap();
        if v["tier"] == "live" {
            reflected = Some(posted.elapsed());
            break;
        }
        tokio::time::sleep(Duration::from_millis(5)).await;
    }
    let reflected = reflected.expect("live data reached answers within 10 s");
    eprintln!(
        "live update latency (3,000-node city, debug-optimised build): {:?}",
        reflected
    );
    let live_answer: Value = http
        .post(&eta_url)
        .json(&now_trip)
        .send()
        .await
        .unwrap()
        .json()
        .await
        .unwrap();
    let version = srv.state.service.regions[0]
        .status()
        .historical_version
        .clone();
    let live_edges = srv.state.service.regions[0].status().live_edges;
    assert!(live_edges > 0);
    assert!(version.is_some());
    // Give the live loop time to save the layer (at most every 2 s).
    tokio::time::sleep(Duration::from_millis(2500)).await;
    srv.state.service.regions[0].refresh_live(true).await;
    srv.stop().await;

    // Restart on the same state directory: both tables come back.
    let st = AppState::open(config(dir.path(), "")).await;
    assert_eq!(
        st.service.regions[0].status().historical_version,
        version,
        "historical table restored"
    );
    st.service.regions[0].refresh_live(true).await;
    let srv = start(st).await;
    let v: Value = http
        .post(format!("http://{}/v1/eta", srv.public))
        .json(&now_trip)
        .send()
        .await
        .unwrap()
        .json()
        .await
        .unwrap();
    assert_eq!(v["tier"], "live", "live layer restored: {v}");
    let (x, y) = (
        v["eta_s"].as_f64().unwrap(),
        live_answer["eta_s"].as_f64().unwrap(),
    );
    // The same observations, a few seconds older: the live weight has
    // decayed a little (half-life 120 s) towards the faster historical base,
    // so the answer may only be somewhat faster, never slower.
    assert!(
        x <= y * 1.001 && x > 0.8 * y,
        "after restart {v} vs before {live_answer}"
    );
    assert_eq!(
        srv.state.service.regions[0].status().live_edges,
        live_edges,
        "every live observation restored"
    );
    srv.stop().await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn simple_throughput_and_p99() {
    // A small, bounded figure for the closing note (the load harness is
    // its own tool): 2,000 GET /v1/eta requests from 8 connections.
    let dir = tempfile::tempdir().unwrap();
    let srv = start(AppState::open(config(dir.path(), "")).await).await;
    let http = client();
    let mut tasks = Vec::new();
    let started = Instant::now();
    for w in 0..8u32 {
        let http = http.clone();
        let base = format!("http://{}/v1/eta", srv.public);
        tasks.push(tokio::spawn(async move {
            let mut lat = Vec::new();
            for i in 0..250u32 {
                let f = ((w * 250 + i) % 97) as f64 / 97.0;
                let (a, b) = (at(0.1 + 0.8 * f, 0.2), at(0.9 - 0.8 * f, 0.8));
                let url = format!("{base}?from={},{}&to={},{}", a.lat, a.lon, b.lat, b.lon);
                let t = Instant::now();
                let r = http.get(&url).send().await.unwrap();
                assert!(r.status().is_success());
                let _ = r.bytes().await.unwrap();
                lat.push(t.elapsed());
            }
            lat
        }));
    }
    let mut all = Vec::new();
    for t in tasks {
        all.extend(t.await.unwrap());
    }
    let secs = started.elapsed().as_secs_f64();
    all.sort();
    let p = |q: f64| all[((all.len() as f64 * q) as usize).min(all.len() - 1)];
    eprintln!(
        "throughput: {} requests in {:.2} s = {:.0} req/s; p50 {:?}, p99 {:?} (closed loop, 8 connections, same machine)",
        all.len(),
        secs,
        all.len() as f64 / secs,
        p(0.5),
        p(0.99)
    );
    assert_eq!(all.len(), 2000);
    srv.stop().await;
}
