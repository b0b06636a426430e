//! Bucket many-to-many matrices against outside references.
//!
//! - Node-to-node matrices: every travel time equals petgraph's Dijkstra
//!   (`petgraph::algo::dijkstra`, crates.io petgraph 0.8, the reference
//!   implementation) on the same graph and metric, exactly; every length lies
//!   between the shortest and the longest length among the minimum-time paths
//!   (again petgraph's Dijkstra, on lexicographic (time, ±length) weights),
//!   and equals the point query's length. On the OpenStreetMap extract
//!   tests/data/monaco.osm.pbf (attribution in tests/data/SOURCES.md), a
//!   synthetic city, irregular grids with one-way and missing links
//!   (unreachable pairs), and USA-road-d.NY of the 9th DIMACS Challenge when
//!   HODOS_DATA_DIR has it.
//! - Coordinate matrices: every cell equals `Region::eta` for the same pair,
//!   including off-network points and trips along one road.
//! - Deadlines: a passed deadline computes no row and does not panic.

use hodos_engine::build::{build_from_graph, Quiet, Source};
use hodos_engine::cch::customize::{CustomizedMetric, INFINITY};
use hodos_engine::cch::matrix::{ManyToMany, MatrixError, NodeCells};
use hodos_engine::cch::query::Endpoint;
use hodos_engine::cch::{Cch, CchQuery};
use hodos_engine::geo::LatLon;
use hodos_engine::graph::{RoadGraph, NONE};
use hodos_engine::region::matrix::{matrix, Cell, MatrixLimits, PointMatrix};
use hodos_engine::region::{Metric, Region};
use hodos_test_support::graphs::{add_link, grid_nodes, hierarchy, point_in_box, region_of, Link};
use hodos_test_support::{
    dimacs_ny, fixture, petgraph_of, random_speeds, reference_dists, SplitMix64,
};
use petgraph::graph::{DiGraph, NodeIndex};
use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell as Counter;
use std::time::{Duration, Instant};

/// Counts heap allocations per thread, to check that a warmed-up matrix
/// call allocates nothing (tests run on several threads at once).
struct CountingAlloc;

thread_local! {
    static ALLOCATIONS: Counter<usize> = const { Counter::new(0) };
}

fn count_allocation() {
    let _ = ALLOCATIONS.try_with(|c| c.set(c.get() + 1));
}

// SAFETY: forwards every call to the system allocator unchanged.
unsafe impl GlobalAlloc for CountingAlloc {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        count_allocation();
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) }
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        count_allocation();
        unsafe { System.realloc(ptr, layout, new_size) }
    }
}

#[global_allocator]
static GLOBAL: CountingAlloc = CountingAlloc;

/// Allocations made on this thread while running `f`.
fn allocations_during(f: impl FnOnce()) -> usize {
    let before = ALLOCATIONS.with(Counter::get);
    f();
    ALLOCATIONS.with(Counter::get) - before
}

/// Dijkstra weight ordered by time, then by a signed length: `(t, len)`
/// finds the shortest length among minimum-time paths, `(t, -len)` the
/// longest.
#[derive(Debug, Clone, Copy, Default, PartialEq, PartialOrd)]
struct TimeLen(u64, i64);

impl std::ops::Add for TimeLen {
    type Output = TimeLen;
    fn add(self, o: TimeLen) -> TimeLen {
        TimeLen(self.0 + o.0, self.1 + o.1)
    }
}

/// Edge lengths in whole centimetres, rounded as customization does.
fn edge_cm(g: &RoadGraph) -> Vec<i64> {
    g.edge_len_m
        .iter()
        .map(|&l| (l * 100.0).round() as i64)
        .collect()
}

fn petgraph_time_len(g: &RoadGraph, weights: &[u32], sign: i64) -> DiGraph<(), TimeLen> {
    let cm = edge_cm(g);
    let mut pg = DiGraph::with_capacity(g.num_nodes(), g.num_edges());
    for _ in 0..g.num_nodes() {
        pg.add_node(());
    }
    for e in 0..g.num_edges() {
        pg.add_edge(
            NodeIndex::new(g.edge_tail[e] as usize),
            NodeIndex::new(g.edge_head[e] as usize),
            TimeLen(u64::from(weights[e]), sign * cm[e]),
        );
    }
    pg
}

