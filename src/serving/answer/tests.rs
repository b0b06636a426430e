//! Tier and fallback decisions of [`super::trip`] and
//! [`super::matrix_trip`], called directly on a [`Catalog`] over small
//! synthetic regions of the fictional city Quellhaven (no HTTP).
//!
//! References outside the project, named beside each check:
//! - graph answers: `petgraph::algo::dijkstra` (crates.io petgraph 0.8) on
//!   the same edge weights, trips between two graph nodes whose roads are
//!   all two-way (a node snaps onto itself, so the answer is node to node);
//! - a table of one speed: weights by hand, length ÷ speed in ms;
//! - heuristic answers: the haversine formula (great-circle distance on a
//!   sphere, mean Earth radius 6 371 008.8 m, IUGG) × circuity ÷ speed,
//!   written out here;
//! - unreachable pairs: petgraph's Dijkstra reaches no distance.

use super::{matrix_trip, trip, Answer, Catalog, MatrixAnswer, MatrixQuery, TripQuery};
use crate::admission::{Admission, Admit, Ticket};
use crate::service::Service;
use crate::settings::{Coverage, CustomizePriority, RegionConfig, ServingSettings};
use crate::snapshot::{RegionUpdater, UpdateError, UpdateSettings};
use crate::tier::{FallbackReason as R, Tier};
use chrono::{DateTime, Duration as Days, Utc};
use hodos_engine::build::{assemble, build_from_graph, Quiet};
use hodos_engine::calibration::Calibration;
use hodos_engine::geo::LatLon;
use hodos_engine::graph::RoadGraph;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

/// The synthetic city's artifact, built once per test binary.
struct City {
    _dir: tempfile::TempDir,
    artifact: PathBuf,
    graph: RoadGraph,
}

fn city() -> &'static City {
    static C: OnceLock<City> = OnceLock::new();
    C.get_or_init(|| {
        let dir = tempfile::tempdir().unwrap();
        let raw = hodos_engine::import::synthetic::generate(600, 11);
        let art = build_from_graph("synthetic:quellhaven".into(), raw, 0.0, &mut Quiet).unwrap();
        let artifact = dir.path().join("quellhaven.hodos");
        art.save(&artifact).unwrap();
        City {
            _dir: dir,
            artifact,
            graph: art.graph,
        }
    })
}

fn settings() -> ServingSettings {
    let mut s = ServingSettings {
        // Tests share the machine; an idle-priority customizer could wait
        // behind other tests for seconds.
        customize_priority: CustomizePriority::Normal,
        ..ServingSettings::default()
    };
    s.live.ttl_s = 600.0;
    s.live.half_life_s = 120.0;
    s.query.max_queue_ms = 0;
    s.query.max_cpu_wait = 0.0;
    s
}

/// A service of one region on the synthetic city, with a fresh state
/// directory (removed when the returned one is dropped).
async fn city_service() -> (tempfile::TempDir, Service) {
    let c = city();
    let state = tempfile::tempdir().unwrap();
    let svc = catalog(&c.artifact, &c.graph, state.path()).await;
    (state, svc)
}

/// A ticket over the hard cap on requests in flight (an admission of
/// limit 0): the request it admits is shed.
fn shed_ticket() -> Ticket {
    Admission::new(0).enter()
}

/// A trip query without geometry.
fn query(
    from: LatLon,
    to: LatLon,
    depart: Option<DateTime<Utc>>,
    budget_ms: Option<u64>,
) -> TripQuery {
    TripQuery {
        from,
        to,
        depart,
        budget_ms,
        geometry: false,
    }
}

/// [`trip`] on [`query`], not counted by admission.
async fn ask(
    cat: &Catalog,
    from: LatLon,
    to: LatLon,
    depart: Option<DateTime<Utc>>,
    budget_ms: Option<u64>,
) -> Answer {
    trip(cat, &query(from, to, depart, budget_ms), Admit::Uncounted).await
}

/// [`ask`] leaving now with geometry, in a budget of 2 s.
async fn ask_route(cat: &Catalog, from: LatLon, to: LatLon) -> Answer {
    let q = TripQuery {
        geometry: true,
        ..query(from, to, None, Some(2000))
    };
    trip(cat, &q, Admit::Uncounted).await
}

/// [`matrix_trip`] from every `from` to every `to`, not counted by
/// admission.
async fn ask_matrix(
    cat: &Catalog,
    from: Vec<LatLon>,
    to: Vec<LatLon>,
    depart: Option<DateTime<Utc>>,
    budget_ms: Option<u64>,
) -> MatrixAnswer {
    let q = MatrixQuery {
        from,
        to,
        depart,
        budget_ms,
    };
    matrix_trip(cat, q, Admit::Uncounted).await
}

