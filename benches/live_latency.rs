//! Live-update latency: the time from a POST of live observations to the
//! first answer that reflects them, on USA-road-d.NY (or a 300,000-node
//! synthetic city when the data is absent). Runs the real server on
//! 127.0.0.1 port 0 in-process, posts 10 batches of 2,000 observations,
//! and prints the median and maximum. `cargo bench --bench live_latency`.
//! Not a criterion bench: each sample includes a re-customization that the
//! server schedules itself.

mod common;

use hodos::engine::build::{build_from_graph, Quiet};
use hodos::http::{bind, AppState};
use hodos::server::run as serve;
use hodos_test_support::region_table;
use hodos_testkit::observation;
use serde_json::{json, Value};
use std::time::{Duration, Instant};

fn main() {
    if std::env::args().any(|a| a == "--list") {
        return;
    }
    let (name, raw) = common::bench_graph();
    let art = build_from_graph(name.clone(), raw, 0.0, &mut Quiet).expect("build");
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("live.hodos");
    art.save(&path).unwrap();
    let g = &art.graph;
    let (lo, hi) = g.bbox();
    let text = format!(
        r#"
[admin]
token = "bench"
[query]
default_budget_ms = 2000
{}"#,
        region_table("bench", &path, &dir.path().join("state"), lo, hi, 0.01)
    );
    let cfg = hodos::config::Config::parse(&text).unwrap();
    let recustomize_ms = cfg.live.recustomize_ms;
    // A trip across the middle of the region and the edges of its path.
    let region = hodos::engine::region::Region::from_artifact(art.clone());
    let metric = region.free_flow();
    let mut q = hodos::engine::cch::CchQuery::new(&region.cch);
    let a = hodos::engine::geo::LatLon::new(
        lo.lat + (hi.lat - lo.lat) * 0.4,
        lo.lon + (hi.lon - lo.lon) * 0.4,
    );
    let b = hodos::engine::geo::LatLon::new(
        lo.lat + (hi.lat - lo.lat) * 0.6,
        lo.lon + (hi.lon - lo.lon) * 0.6,
    );
    let route = region.route(&metric, &mut q, a, b, 1e9).expect("route");
    let mut path_edges = Vec::new();
    q.unpack_edges(&region.cch, &metric.customized, &mut path_edges);
    drop(region);
    let rt = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()
        .unwrap();
    rt.block_on(async move {
        let state = AppState::open(cfg).await;
        let p = bind("127.0.0.1:0".parse().unwrap()).await.unwrap();
        let ad = bind("127.0.0.1:0".parse().unwrap()).await.unwrap();
        let (pa, aa) = (p.local_addr().unwrap(), ad.local_addr().unwrap());
        let (tx, rx) = tokio::sync::oneshot::channel::<()>();
        let server = tokio::spawn(serve(state, p, ad, async move {
            let _ = rx.await;
        }));
        let http = reqwest::Client::new();
        let trip = json!({"from": {"lat": a.lat, "lon": a.lon}, "to": {"lat": b.lat, "lon": b.lon}});
        let eta = |http: reqwest::Client, trip: Value| async move {
            let v: Value = http.post(format!("http://{pa}/v1/eta")).json(&trip).send().await.unwrap().json().await.unwrap();
            v
        };
        let mut samples = Vec::new();
        for round in 0..10 {
            // Alternate speeds on the trip's own edges plus filler edges,
            // so every round changes the answer.
            let speed = if round % 2 == 0 { 7.0 } else { 70.0 };
            let now = chrono::Utc::now().to_rfc3339();
            let mut batch = Vec::new();
            for e in path_edges.iter().copied().chain((0..g.num_edges() as u32).step_by(g.num_edges() / 2000 + 1)).take(2000) {
                let (f, t) = (g.node_ext[g.edge_tail[e as usize] as usize], g.node_ext[g.edge_head[e as usize] as usize]);
                batch.push(observation(f, t, speed, &now, 1));
            }
            let before = eta(http.clone(), trip.clone()).await["eta_s"].as_f64().unwrap();
            let t0 = Instant::now();
            let r = http.post(format!("http://{aa}/admin/regions/bench/live")).bearer_auth("bench").json(&batch).send().await.unwrap();
            assert!(r.status().is_success(), "{}", r.text().await.unwrap());
            loop {
                let v = eta(http.clone(), trip.clone()).await;
                if v["tier"] == "live" && (v["eta_s"].as_f64().unwrap() - before).abs() > 1.0 {
                    samples.push(t0.elapsed());
                    break;
                }
                if t0.elapsed() > Duration::from_secs(30) {
                    panic!("round {round}: answers did not reflect the POST within 30 s");
                }
                tokio::time::sleep(Duration::from_millis(2)).await;
            }
            tokio::time::sleep(Duration::from_millis(300)).await;
        }
        samples.sort();
        println!(
            "live update latency on {name} ({} edges, recustomize every {recustomize_ms} ms): median {:?}, max {:?} over {} POSTs (trip {:.0} m)",
            g.num_edges(),
            samples[samples.len() / 2],
            samples[samples.len() - 1],
            samples.len(),
            route.eta.meters
        );
        let _ = tx.send(());
        let _ = server.await;
    });
}
