//! Coordinates exactly at intersections: `Region::eta` and every cell of a
//! coordinate matrix (`region::matrix::matrix`) between two node positions
//! equal petgraph's Dijkstra (the reference) between the two nodes, to the
//! millisecond, under free-flow and random per-edge speeds. On USA-road-d.NY
//! from the 9th DIMACS Implementation Challenge (edge lengths from the file,
//! which differ from great-circle lengths by centimetres; found through
//! HODOS_DATA_DIR, SKIPPED without it), on the two OpenStreetMap extracts in
//! tests/data (attribution in tests/data/SOURCES.md) and on the synthetic
//! city with its one-way streets.

use hodos_engine::build::{build_from_graph, Quiet, Source};
use hodos_engine::cch::matrix::ManyToMany;
use hodos_engine::cch::CchQuery;
use hodos_engine::geo::haversine_m;
use hodos_engine::import::dimacs;
use hodos_engine::region::matrix::{matrix, Cell, MatrixLimits, PointMatrix};
use hodos_engine::region::{EtaError, Metric, Region};
use hodos_test_support::graphs::{distinct_nodes, region_of};
use hodos_test_support::{
    dimacs_ny, fixture, petgraph_of, random_speeds, reference_dists, SplitMix64,
};

/// `sources × targets` random node pairs: `Region::eta` between the nodes'
/// coordinates against petgraph's Dijkstra between the nodes; `Region::route`
/// gives the same ETA and its geometry starts and ends (within 1 cm, by the
/// haversine formula) at the two nodes. Panics with
/// the number of mismatches (and the first few) if any.
fn check_eta(
    region: &Region,
    metric: &Metric,
    nodes: &[u32],
    (sources, targets): (usize, usize),
    seed: u64,
    label: &str,
) {
    let g = &region.graph;
    let pg = petgraph_of(g, &metric.weights);
    let mut q = CchQuery::new(&region.cch);
    let mut rng = SplitMix64::new(seed);
    let mut bad = Vec::new();
    let mut compared = 0;
    for _ in 0..sources {
        let s = nodes[rng.below(nodes.len()) as usize];
        let reference = reference_dists(&pg, s);
        for _ in 0..targets {
            let t = nodes[rng.below(nodes.len()) as usize];
            let eta = region.eta(metric, &mut q, g.node_pos(s), g.node_pos(t), 1.0);
            let want = reference[t as usize];
            let ok = match (&eta, want) {
                (Ok(e), Some(d)) => e.time_s == d as f64 / 1000.0,
                (Err(EtaError::Unreachable), None) => true,
                _ => false,
            };
            if let (true, Ok(e)) = (ok, eta) {
                // The route reports the same ETA and runs from node to node.
                let r = region
                    .route(metric, &mut q, g.node_pos(s), g.node_pos(t), 1.0)
                    .expect("route");
                let (first, last) = (r.geometry[0], r.geometry[r.geometry.len() - 1]);
                if r.eta != e
                    || haversine_m(first, g.node_pos(s)) > 0.01
                    || haversine_m(last, g.node_pos(t)) > 0.01
                {
                    bad.push(format!("{s} -> {t}: route {:?} vs ETA {e:?}", r.eta));
                }
            }
            if !ok {
                bad.push(format!(
                    "{s} -> {t}: hodos {:?} ms, Dijkstra {want:?} ms",
                    eta.map(|e| e.time_s * 1000.0)
                ));
            }
            compared += 1;
        }
    }
    assert!(
        bad.is_empty(),
        "{label}: {} of {compared} node-to-node ETAs differ from Dijkstra, e.g. {:#?}",
        bad.len(),
        &bad[..bad.len().min(5)]
    );
}

/// A `k × k` coordinate matrix between node positions: every cell equals
/// petgraph's Dijkstra between the nodes.
fn check_matrix(region: &Region, metric: &Metric, nodes: &[u32], k: usize, seed: u64, label: &str) {
    let g = &region.graph;
    let pg = petgraph_of(g, &metric.weights);
    let mut rng = SplitMix64::new(seed);
    let from: Vec<u32> = (0..k)
        .map(|_| nodes[rng.below(nodes.len()) as usize])
        .collect();
    let to: Vec<u32> = (0..k)
        .map(|_| nodes[rng.below(nodes.len()) as usize])
        .collect();
    let pos = |v: &[u32]| v.iter().map(|&n| g.node_pos(n)).collect::<Vec<_>>();
    let mut out = PointMatrix::default();
    matrix(
        region,
        metric,
        &mut ManyToMany::new(&region.cch),
        &pos(&from),
        &pos(&to),
        MatrixLimits {
            max_snap_m: 1.0,
            deadline: None,
        },
        &mut out,
    )
    .expect("matrix");
    let mut bad = 0;
    for (i, &s) in from.iter().enumerate() {
        let reference = reference_dists(&pg, s);
        for (j, &t) in to.iter().enumerate() {
            let ok = match (out.cells[i * k + j], reference[t as usize]) {
                (Cell::Eta { time_s, .. }, Some(d)) => time_s == d as f64 / 1000.0,
                (Cell::Unreachable, None) => true,
                _ => false,
            };
            bad += usize::from(!ok);
        }
    }
    assert_eq!(
        bad,
        0,
        "{label}: {bad} of {} matrix cells between node coordinates differ from Dijkstra",
        k * k
    );
}

/// Both checks under free-flow and under random per-edge speeds.
fn check(region: &Region, pairs: (usize, usize), label: &str) {
    let nodes = distinct_nodes(&region.graph);
    assert!(nodes.len() * 10 > region.graph.num_nodes() * 9, "{label}");
    let ff = region.free_flow();
    check_eta(
        region,
        &ff,
        &nodes,
        pairs,
        31,
        &format!("{label} free-flow"),
    );
    check_matrix(region, &ff, &nodes, 25, 32, &format!("{label} free-flow"));
    let speeds = random_speeds(&region.graph, 33);
    let slow = region.metric(hodos_engine::metric::from_speeds(&region.graph, &speeds));
    let l = format!("{label} random speeds");
    check_eta(region, &slow, &nodes, pairs, 34, &l);
    check_matrix(region, &slow, &nodes, 25, 35, &l);
}

#[test]
fn ny_node_coordinates_match_dijkstra() {
    let Some(ny) = dimacs_ny() else {
        return;
    };
    let raw = dimacs::read(&ny.distance_gr, &ny.coordinates).expect("read NY");
    let region = Region::from_artifact(
        build_from_graph("dimacs:NY".into(), raw, 0.0, &mut Quiet).expect("build"),
    );
    // 50 sources × 20 targets = 1,000 pairs per metric.
    check(&region, (50, 20), "NY");
}

#[test]
fn osm_node_coordinates_match_dijkstra() {
    for name in ["monaco.osm.pbf", "helsinki-center.osm.pbf"] {
        let region = region_of(Source::Osm(fixture(name)));
        check(&region, (20, 25), name);
    }
}

#[test]
fn synthetic_city_node_coordinates_match_dijkstra() {
    let region = region_of(Source::Synthetic {
        nodes: 20_000,
        seed: 3,
    });
    let g = &region.graph;
    let one_way = (0..g.num_edges())
        .filter(|&e| g.edge_twin[e] == hodos_engine::graph::NONE)
        .count();
    assert!(one_way > 100, "the city has one-way streets ({one_way})");
    check(&region, (20, 25), "synthetic");
}