/// A service of one region on `artifact` (coverage: the graph's box with a
/// margin), with its own state directory.
async fn catalog(artifact: &Path, g: &RoadGraph, state: &Path) -> Service {
    let (lo, hi) = g.bbox();
    let cfg = RegionConfig {
        name: "quellhaven".into(),
        artifact: artifact.to_path_buf(),
        time_zone: "UTC".into(),
        coverage: Coverage::Bbox([lo.lat - 0.05, lo.lon - 0.05, hi.lat + 0.05, hi.lon + 0.05]),
        historical: None,
        live_dir: None,
        model: None,
        state_dir: state.to_path_buf(),
    };
    Service::open(settings(), &[cfg]).await
}

/// Haversine distance (published formula, mean Earth radius in metres).
fn haversine(a: LatLon, b: LatLon) -> f64 {
    let r = 6_371_008.8;
    let (p1, p2) = (a.lat.to_radians(), b.lat.to_radians());
    let (dp, dl) = (p2 - p1, (b.lon - a.lon).to_radians());
    let h = (dp / 2.0).sin().powi(2) + p1.cos() * p2.cos() * (dl / 2.0).sin().powi(2);
    2.0 * r * h.sqrt().asin()
}

/// (metres, seconds) of the heuristic: distance × circuity at `kmh`.
fn by_hand(a: LatLon, b: LatLon, circuity: f64, kmh: f64) -> (f64, f64) {
    let m = haversine(a, b) * circuity;
    (m, m / (kmh / 3.6))
}

fn close(x: f64, y: f64) -> bool {
    (x - y).abs() <= 1e-6 * y.abs().max(1.0)
}

/// The heuristic the region's calibration gives, worked by hand from its
/// factors for this distance.
fn region_estimate(cal: &Calibration, a: LatLon, b: LatLon) -> (f64, f64) {
    let (c, v) = cal.factors(haversine(a, b));
    by_hand(a, b, c, v)
}

/// petgraph Dijkstra travel time (ms) from node `s` to `t` over `w`.
fn dijkstra_ms(g: &RoadGraph, w: &[u32], s: u32, t: u32) -> Option<u64> {
    hodos_testkit::reference_dists(g.num_nodes(), &g.edge_tail, &g.edge_head, w, s)[t as usize]
}

/// Free-flow weights in ms, by hand: length ÷ speed.
fn weights_at(g: &RoadGraph, kmh: impl Fn(usize) -> f64) -> Vec<u32> {
    (0..g.num_edges())
        .map(|e| (g.edge_len_m[e] * 3600.0 / kmh(e)).round().max(1.0) as u32)
        .collect()
}

/// Profile index serving `hour` in the region's current snapshot.
fn hour_profile(region: &RegionUpdater, hour: u8) -> u8 {
    region
        .snapshot()
        .unwrap()
        .profiles
        .grouping
        .profile_of(hour)
}

/// Two nodes far apart whose every road is two-way.
fn two_way_pair(g: &RoadGraph) -> (u32, u32) {
    let ok = |v: u32| {
        (0..g.num_edges())
            .all(|e| (g.edge_tail[e] != v && g.edge_head[e] != v) || g.edge_twin[e] != u32::MAX)
            && (0..g.num_edges()).any(|e| g.edge_tail[e] == v)
    };
    let (lo, hi) = g.bbox();
    let near = |fy: f64, fx: f64| {
        let p = LatLon::new(
            lo.lat + (hi.lat - lo.lat) * fy,
            lo.lon + (hi.lon - lo.lon) * fx,
        );
        (0..g.num_nodes() as u32)
            .filter(|&v| ok(v))
            .min_by(|&a, &b| haversine(g.node_pos(a), p).total_cmp(&haversine(g.node_pos(b), p)))
            .unwrap()
    };
    (near(0.2, 0.25), near(0.8, 0.7))
}

