//! Exactness through the HTTP API on USA-road-d.NY (9th DIMACS
//! Implementation Challenge; found through HODOS_DATA_DIR, SKIPPED without
//! it): 1,000 node-to-node pairs asked as `POST /v1/eta` and the same 1,000
//! as the cells of one 40 × 25 `POST /v1/eta/matrix`, every `eta_s` equal
//! to the millisecond to petgraph's Dijkstra (the reference) between the
//! two nodes, and every answer from the graph, first on free-flow speeds
//! (no historical table) and then after uploading a historical table of
//! random speeds through the admin API, asked at a departure in the hour
//! the table fills.
//!
//! The random table gives one speed per pair of end nodes (a row names a
//! road by its ends, so parallel roads share it); the reference metric is
//! built from the same speeds with the engine's documented travel-time rule
//! (`metric::travel_ms`: length × 3600 / speed, rounded to the
//! millisecond).

use hodos::engine::build::{build, Quiet, Source};
use hodos::engine::graph::RoadGraph;
use hodos::engine::metric::{free_flow, from_speeds};
use hodos::http::{admin_app, app, AppState};
use hodos_test_service::http::send;
use hodos_test_service::service::TOKEN;
use hodos_test_support::graphs::distinct_nodes;
use hodos_test_support::region_table;
use hodos_test_support::{dimacs_ny, petgraph_of, reference_dists, write, SplitMix64};
use hodos_testkit::HistoricalCsv;
use serde_json::{json, Value};
use std::collections::HashMap;

/// Sources and targets of the pairs: 40 × 25 = 1,000.
const SOURCES: usize = 40;
const TARGETS: usize = 25;
/// A Monday 08:30 UTC: hour of week 8 (the region's zone is UTC).
const DEPART: &str = "2026-12-07T08:30:00Z";
const HOUR: u32 = 8;

fn coord(g: &RoadGraph, v: u32) -> Value {
    let p = g.node_pos(v);
    json!({"lat": p.lat, "lon": p.lon})
}

/// Reference milliseconds from each source to each target.
fn reference(g: &RoadGraph, weights: &[u32], src: &[u32], dst: &[u32]) -> Vec<Option<u64>> {
    let pg = petgraph_of(g, weights);
    let mut out = Vec::with_capacity(src.len() * dst.len());
    for &s in src {
        let d = reference_dists(&pg, s);
        out.extend(dst.iter().map(|&t| d[t as usize]));
    }
    out
}

/// Compares one answer (`eta_s`, `tier`) with the reference; `None` when
/// it agrees, else a description.
fn mismatch(what: &str, eta: &Value, tier: &Value, want: Option<u64>) -> Option<String> {
    let want = want?; // every sampled pair is connected in NY; see below
    let ok = eta.as_f64() == Some(want as f64 / 1000.0) && tier.as_str() != Some("heuristic");
    (!ok).then(|| format!("{what}: eta_s {eta} tier {tier}, Dijkstra {want} ms"))
}