fn dijkstra_time_len(pg: &DiGraph<(), TimeLen>, s: u32) -> Vec<Option<TimeLen>> {
    let m = petgraph::algo::dijkstra(pg, NodeIndex::new(s as usize), None, |e| *e.weight());
    let mut out = vec![None; pg.node_count()];
    for (k, v) in m {
        out[k.index()] = Some(v);
    }
    out
}

/// Checks one `ns × nt` node matrix of random nodes against petgraph.
/// Returns the number of reachable cells.
#[allow(clippy::too_many_arguments)]
fn check_nodes(
    g: &RoadGraph,
    cch: &Cch,
    weights: &[u32],
    metric: &CustomizedMetric,
    m2m: &mut ManyToMany,
    ns: usize,
    nt: usize,
    seed: u64,
    label: &str,
) -> usize {
    let mut rng = SplitMix64::new(seed);
    let sources: Vec<u32> = (0..ns).map(|_| rng.below(g.num_nodes())).collect();
    let targets: Vec<u32> = (0..nt).map(|_| rng.below(g.num_nodes())).collect();
    check_node_lists(g, cch, weights, metric, m2m, &sources, &targets, label)
}

#[allow(clippy::too_many_arguments)]
fn check_node_lists(
    g: &RoadGraph,
    cch: &Cch,
    weights: &[u32],
    metric: &CustomizedMetric,
    m2m: &mut ManyToMany,
    sources: &[u32],
    targets: &[u32],
    label: &str,
) -> usize {
    let (mut time, mut len) = (Vec::new(), Vec::new());
    let out = m2m
        .run_nodes(
            cch,
            metric,
            sources,
            targets,
            None,
            NodeCells::new(&mut time, &mut len),
        )
        .expect("matrix");
    assert_eq!(out.rows_done, sources.len(), "{label}");
    assert_eq!(time.len(), sources.len() * targets.len());
    let pg = petgraph_of(g, weights);
    let pg_min = petgraph_time_len(g, weights, 1);
    let pg_max = petgraph_time_len(g, weights, -1);
    let mut q = CchQuery::new(cch);
    let mut reachable = 0;
    for (i, &s) in sources.iter().enumerate() {
        let reference = reference_dists(&pg, s);
        let lo = dijkstra_time_len(&pg_min, s);
        let hi = dijkstra_time_len(&pg_max, s);
        for (j, &t) in targets.iter().enumerate() {
            let c = i * targets.len() + j;
            let got = (time[c] < INFINITY).then(|| u64::from(time[c]));
            assert_eq!(got, reference[t as usize], "{label}: {s} -> {t} time");
            if got.is_none() {
                continue;
            }
            reachable += 1;
            let (lo, hi) = (lo[t as usize].unwrap(), hi[t as usize].unwrap());
            assert_eq!(lo.0, got.unwrap(), "{label}: lexicographic reference time");
            let l = len[c] as i64;
            assert!(
                lo.1 <= l && l <= -hi.1,
                "{label}: {s} -> {t}: length {l} cm outside [{}, {}]",
                lo.1,
                -hi.1
            );
            let p = q.node_to_node(cch, metric, s, t).expect("point query");
            assert_eq!(
                len[c], p.len_cm,
                "{label}: {s} -> {t}: length vs point query"
            );
        }
    }
    reachable
}

fn check_region_nodes(region: &Region, metric: &Metric, m2m: &mut ManyToMany, label: &str) {
    for (k, (ns, nt)) in [(30, 40), (1, 50), (20, 20)].into_iter().enumerate() {
        let r = check_nodes(
            &region.graph,
            &region.cch,
            &metric.weights,
            &metric.customized,
            m2m,
            ns,
            nt,
            100 + k as u64,
            &format!("{label} {ns}x{nt}"),
        );
        // One strongly connected component: every cell is reachable.
        assert_eq!(r, ns * nt, "{label} {ns}x{nt}");
    }
}

fn check_region(region: &Region, label: &str) {
    // One scratch for every size and both metrics: reuse must not leak.
    let mut m2m = ManyToMany::new(&region.cch);
    let ff = region.free_flow();
    check_region_nodes(region, &ff, &mut m2m, &format!("{label} free-flow"));
    let speeds = random_speeds(&region.graph, 41);
    let second = region.metric(hodos_engine::metric::from_speeds(&region.graph, &speeds));
    check_region_nodes(region, &second, &mut m2m, &format!("{label} random speeds"));
    check_points(region, &second, &mut m2m, label);
}