#[tokio::test]
async fn gate_fallbacks_and_graph_tiers() {
    let g = &city().graph;
    let (_state, svc) = city_service().await;
    let cat = svc.catalog.clone();
    let region = svc.regions[0].clone();
    let cal = region.snapshot().unwrap().region.calibration.clone();
    let gen = region.snapshot().unwrap().generation;
    let (s, t) = two_way_pair(g);
    let (a, b) = (g.node_pos(s), g.node_pos(t));

    // Outside every region: configured defaults (1.3, 30 km/h), no tag.
    let (p, q) = (LatLon::new(10.0, 10.0), LatLon::new(10.1, 10.1));
    let r = ask(&cat, p, q, None, None).await;
    assert_eq!(
        (r.tier, r.reason, r.snapshot.clone()),
        (Tier::Heuristic, Some(R::OutsideRegions), None)
    );
    let (m, secs) = by_hand(p, q, 1.3, 30.0); // haversine × 1.3 ÷ 30 km/h
    assert!(
        close(r.meters, m) && close(r.eta_s, secs),
        "{r:?} vs {m} m {secs} s"
    );

    // Not admitted → overloaded, from the region's calibration.
    let r = trip(
        &cat,
        &query(a, b, None, Some(2000)),
        Admit::Counted(&shed_ticket()),
    )
    .await;
    assert_eq!((r.tier, r.reason), (Tier::Heuristic, Some(R::Overloaded)));
    assert_eq!(r.snapshot, Some(("quellhaven".into(), gen)));
    let (m, secs) = region_estimate(&cal, a, b); // haversine × factors
    assert!(close(r.meters, m) && close(r.eta_s, secs), "{r:?}");

    // Every graph permit taken for longer than the budget → overloaded too,
    // answered by the deadline (admission by deadline: the request waits
    // for a permit at most its budget; 1 s of slack for a loaded machine).
    let n = cat.cfg.query.graph_concurrency as u32;
    let held = cat.permits.clone().try_acquire_many_owned(n).unwrap();
    let t0 = std::time::Instant::now();
    let r = ask(&cat, a, b, None, Some(50)).await;
    assert_eq!((r.tier, r.reason), (Tier::Heuristic, Some(R::Overloaded)));
    let mx = ask_matrix(&cat, vec![a], vec![b], None, Some(50)).await;
    assert_eq!(
        (mx.cells[0].tier, mx.cells[0].reason),
        (Tier::Heuristic, Some(R::Overloaded))
    );
    assert!(t0.elapsed() < std::time::Duration::from_millis(2 * 50 + 1000));
    // A permit that frees inside the budget: the request waits for it and
    // answers from the graph.
    let release = tokio::spawn(async move {
        tokio::time::sleep(std::time::Duration::from_millis(30)).await;
        drop(held);
    });
    let r = ask(&cat, a, b, None, Some(2000)).await;
    assert_ne!(r.tier, Tier::Heuristic, "{r:?}");
    release.await.unwrap();

    // No live data, leaving now, no table → free_flow, no_live_data; the
    // time is petgraph's Dijkstra on free-flow weights.
    let free = weights_at(g, |e| f64::from(g.edge_speed_kmh[e]));
    let want = dijkstra_ms(g, &free, s, t).unwrap() as f64 / 1000.0;
    let r = ask(&cat, a, b, None, Some(2000)).await;
    assert_eq!(
        (r.tier, r.reason),
        (Tier::FreeFlow, Some(R::NoLiveData)),
        "{r:?}"
    );
    assert!(
        (r.eta_s - want).abs() < 1e-6,
        "{} vs petgraph {want}",
        r.eta_s
    );
    assert!(r.from_snap_m.unwrap() < 1e-3 && r.to_snap_m.unwrap() < 1e-3);
    // Routes take the same path and time.
    let r = ask_route(&cat, a, b).await;
    assert!((r.eta_s - want).abs() < 1e-6 && r.geometry.is_some());

    // A departure next week is not "now": free_flow (no table), no reason.
    let later = Utc::now() + Days::days(7);
    let r = ask(&cat, a, b, Some(later), Some(2000)).await;
    assert_eq!((r.tier, r.reason), (Tier::FreeFlow, None));

    // Far off-road but inside the coverage → off_network.
    let (lo, _) = g.bbox();
    let corner = LatLon::new(lo.lat - 0.04, lo.lon - 0.04);
    let r = ask(&cat, corner, b, None, Some(2000)).await;
    assert_eq!((r.tier, r.reason), (Tier::Heuristic, Some(R::OffNetwork)));
    let (m, secs) = region_estimate(&cal, corner, b);
    assert!(close(r.meters, m) && close(r.eta_s, secs), "{r:?}");

    // Matrix: graph cells from petgraph, the off-road row per cell.
    let mx = ask_matrix(&cat, vec![a, corner], vec![b, a], None, Some(2000)).await;
    assert_eq!(
        (mx.rows, mx.cols, mx.snapshot.clone()),
        (2, 2, Some(("quellhaven".into(), gen)))
    );
    assert_eq!(
        (mx.cells[0].tier, mx.cells[0].reason),
        (Tier::FreeFlow, Some(R::NoLiveData))
    );
    assert!(
        (mx.cells[0].eta_s - want).abs() < 1e-6,
        "{:?} vs petgraph {want}",
        mx.cells[0]
    );
    assert_eq!(mx.cells[1].eta_s, 0.0, "a to itself");
    for cell in &mx.cells[2..] {
        assert_eq!(
            (cell.tier, cell.reason),
            (Tier::Heuristic, Some(R::OffNetwork))
        );
    }
    let (_, secs) = region_estimate(&cal, corner, b);
    assert!(close(mx.cells[2].eta_s, secs));
    // Matrix outside every region.
    let mx = ask_matrix(&cat, vec![p], vec![q], None, None).await;
    assert_eq!(
        (mx.cells[0].tier, mx.cells[0].reason, mx.snapshot),
        (Tier::Heuristic, Some(R::OutsideRegions), None)
    );

    // One point outside every region degrades only its own row and column:
    // the cell whose ends share the region is the graph's answer (the trip
    // between the same points, petgraph-checked above), the others are
    // estimates from the configured defaults (haversine × 1.3 ÷ 30 km/h).
    let mx = ask_matrix(&cat, vec![a, p], vec![b, q], None, Some(2000)).await;
    let r = ask(&cat, a, b, None, Some(2000)).await;
    assert_eq!(
        (mx.cells[0].tier, mx.cells[0].reason, mx.cells[0].eta_s),
        (r.tier, r.reason, r.eta_s)
    );
    assert_eq!(mx.snapshot, Some(("quellhaven".into(), gen)));
    for (k, (x, y)) in [(1, (a, q)), (2, (p, b)), (3, (p, q))] {
        let c = mx.cells[k];
        assert_eq!(
            (c.tier, c.reason),
            (Tier::Heuristic, Some(R::OutsideRegions))
        );
        let (m, secs) = by_hand(x, y, 1.3, 30.0);
        assert!(close(c.meters, m) && close(c.eta_s, secs), "{c:?}");
    }

    // A table of one speed (20 km/h) for next week's hour: historical, and
    // the time is petgraph's Dijkstra on length ÷ 20 km/h.
    let hour = crate::speeds::hour_of_week(later, region.tz);
    put_table(&region, g, hour, 20).await;
    let slow = weights_at(g, |_| 20.0);
    let want20 = dijkstra_ms(g, &slow, s, t).unwrap() as f64 / 1000.0;
    let r = ask(&cat, a, b, Some(later), Some(2000)).await;
    assert_eq!((r.tier, r.reason), (Tier::Historical, None));
    assert!(
        (r.eta_s - want20).abs() < 1e-6,
        "{} vs petgraph {want20}",
        r.eta_s
    );

    // The answer names the departure hour and the profile: the table's
    // hour is a profile of its own (its representative is itself).
    assert_eq!(r.hour_of_week, Some(hour));
    assert_eq!(r.profile.map(|p| p.representative_hour), Some(hour));

    // Any other hour, even with no budget at all, is answered from the
    // graph at once: every profile was customized before the table was
    // published (the old lazy bucket answered `budget_exceeded` here). The
    // table names no edge in that hour, so the time is petgraph's
    // free-flow Dijkstra, and the answer is labelled free_flow.
    let cold = later + Days::hours(5);
    let r = ask(&cat, a, b, Some(cold), Some(0)).await;
    assert_eq!((r.tier, r.reason), (Tier::FreeFlow, None), "{r:?}");
    assert!(
        (r.eta_s - want).abs() < 1e-6,
        "{} vs petgraph {want}",
        r.eta_s
    );
    assert_ne!(
        r.profile.map(|p| p.index),
        Some(hour_profile(&region, hour))
    );

    // An estimate knows the hour: a shed request departing in the 20 km/h
    // hour is the calibration's estimate × that hour's factor, worked by
    // hand as Σ length ÷ 20 km/h over Σ length ÷ free-flow speed; in the
    // other hours the factor is 1.
    let num: f64 = g.edge_len_m.iter().map(|l| l / 20.0).sum();
    let den: f64 = (0..g.num_edges())
        .map(|e| g.edge_len_m[e] / f64::from(g.edge_speed_kmh[e]))
        .sum();
    let (_, ff_secs) = region_estimate(&cal, a, b);
    let r = trip(
        &cat,
        &query(a, b, Some(later), None),
        Admit::Counted(&shed_ticket()),
    )
    .await;
    assert_eq!((r.tier, r.reason), (Tier::Heuristic, Some(R::Overloaded)));
    assert!(
        close(r.eta_s, ff_secs * num / den),
        "{} vs by hand {}",
        r.eta_s,
        ff_secs * num / den
    );
    assert!(num / den > 1.0, "20 km/h is slower than the city's roads");
    assert_eq!(r.hour_of_week, Some(hour));
    let r = trip(
        &cat,
        &query(a, b, Some(cold), None),
        Admit::Counted(&shed_ticket()),
    )
    .await;
    assert!(close(r.eta_s, ff_secs), "{} vs {ff_secs}", r.eta_s);

    // A matrix with no budget still stops before its many-to-many.
    let cold2 = later + Days::hours(9);
    let mx = ask_matrix(&cat, vec![a], vec![b], Some(cold2), Some(0)).await;
    assert_eq!(
        (mx.cells[0].tier, mx.cells[0].reason),
        (Tier::Heuristic, Some(R::BudgetExceeded))
    );

    // Fresh live observations (12 km/h everywhere) → live, no reason, and
    // slower than petgraph's free-flow time (every road is faster than 12).
    let now = Utc::now().to_rfc3339();
    put_live(
        &region,
        (0..g.num_edges()).map(|e| road(g, e)),
        12.0,
        &now,
        3,
    )
    .await;
    assert!(region.refresh_live(true).await);
    let r = ask(&cat, a, b, None, Some(2000)).await;
    assert_eq!((r.tier, r.reason), (Tier::Live, None), "{r:?}");
    assert!(r.eta_s > want, "{} vs free-flow {want}", r.eta_s);
    assert!(r.speeds_age_s.unwrap() < 60.0);
    let mx = ask_matrix(&cat, vec![a], vec![b], None, Some(2000)).await;
    assert_eq!((mx.cells[0].tier, mx.cells[0].reason), (Tier::Live, None));
    assert!(
        (mx.cells[0].eta_s - r.eta_s).abs() < 1e-6,
        "matrix and trip agree"
    );
}