/// Asks every pair as an ETA and as a matrix cell; returns the mismatches.
async fn ask_all(
    public: &axum::Router,
    g: &RoadGraph,
    src: &[u32],
    dst: &[u32],
    want: &[Option<u64>],
    depart: Option<&str>,
) -> Vec<String> {
    let mut bad = Vec::new();
    let with_depart = |mut v: Value| {
        v["budget_ms"] = json!(60_000);
        if let Some(d) = depart {
            v["leaving"] = json!(d);
        }
        serde_json::to_vec(&v).unwrap()
    };
    for (i, &s) in src.iter().enumerate() {
        for (j, &t) in dst.iter().enumerate() {
            let body = with_depart(json!({"from": coord(g, s), "to": coord(g, t)}));
            let r = send(
                public,
                "POST",
                "/v1/eta",
                Some("application/json"),
                body,
                None,
            )
            .await;
            assert_eq!(r.status, 200, "{}", r.text);
            let v = r.json();
            let w = want[i * dst.len() + j];
            bad.extend(mismatch(
                &format!("eta {s}→{t}"),
                &v["eta_s"],
                &v["tier"],
                w,
            ));
        }
    }
    let body = with_depart(json!({
        "from": src.iter().map(|&s| coord(g, s)).collect::<Vec<_>>(),
        "to": dst.iter().map(|&t| coord(g, t)).collect::<Vec<_>>(),
    }));
    let r = send(
        public,
        "POST",
        "/v1/eta/matrix",
        Some("application/json"),
        body,
        None,
    )
    .await;
    assert_eq!(r.status, 200, "{}", r.text);
    let v = r.json();
    for (i, &s) in src.iter().enumerate() {
        for (j, &t) in dst.iter().enumerate() {
            let w = want[i * dst.len() + j];
            let (eta, tier) = (&v["eta_s"][i][j], &v["tier"][i][j]);
            bad.extend(mismatch(&format!("cell {s}→{t}"), eta, tier, w));
        }
    }
    bad
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn node_pairs_through_http_equal_dijkstra_before_and_after_an_upload() {
    let Some(ny) = dimacs_ny() else { return };
    let artifact = build(
        &Source::Dimacs {
            gr: ny.distance_gr.clone(),
            co: ny.coordinates.clone(),
        },
        &mut Quiet,
    )
    .expect("build NY");
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ny.hodos");
    artifact.save(&path).unwrap();
    let g = &artifact.graph;
    let (lo, hi) = g.bbox();
    let text = format!(
        "[server]\ncustomize_priority = \"normal\"\n[admin]\ntoken = \"{TOKEN}\"\n\
         [query]\nmax_budget_ms = 60000\nmax_matrix_cells = 40000\n{}",
        region_table("ny", &path, &dir.path().join("state"), lo, hi, 0.01)
    );
    let st = AppState::open(hodos::config::Config::parse(&text).unwrap()).await;
    let (public, admin) = (app(st.clone()), admin_app(st));

    let nodes = distinct_nodes(g);
    let mut rng = SplitMix64::new(0x4e59_4854_5450);
    let mut pick = |k: usize| -> Vec<u32> {
        (0..k)
            .map(|_| nodes[rng.below(nodes.len()) as usize])
            .collect()
    };
    let (src, dst) = (pick(SOURCES), pick(TARGETS));

    // Free-flow: no table, leaving now.
    let want = reference(g, &free_flow(g), &src, &dst);
    // NY is one strongly connected component in the DIMACS file, so every
    // sampled pair has a reference distance.
    assert!(
        want.iter().all(Option::is_some),
        "a sampled pair is unreachable"
    );
    let bad = ask_all(&public, g, &src, &dst, &want, None).await;
    assert!(
        bad.is_empty(),
        "free-flow: {} of {} off: {:?}",
        bad.len(),
        2 * want.len(),
        &bad[..bad.len().min(5)]
    );

    // Random speeds for every road in hour 8, one per pair of ends.
    let mut speed_of: HashMap<(u64, u64), f32> = HashMap::new();
    let mut rng = SplitMix64::new(17);
    let mut csv = HistoricalCsv::with_header();
    let speeds: Vec<f32> = (0..g.num_edges())
        .map(|e| {
            let ends = (
                g.node_ext[g.edge_tail[e] as usize],
                g.node_ext[g.edge_head[e] as usize],
            );
            *speed_of.entry(ends).or_insert_with(|| {
                let s = 5.0 + (rng.next_u64() % 1000) as f32 / 10.0;
                csv.row(ends.0, ends.1, HOUR, s);
                s
            })
        })
        .collect();
    let table = write(dir.path(), "random.csv", csv.into_string());
    let r = send(
        &admin,
        "PUT",
        "/admin/regions/ny/historical",
        Some("text/csv"),
        std::fs::read(&table).unwrap(),
        Some(TOKEN),
    )
    .await;
    assert_eq!(r.status, 200, "upload: {}", r.text);
    let want = reference(g, &from_speeds(g, &speeds), &src, &dst);
    let bad = ask_all(&public, g, &src, &dst, &want, Some(DEPART)).await;
    assert!(
        bad.is_empty(),
        "random speeds: {} of {} off: {:?}",
        bad.len(),
        2 * want.len(),
        &bad[..bad.len().min(5)]
    );
}