/// Points in the graph's bounding box (some fall off the network at a
/// 150 m snap limit), plus pairs on one road and a point far away.
fn points(region: &Region, count: usize, seed: u64) -> Vec<LatLon> {
    let g = &region.graph;
    let (lo, hi) = g.bbox();
    let mut rng = SplitMix64::new(seed);
    let mut pts: Vec<LatLon> = (0..count).map(|_| point_in_box(lo, hi, &mut rng)).collect();
    // Far off the map: off the network at any sane limit.
    pts.push(LatLon::new(lo.lat - 1.0, lo.lon - 1.0));
    pts
}

/// Two points on the first straight segment of long roads (one way and two
/// way), at fractions `a` of it: snapped onto the same edge.
fn on_road_points(region: &Region, fractions: &[f64]) -> Vec<LatLon> {
    let g = &region.graph;
    let mut out = Vec::new();
    let mut two_way = false;
    let mut one_way = false;
    for e in 0..g.num_edges() as u32 {
        if g.edge_len_m[e as usize] < 80.0 {
            continue;
        }
        let tw = g.edge_twin[e as usize] != NONE;
        if (tw && (two_way || e > g.edge_twin[e as usize])) || (!tw && one_way) {
            continue;
        }
        let poly = g.edge_polyline(e);
        for &f in fractions {
            out.push(hodos_engine::geo::lerp(poly[0], poly[1], f));
        }
        if tw {
            two_way = true;
        } else {
            one_way = true;
        }
        if two_way && one_way {
            break;
        }
    }
    out
}

fn check_points(region: &Region, metric: &Metric, m2m: &mut ManyToMany, label: &str) {
    let max_snap = 150.0;
    let mut from = points(region, 12, 7);
    let mut to = points(region, 15, 8);
    // The first origin on the network (so a passed deadline has row 0 to
    // refuse), then pairs along single roads in both directions.
    let road = on_road_points(region, &[0.3, 0.7]);
    from.splice(0..0, road.iter().copied());
    to.extend(road.iter().rev().copied());
    let mut out = PointMatrix::default();
    matrix(
        region,
        metric,
        m2m,
        &from,
        &to,
        limits(max_snap, None),
        &mut out,
    )
    .expect("matrix");
    assert_eq!(out.rows_done, from.len());
    assert_eq!(out.cells.len(), from.len() * to.len());
    let mut q = CchQuery::new(&region.cch);
    let (mut same_edge, mut unavailable, mut answered) = (0, 0, 0);
    for (i, &a) in from.iter().enumerate() {
        for (j, &b) in to.iter().enumerate() {
            let cell = out.cells[i * to.len() + j];
            let eta = region.eta(metric, &mut q, a, b, max_snap);
            match (cell, eta) {
                (Cell::Eta { time_s, meters }, Ok(e)) => {
                    answered += 1;
                    if e.from.edge == e.to.edge {
                        same_edge += 1;
                    }
                    // A route's polyline has at least one point per edge,
                    // which bounds the per-edge centimetre rounding.
                    let edges = region
                        .route(metric, &mut q, a, b, max_snap)
                        .expect("route")
                        .geometry
                        .len() as f64;
                    assert!(
                        (time_s - e.time_s).abs() * 1000.0 <= 1.0,
                        "{label}: {a} -> {b}: matrix {time_s} s, eta {} s",
                        e.time_s
                    );
                    assert!(
                        (meters - e.meters).abs() <= 0.01 * edges,
                        "{label}: {a} -> {b}: matrix {meters} m, eta {} m",
                        e.meters
                    );
                }
                (Cell::Unavailable, Err(hodos_engine::region::EtaError::OffNetwork { .. })) => {
                    unavailable += 1;
                    let off = |r: &Result<_, _>| r.is_err();
                    assert!(off(&out.from[i]) || off(&out.to[j]));
                }
                (Cell::Unreachable, Err(hodos_engine::region::EtaError::Unreachable)) => {}
                (c, e) => panic!("{label}: {a} -> {b}: matrix {c:?}, eta {e:?}"),
            }
        }
    }
    // The snap errors are the ones Region::eta reports.
    for (i, s) in out.from.iter().enumerate() {
        assert_eq!(
            s.as_ref().map(|s| s.edge).map_err(|e| *e),
            region
                .snap_within(from[i], hodos_engine::region::End::From, max_snap)
                .map(|s| s.edge)
        );
    }
    eprintln!(
        "{label}: {answered} answered, {same_edge} along one road, {unavailable} unavailable"
    );
    assert!(same_edge >= 4, "{label}: pairs along one road: {same_edge}");
    assert!(
        unavailable >= from.len() + to.len() - 1,
        "{label}: {unavailable}"
    );

    // A passed deadline: nothing computed, no panic, scratch still clean.
    let mut late = PointMatrix::default();
    let past = Instant::now();
    matrix(
        region,
        metric,
        m2m,
        &from,
        &to,
        limits(max_snap, Some(past)),
        &mut late,
    )
    .expect("late");
    assert_eq!(late.rows_done, 0);
    for (c, l) in out.cells.iter().zip(&late.cells) {
        match c {
            Cell::Unavailable => assert_eq!(*l, Cell::Unavailable),
            _ => assert_eq!(*l, Cell::NotComputed),
        }
    }
    // Warmed up (same sizes): the call again, allocation-free apart from
    // snapping, which is the snap index's business.
    let mut again = PointMatrix::default();
    matrix(
        region,
        metric,
        m2m,
        &from,
        &to,
        limits(max_snap, None),
        &mut again,
    )
    .expect("again");
    let allocs = allocations_during(|| {
        matrix(
            region,
            metric,
            m2m,
            &from,
            &to,
            limits(max_snap, None),
            &mut again,
        )
        .expect("again");
    });
    let snapping = allocations_during(|| {
        for &p in from.iter().chain(&to) {
            let _ = region.snap_within(p, hodos_engine::region::End::From, max_snap);
        }
    });
    eprintln!("{label}: {allocs} allocations in a warmed-up coordinate matrix, {snapping} in snapping alone");
    assert!(allocs <= snapping, "{label}: the matrix itself allocates");
    assert_eq!(again.cells, out.cells);
}