#[tokio::test]
async fn stale_live_data_falls_back_to_historical() {
    let g = &city().graph;
    let (_state, svc) = city_service().await;
    let cat = svc.catalog.clone();
    let region = svc.regions[0].clone();
    let (s, t) = two_way_pair(g);
    // Observations an hour old, beyond the 600 s TTL.
    let old = (Utc::now() - Days::seconds(3600)).to_rfc3339();
    put_live(&region, (0..50).map(|e| road(g, e)), 20.0, &old, 1).await;
    region.refresh_live(true).await;
    let r = ask(&cat, g.node_pos(s), g.node_pos(t), None, Some(2000)).await;
    assert_eq!(
        (r.tier, r.reason),
        (Tier::FreeFlow, Some(R::LiveStale)),
        "{r:?}"
    );
    // Nothing fresh: the time is free-flow, as petgraph's Dijkstra has it.
    let free = weights_at(g, |e| f64::from(g.edge_speed_kmh[e]));
    let want = dijkstra_ms(g, &free, s, t).unwrap() as f64 / 1000.0;
    assert!(
        (r.eta_s - want).abs() < 1e-6,
        "{} vs petgraph {want}",
        r.eta_s
    );
}

#[tokio::test]
async fn unavailable_region_answers_from_the_defaults() {
    let dir = tempfile::tempdir().unwrap();
    let broken = dir.path().join("broken.hodos");
    std::fs::write(&broken, b"not an artifact").unwrap();
    let c = city();
    let svc = catalog(&broken, &c.graph, &dir.path().join("state")).await;
    let cat = svc.catalog.clone();
    let region = svc.regions[0].clone();
    assert!(region.snapshot().is_none());
    let reason = region.status().degraded_reason.unwrap();
    assert!(reason.contains("broken.hodos"), "{reason}");
    let (a, b) = (c.graph.node_pos(0), c.graph.node_pos(1));
    let r = ask(&cat, a, b, None, None).await;
    assert_eq!(
        (r.tier, r.reason),
        (Tier::Heuristic, Some(R::RegionUnavailable))
    );
    assert_eq!(r.snapshot, Some(("quellhaven".into(), 0)));
    let (m, secs) = by_hand(a, b, 1.3, 30.0); // haversine × 1.3 ÷ 30 km/h
    assert!(close(r.meters, m) && close(r.eta_s, secs), "{r:?}");
    let mx = ask_matrix(&cat, vec![a], vec![b, a], None, None).await;
    assert!(mx
        .cells
        .iter()
        .all(|c| c.reason == Some(R::RegionUnavailable)));
    // Updates say why, with the load error's text.
    let e = region.put_live(b"[]", false).await.unwrap_err();
    assert!(matches!(e, UpdateError::Unavailable(_)));
    assert_eq!(
        e.to_string(),
        format!("the region has no loaded graph: {reason}")
    );
}

