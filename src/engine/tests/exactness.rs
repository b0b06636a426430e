//! Exactness: hierarchy travel times equal petgraph's Dijkstra (the
//! reference) on the same graph and metric, on the two OpenStreetMap
//! extracts in tests/data (attribution in tests/data/SOURCES.md) and on a
//! synthetic city; again after re-customizing with random per-edge speeds
//! without rebuilding. Also snapped, mid-edge queries against a reference
//! assembled from petgraph distances.

use hodos_engine::build::Source;
use hodos_engine::cch::CchQuery;
use hodos_engine::graph::NONE;
use hodos_engine::region::Region;
use hodos_test_support::graphs::{point_in_box, region_of};
use hodos_test_support::{
    assert_exact, fixture, petgraph_of, random_speeds, reference_dists, SplitMix64,
};

fn check(region: &Region, label: &str) {
    let ff = region.free_flow();
    // 20 sources × 60 targets = 1,200 pairs per metric.
    let n = assert_exact(region, &ff, 20, 60, 11, &format!("{label} free-flow"));
    assert!(n >= 1000);
    let speeds = random_speeds(&region.graph, 99);
    let second = region.metric(hodos_engine::metric::from_speeds(&region.graph, &speeds));
    let n = assert_exact(
        region,
        &second,
        20,
        60,
        12,
        &format!("{label} random speeds"),
    );
    assert!(n >= 1000);
    check_snapped(region, &second, label);
}

/// Snapped queries: the answer equals the best of (partial edge + Dijkstra
/// distance + partial edge) over the ways out of the origin's road and into
/// the destination's road, or the direct stretch along one road.
fn check_snapped(region: &Region, metric: &hodos_engine::region::Metric, label: &str) {
    let g = &region.graph;
    let pg = petgraph_of(g, &metric.weights);
    let mut q = CchQuery::new(&region.cch);
    let mut rng = SplitMix64::new(5);
    let (lo, hi) = g.bbox();
    let mut checked = 0;
    while checked < 60 {
        let (a, b) = (
            point_in_box(lo, hi, &mut rng),
            point_in_box(lo, hi, &mut rng),
        );
        let Ok(eta) = region.eta(metric, &mut q, a, b, 1e9) else {
            continue;
        };
        // Ways out of the origin: (node, cost to reach it).
        let outs = ways(g, metric, eta.from.edge, eta.from.fraction, true);
        let ins = ways(g, metric, eta.to.edge, eta.to.fraction, false);
        let mut best = f64::INFINITY;
        for &(s, cs) in &outs {
            let d = reference_dists(&pg, s);
            for &(t, ct) in &ins {
                if let Some(x) = d[t as usize] {
                    best = best.min(cs + x as f64 + ct);
                }
            }
        }
        if eta.from.edge == eta.to.edge {
            let e = eta.from.edge as usize;
            let len = g.edge_len_m[e];
            let (oa, ob) = (eta.from.offset_m, eta.to.offset_m);
            if oa <= ob {
                best = best.min((metric.weights[e] as f64 * (ob - oa) / len).round());
            } else if g.edge_twin[e] != NONE {
                best = best.min(
                    (metric.weights[g.edge_twin[e] as usize] as f64 * (oa - ob) / len).round(),
                );
            }
        }
        assert!(
            (eta.time_s * 1000.0 - best).abs() <= 0.5 + 1e-9,
            "{label}: snapped {a} -> {b}: hodos {} ms, reference {best} ms",
            eta.time_s * 1000.0
        );
        checked += 1;
    }
}

/// Ways out of (origin) or into (destination) the road at share `t` of edge
/// `e`: (node, partial cost in ms). A point exactly at the node a one-way
/// road leaves (origin) or enters (destination) is that node, at no cost.
fn ways(
    g: &hodos_engine::graph::RoadGraph,
    m: &hodos_engine::region::Metric,
    e: u32,
    t: f64,
    origin: bool,
) -> Vec<(u32, f64)> {
    let w = m.weights[e as usize] as f64;
    let mut v = vec![if origin {
        (g.edge_head[e as usize], (w * (1.0 - t)).round())
    } else {
        (g.edge_tail[e as usize], (w * t).round())
    }];
    let tw = g.edge_twin[e as usize];
    if tw == NONE && origin && t == 0.0 {
        v.push((g.edge_tail[e as usize], 0.0));
    }
    if tw == NONE && !origin && t == 1.0 {
        v.push((g.edge_head[e as usize], 0.0));
    }
    if tw != NONE {
        let w2 = m.weights[tw as usize] as f64;
        v.push(if origin {
            (g.edge_head[tw as usize], (w2 * t).round())
        } else {
            (g.edge_tail[tw as usize], (w2 * (1.0 - t)).round())
        });
    }
    v
}

#[test]
fn helsinki_center_matches_dijkstra() {
    check(
        &region_of(Source::Osm(fixture("helsinki-center.osm.pbf"))),
        "helsinki-center",
    );
}

#[test]
fn monaco_matches_dijkstra() {
    check(&region_of(Source::Osm(fixture("monaco.osm.pbf"))), "monaco");
}

#[test]
fn synthetic_city_matches_dijkstra() {
    check(
        &region_of(Source::Synthetic {
            nodes: 20_000,
            seed: 3,
        }),
        "synthetic",
    );
}
