//! What the write-ahead log costs a live upload: the median time of
//! `RegionUpdater::put_live` (parse, apply, log with `fdatasync`) and of the
//! log append alone with and without the sync, on the same batch, in a
//! state directory on the file system of the current directory.
//! `cargo run --release --example wal_cost -- [BATCH_ROWS] [RUNS]`.
use hodos::config::Config;
use hodos::engine::build::{build, Quiet, Source};
use hodos::serving::speeds::wal::{self, BatchKind};
use hodos_test_support::region_table;
use hodos_testkit::observation;
use std::time::Instant;

fn median_ms(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let rows: usize = std::env::args().nth(1).map_or(200, |s| s.parse().unwrap());
    let runs: usize = std::env::args().nth(2).map_or(200, |s| s.parse().unwrap());
    let dir = tempfile::tempdir_in(".").unwrap();
    let art = build(
        &Source::Synthetic {
            nodes: 3_000,
            seed: 9,
        },
        &mut Quiet,
    )
    .unwrap();
    let artifact = dir.path().join("city.hodos");
    art.save(&artifact).unwrap();
    let (lo, hi) = art.graph.bbox();
    let g = &art.graph;
    let now = chrono::Utc::now().to_rfc3339();
    let batch: Vec<_> = (0..rows.min(g.num_edges()))
        .map(|e| {
            let (f, t) = (
                g.node_ext[g.edge_tail[e] as usize],
                g.node_ext[g.edge_head[e] as usize],
            );
            observation(f, t, 20.0, &now, 3)
        })
        .collect();
    let body = serde_json::to_vec(&batch).unwrap();
    let state = dir.path().join("state");
    let text = format!(
        "[server]\ncustomize_priority = \"normal\"\n{}",
        region_table("bench", &artifact, &state, lo, hi, 0.05)
    );
    let cfg = Config::parse(&text).unwrap();
    let rt = tokio::runtime::Runtime::new().unwrap();
    let uploads: Vec<f64> = rt.block_on(async {
        let st = hodos::http::AppState::open(cfg).await;
        let region = st.service.regions[0].clone();
        let mut out = Vec::new();
        for _ in 0..runs {
            let t = Instant::now();
            region.put_live(&body, false).await.unwrap();
            out.push(t.elapsed().as_secs_f64() * 1e3);
        }
        out
    });
    let log = dir.path().join("bench.wal");
    let append = |sync: bool| -> Vec<f64> {
        wal::clear(&log).unwrap();
        (0..runs)
            .map(|_| {
                let t = Instant::now();
                wal::append(&log, BatchKind::Json, &body, sync).unwrap();
                t.elapsed().as_secs_f64() * 1e3
            })
            .collect()
    };
    let (synced, unsynced) = (append(true), append(false));
    println!(
        "batch of {rows} observations ({} bytes), {runs} runs each, medians:",
        body.len()
    );
    println!(
        "  put_live (parse + apply + log + sync): {:.3} ms",
        median_ms(uploads)
    );
    println!(
        "  log append with fdatasync:             {:.3} ms",
        median_ms(synced)
    );
    println!(
        "  log append without sync:               {:.3} ms",
        median_ms(unsynced)
    );
}