/// Two 4×4 grids of two-way roads with no road between them (a build
/// keeps only the largest strongly connected component, so the artifact
/// is assembled as it is).
fn islands(dir: &Path) -> (PathBuf, RoadGraph) {
    let g = hodos_engine::import::synthetic::islands(4, LatLon::new(0.01, 0.01), 0.02);
    let art = assemble(
        "test:islands".into(),
        g.clone(),
        Calibration::fixed(1.3, 30.0),
    );
    let path = dir.join("islands.hodos");
    art.save(&path).unwrap();
    (path, g)
}

#[tokio::test]
async fn unreachable_pairs_fall_back_per_trip_and_per_cell() {
    let dir = tempfile::tempdir().unwrap();
    let (artifact, g) = islands(dir.path());
    let svc = catalog(&artifact, &g, &dir.path().join("state")).await;
    let cat = svc.catalog.clone();
    let (s, t, u) = (0u32, 16u32, 5u32);
    // petgraph's Dijkstra agrees there is no path from island one to two.
    let ones = vec![1; g.num_edges()];
    assert_eq!(dijkstra_ms(&g, &ones, s, t), None);
    let (a, b, c) = (g.node_pos(s), g.node_pos(t), g.node_pos(u));
    let r = ask(&cat, a, b, None, Some(2000)).await;
    assert_eq!(
        (r.tier, r.reason),
        (Tier::Heuristic, Some(R::Unreachable)),
        "{r:?}"
    );
    // Both ends snapped (onto nodes), and the estimate is the calibration's.
    assert!(r.from_snap_m.unwrap() < 1e-3 && r.to_snap_m.unwrap() < 1e-3);
    let (m, secs) = by_hand(a, b, 1.3, 30.0); // haversine × 1.3 ÷ 30 km/h
    assert!(close(r.meters, m) && close(r.eta_s, secs), "{r:?}");
    // Matrix: the reachable cell from the graph (petgraph Dijkstra), the
    // other per cell unreachable.
    let mx = ask_matrix(&cat, vec![a], vec![b, c], None, Some(2000)).await;
    assert_eq!(
        (mx.cells[0].tier, mx.cells[0].reason),
        (Tier::Heuristic, Some(R::Unreachable))
    );
    assert_eq!(mx.cells[1].tier, Tier::FreeFlow);
    let free = weights_at(&g, |e| f64::from(g.edge_speed_kmh[e]));
    let want = dijkstra_ms(&g, &free, s, u).unwrap() as f64 / 1000.0;
    assert!(
        (mx.cells[1].eta_s - want).abs() < 1e-6,
        "{:?} vs petgraph {want}",
        mx.cells[1]
    );
}