#[test]
fn monaco_matrices_equal_dijkstra_and_eta() {
    check_region(&region_of(Source::Osm(fixture("monaco.osm.pbf"))), "monaco");
}

#[test]
fn synthetic_city_matrices_equal_dijkstra_and_eta() {
    check_region(
        &region_of(Source::Synthetic {
            nodes: 20_000,
            seed: 3,
        }),
        "synthetic",
    );
}

/// An irregular grid with missing links, one-way links and parallel edges,
/// not reduced to one strongly connected component (so some pairs are
/// unreachable).
fn grid(w: u32, h: u32, seed: u64) -> RoadGraph {
    let mut rng = SplitMix64::new(seed);
    let mut b = grid_nodes(w, h);
    let mut way = 0;
    for y in 0..h {
        for x in 0..w {
            let v = y * w + x;
            let mut links = vec![];
            if x + 1 < w {
                links.push(v + 1);
            }
            if y + 1 < h {
                links.push(v + w);
            }
            for c in links {
                way += 1;
                let kind = rng.below(6);
                let speed = 10.0 + rng.below(90) as f32;
                let link = match kind {
                    0 => Link::Missing,
                    1 => Link::Forward,
                    2 => Link::Backward,
                    3 => Link::BothWithSlowParallel,
                    _ => Link::Both,
                };
                add_link(&mut b, v, c, link, speed, way);
            }
        }
    }
    b.finish()
}

#[test]
fn grids_with_unreachable_pairs_equal_dijkstra() {
    for (w, h, seed) in [(6, 5, 1), (14, 11, 2), (40, 30, 3)] {
        let g = grid(w, h, seed);
        let cch = hierarchy(&g);
        let weights = hodos_engine::metric::free_flow(&g);
        let metric = CustomizedMetric::new(&cch, &weights, &g.edge_len_m);
        let mut m2m = ManyToMany::new(&cch);
        let n = g.num_nodes() as u32;
        // All-to-all on the small grids, a band on the large one.
        let all: Vec<u32> = (0..n).collect();
        let (sources, targets) = if n <= 200 {
            (all.clone(), all)
        } else {
            let mut rng = SplitMix64::new(seed);
            ((0..25).map(|_| rng.below(n as usize)).collect(), all)
        };
        let label = format!("grid {w}x{h}");
        let reachable = check_node_lists(
            &g, &cch, &weights, &metric, &mut m2m, &sources, &targets, &label,
        );
        let cells = sources.len() * targets.len();
        assert!(reachable < cells, "{label}: expected unreachable pairs");
        assert!(reachable > 0, "{label}");
    }
}

