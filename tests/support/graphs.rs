//! Graph helpers: petgraph's Dijkstra as the reference, the exactness check
//! built on it, irregular grids and their hierarchies, points sampled in a
//! bounding box, random metrics and a field-by-field graph comparison.

use hodos_engine::build::{build, Quiet, Source};
use hodos_engine::cch::{Cch, CchQuery};
use hodos_engine::geo::{LatLon, LocalProjection};
use hodos_engine::graph::{EdgeSpec, GraphBuilder, RoadClass, RoadGraph};
use hodos_engine::order::{nested_dissection, UndirectedGraph};
use hodos_engine::region::{Metric, Region};
use hodos_testkit::ReferenceGraph;
use hodos_testkit::SplitMix64;

/// A region built from `source` (artifact built in memory).
pub fn region_of(source: Source) -> Region {
    Region::from_artifact(build(&source, &mut Quiet).expect("build"))
}

/// petgraph graph with one weighted arc per road edge (`hodos_testkit`'s
/// reference, the one copy of petgraph's Dijkstra).
pub fn petgraph_of(g: &RoadGraph, weights: &[u32]) -> ReferenceGraph {
    ReferenceGraph::new(g.num_nodes(), &g.edge_tail, &g.edge_head, weights)
}

/// Reference one-to-all distances from `s` with petgraph's Dijkstra.
pub fn reference_dists(pg: &ReferenceGraph, s: u32) -> Vec<Option<u64>> {
    pg.dists(s)
}

/// Checks `pairs` node-to-node queries (sources × targets) against petgraph's
/// Dijkstra on the same graph and metric: equal travel times, exactly.
/// Returns the number of pairs compared.
pub fn assert_exact(
    region: &Region,
    metric: &Metric,
    sources: usize,
    targets_per_source: usize,
    seed: u64,
    label: &str,
) -> usize {
    let g = &region.graph;
    let pg = petgraph_of(g, &metric.weights);
    let mut q = CchQuery::new(&region.cch);
    let mut rng = SplitMix64::new(seed);
    let mut compared = 0;
    for _ in 0..sources {
        let s = rng.below(g.num_nodes());
        let reference = reference_dists(&pg, s);
        for _ in 0..targets_per_source {
            let t = rng.below(g.num_nodes());
            let got = q
                .node_to_node(&region.cch, &metric.customized, s, t)
                .map(|r| u64::from(r.time));
            assert_eq!(got, reference[t as usize], "{label}: {s} -> {t}");
            compared += 1;
        }
    }
    compared
}

/// Random per-edge speeds in 5..=120 km/h (a second metric unlike free-flow).
pub fn random_speeds(g: &RoadGraph, seed: u64) -> Vec<f32> {
    let mut rng = SplitMix64::new(seed);
    (0..g.num_edges())
        .map(|_| 5.0 + rng.below(116) as f32)
        .collect()
}

/// A point in the box `lo`..`hi` on a 10,000-step lattice (latitude drawn
/// first).
pub fn point_in_box(lo: LatLon, hi: LatLon, rng: &mut SplitMix64) -> LatLon {
    LatLon::new(
        lo.lat + (hi.lat - lo.lat) * (rng.below(10_000) as f64 / 10_000.0),
        lo.lon + (hi.lon - lo.lon) * (rng.below(10_000) as f64 / 10_000.0),
    )
}

/// How a grid link between two neighbours is built.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Link {
    Missing,
    /// Only `a → c`.
    Forward,
    /// Only `c → a`.
    Backward,
    Both,
    /// Both directions plus a second, half-speed `a → c` edge.
    BothWithSlowParallel,
}

/// A builder with `w × h` nodes on a lattice near (45, 7), id `y * w + x`.
pub fn grid_nodes(w: u32, h: u32) -> GraphBuilder {
    let mut b = GraphBuilder::default();
    for y in 0..h {
        for x in 0..w {
            b.add_node(
                LatLon::new(45.0 + y as f64 * 0.001, 7.0 + x as f64 * 0.0013),
                (y * w + x) as u64,
            );
        }
    }
    b
}

/// Adds the residential edges of one grid link (way `way`).
pub fn add_link(b: &mut GraphBuilder, a: u32, c: u32, link: Link, speed: f32, way: u64) {
    let spec = |t, h| EdgeSpec {
        tail: t,
        head: h,
        length_m: None,
        speed_kmh: speed,
        way_id: way,
        class: RoadClass::Residential,
        shape: &[],
    };
    if matches!(
        link,
        Link::Forward | Link::Both | Link::BothWithSlowParallel
    ) {
        b.add_edge(spec(a, c));
    }
    if matches!(
        link,
        Link::Backward | Link::Both | Link::BothWithSlowParallel
    ) {
        b.add_edge(spec(c, a));
    }
    if link == Link::BothWithSlowParallel {
        b.add_edge(EdgeSpec {
            speed_kmh: speed / 2.0,
            ..spec(a, c)
        });
    }
}

/// A hierarchy on `g` with a nested-dissection order (projection at 45°N,
/// where [`grid_nodes`] puts its grids).
pub fn hierarchy(g: &RoadGraph) -> Cch {
    let ug = UndirectedGraph::from_edges(
        g.num_nodes(),
        (0..g.num_edges()).map(|e| (g.edge_tail[e], g.edge_head[e])),
    );
    let proj = LocalProjection::new(45.0);
    let xy: Vec<[f64; 2]> = (0..g.num_nodes() as u32)
        .map(|v| proj.project(g.node_pos(v)))
        .collect();
    Cch::build(g, nested_dissection(&ug, &xy, &mut |_| {}).rank)
}

/// Asserts two graphs are equal field by field.
pub fn assert_same_graph(a: &RoadGraph, b: &RoadGraph) {
    assert_eq!(a.node_lat, b.node_lat);
    assert_eq!(a.node_lon, b.node_lon);
    assert_eq!(a.node_ext, b.node_ext);
    assert_eq!(a.edge_tail, b.edge_tail);
    assert_eq!(a.edge_head, b.edge_head);
    assert_eq!(a.edge_len_m, b.edge_len_m);
    assert_eq!(a.edge_speed_kmh, b.edge_speed_kmh);
    assert_eq!(a.edge_way, b.edge_way);
    assert_eq!(a.edge_class, b.edge_class);
    assert_eq!(a.edge_shape_first, b.edge_shape_first);
    assert_eq!(a.shape, b.shape);
    assert_eq!(a.edge_twin, b.edge_twin);
}

/// Nodes whose position no other node shares (a coordinate shared by two
/// nodes names neither of them).
pub fn distinct_nodes(g: &RoadGraph) -> Vec<u32> {
    let mut count: std::collections::HashMap<(u64, u64), u32> = Default::default();
    for v in 0..g.num_nodes() as u32 {
        let p = g.node_pos(v);
        *count.entry((p.lat.to_bits(), p.lon.to_bits())).or_default() += 1;
    }
    (0..g.num_nodes() as u32)
        .filter(|&v| {
            let p = g.node_pos(v);
            count[&(p.lat.to_bits(), p.lon.to_bits())] == 1
        })
        .collect()
}