/// Two regions side by side on one city (west and east of its middle
/// meridian): in one matrix each region answers the cells whose two ends
/// it holds, each equal to the trip between the same points, and a cell
/// joining the two halves is an `outside_regions` estimate.
#[tokio::test]
async fn matrix_cells_belong_to_the_region_holding_both_ends() {
    let c = city();
    let g = &c.graph;
    let state = tempfile::tempdir().unwrap();
    let (lo, hi) = g.bbox();
    let mid = (lo.lon + hi.lon) / 2.0;
    let half = |name: &str, w: f64, e: f64| RegionConfig {
        name: name.into(),
        artifact: c.artifact.clone(),
        time_zone: "UTC".into(),
        coverage: Coverage::Bbox([lo.lat - 0.05, w, hi.lat + 0.05, e]),
        historical: None,
        live_dir: None,
        model: None,
        state_dir: state.path().join(name),
    };
    let s = settings();
    let up = UpdateSettings::from_settings(&s);
    let west = RegionUpdater::open(half("west", lo.lon - 0.05, mid), up.clone()).await;
    let east = RegionUpdater::open(half("east", mid, hi.lon + 0.05), up).await;
    let cat = Catalog::new(s, vec![west.reader().clone(), east.reader().clone()]);
    // Two nodes in each half, away from the middle.
    let pick = |west: bool| {
        let mut v = (0..g.num_nodes() as u32).filter(move |&n| {
            let x = g.node_pos(n).lon;
            if west {
                x < mid - 0.01
            } else {
                x > mid + 0.01
            }
        });
        (v.next().unwrap(), v.nth(50).unwrap())
    };
    let ((w1, w2), (e1, e2)) = (pick(true), pick(false));
    let pts: Vec<LatLon> = [w1, w2, e1, e2].iter().map(|&n| g.node_pos(n)).collect();
    let mx = ask_matrix(&cat, pts.clone(), pts.clone(), None, Some(2000)).await;
    for (i, &x) in pts.iter().enumerate() {
        for (j, &y) in pts.iter().enumerate() {
            let cell = mx.cells[i * 4 + j];
            if (i < 2) == (j < 2) {
                let r = ask(&cat, x, y, None, Some(2000)).await;
                assert_eq!(
                    (cell.tier, cell.reason, cell.eta_s),
                    (r.tier, r.reason, r.eta_s),
                    "{i}->{j}"
                );
                assert_ne!(cell.tier, Tier::Heuristic, "{i}->{j}: {r:?}");
            } else {
                assert_eq!(
                    (cell.tier, cell.reason),
                    (Tier::Heuristic, Some(R::OutsideRegions)),
                    "{i}->{j}"
                );
                let (m, secs) = by_hand(x, y, 1.3, 30.0); // haversine × 1.3 ÷ 30 km/h
                assert!(close(cell.meters, m) && close(cell.eta_s, secs), "{cell:?}");
            }
        }
    }
    // Both regions answer 4 cells; the first one named wins the tie.
    assert_eq!(mx.snapshot.map(|(name, _)| name), Some("west".into()));
}

