//! Engine benchmarks: ordering + contraction, customization, point query
//! (with its ratio to petgraph's Dijkstra with early exit on the same pairs),
//! snapping and artifact load.
//!
//! Graph: USA-road-d.NY from `$HODOS_DATA_DIR` (default ../shared/data), or a
//! 300,000-node synthetic city when the data is absent. Goals are in
//! BENCHMARKS.md; nothing here asserts a speed.

mod common;

use criterion::{criterion_group, criterion_main, BatchSize, Criterion};
use hodos::engine::artifact::Artifact;
use hodos::engine::build::{build_from_graph, Quiet};
use hodos::engine::cch::{Cch, CchQuery, CustomizedMetric};
use hodos::engine::geo::{LatLon, LocalProjection};
use hodos::engine::graph::RoadGraph;
use hodos::engine::order::{nested_dissection, UndirectedGraph};
use hodos::engine::region::Region;
use hodos_testkit::node_pairs;
use petgraph::graph::{DiGraph, NodeIndex};
use std::hint::black_box;
use std::path::PathBuf;
use std::sync::OnceLock;

struct Fixture {
    name: String,
    raw: RoadGraph,
    region: Region,
    artifact_path: PathBuf,
    _dir: tempfile::TempDir,
}

fn fixture() -> &'static Fixture {
    static F: OnceLock<Fixture> = OnceLock::new();
    F.get_or_init(|| {
        let (name, raw) = common::bench_graph();
        let (raw, _) = raw.keep_largest_scc();
        let art = build_from_graph(name.clone(), raw.clone(), 0.0, &mut Quiet).expect("build");
        let dir = tempfile::tempdir().expect("tempdir");
        let artifact_path = dir.path().join("bench.hodos");
        art.save(&artifact_path).expect("save");
        eprintln!(
            "graph {name}: {} nodes, {} edges, {} arcs",
            art.meta.nodes, art.meta.edges, art.meta.arcs
        );
        Fixture {
            name,
            raw,
            region: Region::from_artifact(art),
            artifact_path,
            _dir: dir,
        }
    })
}

fn bench_preprocessing(c: &mut Criterion) {
    let f = fixture();
    let g = &f.raw;
    let mut group = c.benchmark_group(format!("{}/preprocess", f.name));
    group.sample_size(10);
    group.bench_function("order_and_contract", |b| {
        b.iter(|| {
            let ug = UndirectedGraph::from_edges(
                g.num_nodes(),
                g.edge_tail.iter().copied().zip(g.edge_head.iter().copied()),
            );
            let (lo, hi) = g.bbox();
            let proj = LocalProjection::new((lo.lat + hi.lat) / 2.0);
            let xy: Vec<[f64; 2]> = (0..g.num_nodes() as u32)
                .map(|v| proj.project(g.node_pos(v)))
                .collect();
            let order = nested_dissection(&ug, &xy, &mut |_| {});
            black_box(Cch::build(g, order.rank))
        })
    });
    let region = &f.region;
    let weights = hodos::engine::metric::free_flow(&region.graph);
    let mut metric = CustomizedMetric::new(&region.cch, &weights, &region.graph.edge_len_m);
    group.bench_function("customize", |b| {
        b.iter(|| metric.customize(&region.cch, black_box(&weights), &region.graph.edge_len_m))
    });
    group.finish();
}

fn bench_queries(c: &mut Criterion) {
    let f = fixture();
    let region = &f.region;
    let metric = region.free_flow();
    let n = region.graph.num_nodes();
    let ps = node_pairs(n, 1000, 7);
    let mut group = c.benchmark_group(format!("{}/query", f.name));
    let mut q = CchQuery::new(&region.cch);
    let mut i = 0;
    group.bench_function("cch_point_to_point", |b| {
        b.iter(|| {
            let (s, t) = ps[i % ps.len()];
            i += 1;
            black_box(q.node_to_node(&region.cch, &metric.customized, s, t))
        })
    });
    // The same pairs on petgraph's Dijkstra, stopping at the target.
    let g = &region.graph;
    let mut pg: DiGraph<(), u32> = DiGraph::with_capacity(n, g.num_edges());
    for _ in 0..n {
        pg.add_node(());
    }
    for e in 0..g.num_edges() {
        pg.add_edge(
            NodeIndex::new(g.edge_tail[e] as usize),
            NodeIndex::new(g.edge_head[e] as usize),
            metric.weights[e],
        );
    }
    group.sample_size(20);
    let mut j = 0;
    group.bench_function("petgraph_dijkstra_early_exit", |b| {
        b.iter(|| {
            let (s, t) = ps[j % ps.len()];
            j += 1;
            black_box(petgraph::algo::dijkstra(
                &pg,
                NodeIndex::new(s as usize),
                Some(NodeIndex::new(t as usize)),
                |e| *e.weight(),
            ))
        })
    });
    group.sample_size(100);
    let (lo, hi) = g.bbox();
    let pts: Vec<LatLon> = node_pairs(10_000, 1000, 9)
        .into_iter()
        .map(|(a, b)| {
            LatLon::new(
                lo.lat + (hi.lat - lo.lat) * a as f64 / 10_000.0,
                lo.lon + (hi.lon - lo.lon) * b as f64 / 10_000.0,
            )
        })
        .collect();
    let mut k = 0;
    group.bench_function("snap", |b| {
        b.iter(|| {
            k += 1;
            black_box(region.snap.snap(pts[k % pts.len()]))
        })
    });
    let mut l = 0;
    group.bench_function("eta_coordinates", |b| {
        b.iter(|| {
            l += 1;
            let (a, c) = (pts[l % pts.len()], pts[(l * 7 + 3) % pts.len()]);
            black_box(region.eta(&metric, &mut q, a, c, 1e9).ok())
        })
    });
    group.finish();
}

fn bench_load(c: &mut Criterion) {
    let f = fixture();
    let mut group = c.benchmark_group(format!("{}/load", f.name));
    group.sample_size(10);
    group.bench_function("artifact_load", |b| {
        b.iter_batched(
            || (),
            |_| black_box(Artifact::load(&f.artifact_path).expect("load")),
            BatchSize::PerIteration,
        )
    });
    group.bench_function("artifact_load_and_region_ready", |b| {
        b.iter_batched(
            || (),
            |_| {
                let r = Region::from_artifact(Artifact::load(&f.artifact_path).expect("load"));
                black_box(r.free_flow())
            },
            BatchSize::PerIteration,
        )
    });
    group.finish();
}

criterion_group!(benches, bench_preprocessing, bench_queries, bench_load);
criterion_main!(benches);
