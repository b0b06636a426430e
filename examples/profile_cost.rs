//! One-off measurement of what hour-of-week profiles cost on USA-road-d.NY
//! (HODOS_DATA_DIR): resident memory and load time of a region opened with
//! testkit's 168-hour weekly table, and the median latency of `trip` for
//! "now" departures and for random departures over a week.
//!
//! `cargo run --release --example profile_cost -- [PROFILES]` (default 4, the `query.profiles` default).
//! The parent builds the artifact and the table; a child process opens the
//! region and measures, so the build's own memory does not count.

use chrono::{Duration, TimeZone, Utc};
use hodos::engine::build::{build_from_graph, Quiet};
use hodos::engine::import::dimacs;
use hodos::serving::admission::Admit;
use hodos::serving::answer::{trip, Catalog, TripQuery};
use hodos::serving::settings::{
    Coverage, CustomizePriority, QueryConfig, RegionConfig, ServingSettings,
};
use hodos::serving::snapshot::{RegionUpdater, UpdateSettings};
use hodos::serving::tier::Tier;
use hodos_test_support::weekly_table;
use hodos_testkit::{DimacsNy, SplitMix64};
use std::path::PathBuf;
use std::time::Instant;

fn status_kb(key: &str) -> u64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with(key))
                .and_then(|l| l.split_whitespace().nth(1))
                .and_then(|v| v.parse().ok())
        })
        .unwrap_or(0)
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let profiles: usize = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(4);
    let Ok(dir) = std::env::var("PROFILE_COST_DIR") else {
        let ny = match DimacsNy::find() {
            Ok(ny) => ny,
            Err(e) => return hodos_testkit::skipped(e),
        };
        let raw = dimacs::read(&ny.distance_gr, &ny.coordinates).expect("read NY");
        let art = build_from_graph("dimacs:NY".into(), raw, 0.0, &mut Quiet).expect("build");
        let dir = tempfile::tempdir().expect("tempdir");
        art.save(&dir.path().join("ny.hodos")).expect("save");
        let table = weekly_table(&art.graph, 40, 2026);
        std::fs::write(dir.path().join("historical.csv"), table.csv).expect("table");
        drop(art);
        let status = std::process::Command::new(std::env::current_exe().expect("exe"))
            .arg(profiles.to_string())
            .env("PROFILE_COST_DIR", dir.path())
            .status()
            .expect("child");
        std::process::exit(status.code().unwrap_or(1));
    };
    let dir = PathBuf::from(dir);
    let mut s = ServingSettings {
        customize_priority: CustomizePriority::Normal,
        ..ServingSettings::default()
    };
    // Through serde so the same file builds where the setting is unknown.
    s.query = serde_json::from_value::<QueryConfig>(serde_json::json!({ "profiles": profiles }))
        .unwrap_or_default();
    s.query.max_queue_ms = 0;
    s.query.max_cpu_wait = 0.0;
    let art = hodos::engine::artifact::Artifact::load(&dir.join("ny.hodos")).expect("load");
    let (lo, hi) = art.graph.bbox();
    let positions: Vec<_> = (0..art.graph.num_nodes() as u32)
        .map(|v| art.graph.node_pos(v))
        .collect();
    drop(art);
    let cfg = RegionConfig {
        name: "ny".into(),
        artifact: dir.join("ny.hodos"),
        time_zone: "UTC".into(),
        coverage: Coverage::Bbox([lo.lat - 0.01, lo.lon - 0.01, hi.lat + 0.01, hi.lon + 0.01]),
        historical: Some(dir.join("historical.csv")),
        live_dir: None,
        model: None,
        state_dir: dir.join("state"),
    };
    let rt = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()
        .expect("runtime");
    let before = status_kb("VmRSS:");
    let t = Instant::now();
    let handle = rt.block_on(RegionUpdater::open(cfg, UpdateSettings::from_settings(&s)));
    let open_s = t.elapsed().as_secs_f64();
    let after = status_kb("VmRSS:");
    let hwm = status_kb("VmHWM:");
    let cat = Catalog::new(s, vec![handle.reader().clone()]);
    let mut rng = SplitMix64::new(7);
    let week = Utc.with_ymd_and_hms(2027, 1, 4, 0, 0, 0).unwrap();
    let mut run = |random_departure: bool| {
        let (mut lat, mut heuristic) = (Vec::new(), 0);
        for _ in 0..2000 {
            let a = positions[rng.below(positions.len()) as usize];
            let b = positions[rng.below(positions.len()) as usize];
            let depart =
                random_departure.then(|| week + Duration::seconds(rng.below(7 * 24 * 3600) as i64));
            let t = Instant::now();
            let ans = rt.block_on(trip(
                &cat,
                &TripQuery {
                    from: a,
                    to: b,
                    depart,
                    budget_ms: None,
                    geometry: false,
                },
                Admit::Uncounted,
            ));
            lat.push(t.elapsed().as_secs_f64() * 1e6);
            heuristic += usize::from(ans.tier == Tier::Heuristic);
        }
        (median(lat), heuristic)
    };
    let (now_us, now_h) = run(false);
    let (rand_us, rand_h) = run(true);
    let mb = |kb: u64| kb as f64 / 1024.0;
    println!(
        "profiles {profiles}: open {open_s:.1} s; resident {:.1} MB after open (before {:.1} MB, peak {:.1} MB); \
         trip median {now_us:.0} µs now ({now_h}/2000 heuristic), {rand_us:.0} µs random departures ({rand_h}/2000 heuristic)",
        mb(after),
        mb(before),
        mb(hwm)
    );
}