#[test]
fn passed_deadline_and_bad_input() {
    let g = grid(10, 8, 5);
    let cch = hierarchy(&g);
    let weights = hodos_engine::metric::free_flow(&g);
    let metric = CustomizedMetric::new(&cch, &weights, &g.edge_len_m);
    let mut m2m = ManyToMany::new(&cch);
    let (mut time, mut len) = (Vec::new(), Vec::new());
    let nodes: Vec<u32> = (0..g.num_nodes() as u32).collect();
    let past = Instant::now();
    let out = m2m
        .run_nodes(
            &cch,
            &metric,
            &nodes,
            &nodes,
            Some(past),
            NodeCells::new(&mut time, &mut len),
        )
        .expect("late run");
    assert_eq!(out.rows_done, 0);
    assert!(time.iter().all(|&t| t == INFINITY));
    assert_eq!(time.len(), nodes.len() * nodes.len());
    // A deadline far ahead computes everything.
    let ahead = Instant::now() + Duration::from_secs(3600);
    let out = m2m
        .run_nodes(
            &cch,
            &metric,
            &nodes,
            &nodes,
            Some(ahead),
            NodeCells::new(&mut time, &mut len),
        )
        .expect("run");
    assert_eq!(out.rows_done, nodes.len());

    // Warmed up: the same call, and a smaller one, allocate nothing.
    let few = &nodes[..30];
    let allocs = allocations_during(|| {
        m2m.run_nodes(
            &cch,
            &metric,
            &nodes,
            &nodes,
            None,
            NodeCells::new(&mut time, &mut len),
        )
        .expect("run");
        m2m.run_nodes(
            &cch,
            &metric,
            few,
            &nodes[10..],
            None,
            NodeCells::new(&mut time, &mut len),
        )
        .expect("run");
    });
    assert_eq!(allocs, 0, "a warmed-up matrix call allocates nothing");

    // Bad input is an error, not a panic.
    let bad = [Endpoint::at(g.num_nodes() as u32)];
    let ok = [Endpoint::at(0)];
    let r = m2m.run(
        &cch,
        &metric,
        &[&ok],
        &[&bad],
        None,
        NodeCells::new(&mut time, &mut len),
    );
    assert!(
        matches!(r, Err(MatrixError::NodeOutOfRange { .. })),
        "{r:?}"
    );
    let many = [Endpoint::at(0); 5];
    let r = m2m.run(
        &cch,
        &metric,
        &[&many],
        &[&ok],
        None,
        NodeCells::new(&mut time, &mut len),
    );
    assert!(
        matches!(r, Err(MatrixError::TooManyEndpoints { .. })),
        "{r:?}"
    );
    let other = ManyToMany::new(&hierarchy(&grid(3, 3, 1))).run(
        &cch,
        &metric,
        &[&ok],
        &[&ok],
        None,
        NodeCells::new(&mut time, &mut len),
    );
    assert!(
        matches!(other, Err(MatrixError::ScratchMismatch { .. })),
        "{other:?}"
    );
    // Empty sides are fine.
    let out = m2m
        .run(
            &cch,
            &metric,
            &[],
            &[&ok],
            None,
            NodeCells::new(&mut time, &mut len),
        )
        .expect("empty");
    assert_eq!((out.rows_done, time.len()), (0, 0));
    // And the scratch still gives exact answers afterwards.
    check_node_lists(
        &g,
        &cch,
        &weights,
        &metric,
        &mut m2m,
        &nodes,
        &nodes,
        "after errors",
    );
}

#[test]
fn ny_node_matrix_equals_dijkstra() {
    let Some(ny) = dimacs_ny() else {
        return;
    };
    let raw =
        hodos_engine::import::dimacs::read(&ny.distance_gr, &ny.coordinates).expect("read NY");
    let art = build_from_graph("dimacs:NY".into(), raw, 0.0, &mut Quiet).expect("build");
    let region = Region::from_artifact(art);
    let ff = region.free_flow();
    let mut m2m = ManyToMany::new(&region.cch);
    let r = check_nodes(
        &region.graph,
        &region.cch,
        &ff.weights,
        &ff.customized,
        &mut m2m,
        20,
        20,
        31,
        "NY 20x20",
    );
    assert_eq!(r, 400);
}

/// The snap limit and deadline of a coordinate matrix.
fn limits(max_snap_m: f64, deadline: Option<Instant>) -> MatrixLimits {
    MatrixLimits {
        max_snap_m,
        deadline,
    }
}
