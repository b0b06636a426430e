//! Every departure hour answered from the graph, on USA-road-d.NY from the
//! 9th DIMACS Implementation Challenge (found through HODOS_DATA_DIR; see
//! ../shared/data/dimacs/SOURCES.md; SKIPPED without it).
//!
//! A 168-hour historical table with four daily patterns (night free-flow,
//! weekday peaks, weekday midday, weekend daytime) and ±3 % noise per
//! (edge, hour) is loaded with the region. Then 1,000 random departures over
//! a week between random intersections, under the default budget:
//! - none is answered by the heuristic tier (before hour-of-week profiles,
//!   a departure in an hour not customized yet was `budget_exceeded`);
//! - each answer names its hour of week, checked against chrono's weekday
//!   and hour (hour 0 = Monday 00:00, the table format's definition);
//! - each ETA equals, to the millisecond, petgraph's Dijkstra between the
//!   two nodes on the weights of the profile the answer names: length ÷
//!   speed of that profile's representative hour as written in the table
//!   (free-flow where it has no row), worked out here from the table rows.

use chrono::{Datelike, Duration, TimeZone, Timelike, Utc};
use hodos_engine::build::{build_from_graph, Quiet};
use hodos_engine::import::dimacs;
use hodos_serving::admission::Admit;
use hodos_serving::answer::{trip, Catalog, TripQuery};
use hodos_serving::settings::{Coverage, CustomizePriority, RegionConfig, ServingSettings};
use hodos_serving::snapshot::{RegionUpdater, UpdateSettings};
use hodos_serving::tier::Tier;
use hodos_test_support::graphs::distinct_nodes;
use hodos_test_support::{dimacs_ny, petgraph_of, reference_dists, SplitMix64};
use hodos_test_support::{weekly_table, WeeklyTable};
use std::collections::BTreeMap;
use std::time::Instant;

/// One answered departure: target node, ETA in ms, hour of week.
type Asked = (u32, u64, u8);

const DEPARTURES: usize = 1000;
const SOURCES: usize = 8;
/// Every `EDGE_STEP`-th (tail, head) pair gets table rows.
const EDGE_STEP: usize = 40;