/// A superseded snapshot stays in the retire bin while a request holds one
/// of its profile metrics without the snapshot (as a matrix job does), and
/// is freed by a sweep once that holder lets go.
#[tokio::test]
async fn a_held_profile_metric_keeps_its_snapshot_retired() {
    let c = city();
    let (_state, svc) = city_service().await;
    let region = svc.regions[0].clone();
    let held = region.snapshot().unwrap().profiles.metrics[0].clone();
    let g = &c.graph;
    put_table(&region, g, 3, 15).await;
    let settle = || async {
        for _ in 0..40 {
            region.sweep_retired();
            tokio::time::sleep(std::time::Duration::from_millis(25)).await;
        }
    };
    settle().await;
    assert!(region.retired().0 >= 1, "freed while a metric was held");
    drop(held);
    settle().await;
    assert_eq!(region.retired().0, 0, "not freed after the holder let go");
}

/// A straight road 0–1–2–3 of known lengths (200, 300, 400 m, two-way,
/// 36 km/h free-flow) with a spur 1–4 (150 m), node ids 1..=5 outside.
fn line(dir: &Path) -> (PathBuf, RoadGraph) {
    use hodos_engine::graph::{EdgeSpec, GraphBuilder, RoadClass};
    let mut b = GraphBuilder::default();
    for (k, lon) in [0.010, 0.012, 0.015, 0.019].into_iter().enumerate() {
        b.add_node(LatLon::new(0.01, lon), k as u64 + 1);
    }
    b.add_node(LatLon::new(0.0115, 0.012), 5);
    for (way, (u, v, len)) in [(0, 1, 200.0), (1, 2, 300.0), (2, 3, 400.0), (1, 4, 150.0)]
        .into_iter()
        .enumerate()
    {
        for (tail, head) in [(u, v), (v, u)] {
            b.add_edge(EdgeSpec {
                tail,
                head,
                length_m: Some(len),
                speed_kmh: 36.0,
                way_id: way as u64 + 1,
                class: RoadClass::Residential,
                shape: &[],
            });
        }
    }
    let g = b.finish();
    let art = assemble("test:line".into(), g.clone(), Calibration::fixed(1.3, 30.0));
    let path = dir.join("line.hodos");
    art.save(&path).unwrap();
    (path, g)
}

/// Fresh live observations (stamped 5 s ahead: within the allowed skew,
/// so age 0 and live weight exactly 1) at `kmh` on the directed roads
/// `(from, to)` (outside node ids).
async fn observe(region: &RegionUpdater, roads: &[(u64, u64)], kmh: f64) {
    let at = (Utc::now() + Days::seconds(5)).to_rfc3339();
    put_live(region, roads.iter().copied(), kmh, &at, 1).await;
    assert!(region.refresh_live(true).await);
}

/// The external ids of edge `e`'s tail and head.
fn road(g: &RoadGraph, e: usize) -> (u64, u64) {
    (
        g.node_ext[g.edge_tail[e] as usize],
        g.node_ext[g.edge_head[e] as usize],
    )
}

/// Puts one live JSON batch: `kmh` on each road (tail, head), observed
/// `at` by `samples`.
async fn put_live(
    region: &RegionUpdater,
    roads: impl Iterator<Item = (u64, u64)>,
    kmh: f64,
    at: &str,
    samples: u32,
) {
    let batch: Vec<serde_json::Value> = roads
        .map(|(u, v)| serde_json::json!({"tail": u, "head": v, "kmh": kmh, "observed_at": at, "samples": samples}))
        .collect();
    region
        .put_live(&serde_json::to_vec(&batch).unwrap(), false)
        .await
        .unwrap();
}

/// Puts a historical table of `kmh` on every road of `g` in `hour`.
async fn put_table(region: &std::sync::Arc<RegionUpdater>, g: &RoadGraph, hour: u8, kmh: u32) {
    let mut csv = hodos_testkit::HistoricalCsv::with_header();
    for e in 0..g.num_edges() {
        let (u, v) = road(g, e);
        csv.row(u, v, hour, kmh);
    }
    region
        .put_historical(csv.into_string().into_bytes())
        .await
        .unwrap();
}