#[test]
fn ny_every_departure_hour_answers_from_its_profile() {
    let Some(ny) = dimacs_ny() else {
        return;
    };
    let t0 = Instant::now();
    let raw = dimacs::read(&ny.distance_gr, &ny.coordinates).expect("read NY");
    let art = build_from_graph("dimacs:NY".into(), raw, 0.0, &mut Quiet).expect("build");
    eprintln!("NY build {:.1} s", t0.elapsed().as_secs_f64());
    let dir = tempfile::tempdir().unwrap();
    let artifact = dir.path().join("ny.hodos");
    art.save(&artifact).unwrap();
    let g = &art.graph;

    // The table (testkit's weekly patterns with noise); `speed` keeps each
    // written value as the f32 the parser stores.
    let WeeklyTable { csv, speed } = weekly_table(g, EDGE_STEP, 2026);
    let mut rng = SplitMix64::new(2026);
    let table = dir.path().join("historical.csv");
    std::fs::write(&table, csv).unwrap();

    let (lo, hi) = g.bbox();
    let cfg = RegionConfig {
        name: "ny".into(),
        artifact: artifact.clone(),
        time_zone: "UTC".into(),
        coverage: Coverage::Bbox([lo.lat - 0.01, lo.lon - 0.01, hi.lat + 0.01, hi.lon + 0.01]),
        historical: Some(table),
        live_dir: None,
        model: None,
        state_dir: dir.path().join("state"),
    };
    let mut s = ServingSettings {
        customize_priority: CustomizePriority::Normal,
        ..ServingSettings::default()
    };
    s.query.max_queue_ms = 0;
    s.query.max_cpu_wait = 0.0;
    let rt = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()
        .unwrap();
    let t1 = Instant::now();
    let handle = rt.block_on(RegionUpdater::open(cfg, UpdateSettings::from_settings(&s)));
    let status = handle.status();
    let prof = status.profiles.clone().expect("profiles in the status");
    eprintln!(
        "NY open with a 168-hour table: {:.1} s; {} profiles (exact {}), representatives {:?}, \
         deviation median {:.4} max {:.4}, {:.1} MB of metrics, built in {:.1} s",
        t1.elapsed().as_secs_f64(),
        prof.count,
        prof.exact,
        prof.representatives,
        prof.deviation_median,
        prof.deviation_max,
        prof.metric_bytes as f64 / 1e6,
        prof.build_s
    );
    assert!(status.ready);
    assert_eq!(prof.count, 4, "default query.profiles");
    assert!(!prof.exact, "noise makes every hour distinct");
    let cat = Catalog::new(s, vec![handle.reader().clone()]);

    // Departures: sources × random targets among nodes with a position of
    // their own (a coordinate there snaps onto the node).
    let nodes = distinct_nodes(&art.graph);
    let sources: Vec<u32> = (0..SOURCES)
        .map(|_| nodes[rng.below(nodes.len()) as usize])
        .collect();
    let week = Utc.with_ymd_and_hms(2027, 1, 4, 0, 0, 0).unwrap(); // a Monday
    assert_eq!(week.weekday(), chrono::Weekday::Mon);
    let t2 = Instant::now();
    let mut asked: BTreeMap<(u8, u32), Vec<Asked>> = BTreeMap::new();
    let mut estimates = Vec::new();
    for i in 0..DEPARTURES {
        let s_node = sources[i % SOURCES];
        let t_node = nodes[rng.below(nodes.len()) as usize];
        let depart = week + Duration::seconds(rng.below(7 * 24 * 3600) as i64);
        let a = rt.block_on(trip(
            &cat,
            &TripQuery {
                from: g.node_pos(s_node),
                to: g.node_pos(t_node),
                depart: Some(depart),
                budget_ms: None,
                geometry: false,
            },
            Admit::Uncounted,
        ));
        // The hour of week by chrono: days since Monday × 24 + hour (UTC).
        let hour = (depart.weekday().num_days_from_monday() * 24 + depart.hour()) as u8;
        assert_eq!(a.hour_of_week, Some(hour));
        // Graph answers are `historical` or `free_flow` by the share of the
        // route's time on edges the table names (1 in 40 here); the
        // estimate is `heuristic`.
        if a.tier == Tier::Heuristic {
            estimates.push((depart, a.tier, a.reason));
            continue;
        }
        let p = a.profile.expect("a graph answer from a profile names it");
        assert_eq!(p.index, prof.hour_profile[hour as usize]);
        assert_eq!(
            p.representative_hour,
            prof.representatives[p.index as usize]
        );
        asked
            .entry((p.representative_hour, s_node))
            .or_default()
            .push((t_node, (a.eta_s * 1000.0).round() as u64, hour));
    }
    eprintln!(
        "{DEPARTURES} departures answered in {:.1} s",
        t2.elapsed().as_secs_f64()
    );
    assert!(
        estimates.is_empty(),
        "{} of {DEPARTURES} departures fell to the estimate, e.g. {:?}",
        estimates.len(),
        &estimates[..estimates.len().min(5)]
    );

    // petgraph's Dijkstra on each named profile's weights: length × 3600 ÷
    // speed in ms, rounded, at least 1 (the metric's documented rounding),
    // with the speed written for the representative hour or free-flow.
    let mut checked = 0;
    let mut by_rep: BTreeMap<u8, Vec<(u32, &Vec<Asked>)>> = BTreeMap::new();
    for ((rep, s_node), list) in &asked {
        by_rep.entry(*rep).or_default().push((*s_node, list));
    }
    for (rep, per_source) in by_rep {
        let weights: Vec<u32> = (0..g.num_edges())
            .map(|e| {
                let (u, v) = (
                    g.node_ext[g.edge_tail[e] as usize],
                    g.node_ext[g.edge_head[e] as usize],
                );
                let kmh = speed
                    .get(&(u, v, rep))
                    .copied()
                    .unwrap_or(g.edge_speed_kmh[e]);
                ((g.edge_len_m[e] * 3600.0 / f64::from(kmh)).round() as u64).max(1) as u32
            })
            .collect();
        let pg = petgraph_of(g, &weights);
        for (s_node, list) in per_source {
            let dist = reference_dists(&pg, s_node);
            for &(t_node, ms, hour) in list {
                let want = dist[t_node as usize].expect("NY is strongly connected");
                assert_eq!(
                    ms, want,
                    "{s_node}→{t_node} at hour {hour} (profile hour {rep}): {ms} ms vs petgraph {want} ms"
                );
                checked += 1;
            }
        }
    }
    assert_eq!(checked, DEPARTURES);
}