/// Sources, tier and reason on the straight road 0→3, worked by hand:
/// each edge's time is length × 3600 ÷ speed ms (200 m at 18 km/h live =
/// 40 000; 300 m at 24 km/h historical = 45 000, at 36 km/h free-flow =
/// 30 000, at 18 km/h live = 60 000; 400 m at 36 km/h = 40 000, at 18 km/h
/// = 80 000; 200 m at 36 km/h = 20 000), and each share is that edge's
/// time over the total.
#[tokio::test]
async fn sources_name_the_speeds_the_route_used() {
    let dir = tempfile::tempdir().unwrap();
    let (artifact, g) = line(dir.path());
    let svc = catalog(&artifact, &g, &dir.path().join("state")).await;
    let cat = svc.catalog.clone();
    let region = svc.regions[0].clone();
    let (a, b) = (g.node_pos(0), g.node_pos(3));
    let shares = |r: &super::Answer| {
        let s = r.sources.expect("graph answers carry sources");
        assert!(close(s.live + s.historical + s.free_flow, 1.0), "{s:?}");
        (s.live, s.historical, s.free_flow)
    };
    let near = |x: (f64, f64, f64), y: (f64, f64, f64)| {
        close(x.0, y.0) && close(x.1, y.1) && close(x.2, y.2)
    };

    // No table, no live data: all free-flow, 900 m at 36 km/h = 90 s.
    let r = ask(&cat, a, b, None, Some(2000)).await;
    assert_eq!((r.tier, r.reason), (Tier::FreeFlow, Some(R::NoLiveData)));
    assert_eq!(
        (r.eta_s, shares(&r), r.speeds_age_s),
        (90.0, (0.0, 0.0, 1.0), None)
    );
    let later = Utc::now() + Days::days(7);
    let r = ask(&cat, a, b, Some(later), Some(2000)).await;
    assert_eq!((r.tier, r.reason), (Tier::FreeFlow, None));

    // A table row for 1→2 in every hour: 20 + 45 + 40 = 105 s; free-flow
    // carries 60/105, so the tier is free_flow, by the largest share.
    let mut csv = hodos_testkit::HistoricalCsv::with_header();
    for hour in 0..168 {
        csv.row(2, 3, hour, 24);
    }
    region
        .put_historical(csv.into_string().into_bytes())
        .await
        .unwrap();
    let r = ask(&cat, a, b, Some(later), Some(2000)).await;
    assert_eq!((r.tier, r.reason, r.eta_s), (Tier::FreeFlow, None, 105.0));
    assert!(near(shares(&r), (0.0, 45.0 / 105.0, 60.0 / 105.0)), "{r:?}");

    // One fresh observation on the spur 2→5, off the route (the issue's
    // observation 1): same time, no live share, not live, no live age
    // (free-flow carries most, so no age at all).
    observe(&region, &[(2, 5)], 18.0).await;
    let r = ask(&cat, a, b, None, Some(2000)).await;
    assert_eq!(
        (r.tier, r.reason, r.eta_s, r.speeds_age_s),
        (Tier::FreeFlow, Some(R::NoLiveOnRoute), 105.0, None),
        "{r:?}"
    );
    assert_eq!(shares(&r).0, 0.0);

    // Outside ids: live on 1→2 (40 s), historical 2→3 (45 s), free-flow
    // 3→4 (40 s):
    // 0.32 / 0.36 / 0.32 → historical, with the table's age; the route is
    // partly live, so the reason is live_minority.
    observe(&region, &[(1, 2)], 18.0).await;
    let r = ask(&cat, a, b, None, Some(2000)).await;
    assert_eq!(
        (r.tier, r.reason, r.eta_s),
        (Tier::Historical, Some(R::LiveMinority), 125.0),
        "{r:?}"
    );
    assert!(near(shares(&r), (0.32, 0.36, 0.32)), "{r:?}");
    assert!(r.speeds_age_s.is_some_and(|s| s < 600.0));
    // The route answer and the matrix cell say the same.
    let route = ask_route(&cat, a, b).await;
    assert_eq!((route.tier, route.sources), (r.tier, r.sources));
    let mx = ask_matrix(&cat, vec![a], vec![b], None, Some(2000)).await;
    let c = mx.cells[0];
    assert_eq!((c.tier, c.reason, c.eta_s), (r.tier, r.reason, r.eta_s));
    assert!(near(
        c.sources
            .map(|s| (s.live, s.historical, s.free_flow))
            .unwrap(),
        (0.32, 0.36, 0.32)
    ));

    // The whole road on fresh live data: 40 + 60 + 80 = 180 s, all live.
    observe(&region, &[(2, 3), (3, 4)], 18.0).await;
    let r = ask(&cat, a, b, None, Some(2000)).await;
    assert_eq!(
        (r.tier, r.reason, r.eta_s),
        (Tier::Live, None, 180.0),
        "{r:?}"
    );
    assert_eq!(shares(&r), (1.0, 0.0, 0.0));
    assert!(r.speeds_age_s.is_some_and(|s| s < 60.0));
    // The other way (outside ids 4→1) has no live data and no table row
    // (the table names 2→3 only): all free-flow.
    let back = ask(&cat, b, a, None, Some(2000)).await;
    assert_eq!(
        (back.tier, back.reason, shares(&back)),
        (Tier::FreeFlow, Some(R::NoLiveOnRoute), (0.0, 0.0, 1.0))
    );
}
