//! Matrix benchmarks: bucket many-to-many node matrices 1×50, 20×20,
//! 100×100 and 1000×1000, beside 100×100 answered by repeated point queries
//! (the ratio is what the bucket method buys), plus a 100×100 coordinate
//! matrix (snapping included).
//!
//! Graph: USA-road-d.NY from `$HODOS_DATA_DIR` (default ../shared/data), or a
//! 300,000-node synthetic city when the data is absent, as benches/engine.rs.
//! Goals (BENCHMARKS.md): 100×100 ≤ 10 ms, 1000×1000 ≤ 500 ms; nothing here
//! asserts a speed.

mod common;

use criterion::{criterion_group, criterion_main, Criterion};
use hodos::engine::build::{build_from_graph, Quiet};
use hodos::engine::cch::matrix::{ManyToMany, NodeCells};
use hodos::engine::cch::CchQuery;
use hodos::engine::geo::LatLon;
use hodos::engine::region::matrix::{matrix, MatrixLimits, PointMatrix};
use hodos::engine::region::Region;
use hodos_testkit::nodes;
use std::hint::black_box;
use std::sync::OnceLock;

struct Fixture {
    name: String,
    region: Region,
}

fn fixture() -> &'static Fixture {
    static F: OnceLock<Fixture> = OnceLock::new();
    F.get_or_init(|| {
        let (name, raw) = common::bench_graph();
        let art = build_from_graph(name.clone(), raw, 0.0, &mut Quiet).expect("build");
        eprintln!(
            "graph {name}: {} nodes, {} edges, {} arcs, tree depth {}",
            art.meta.nodes, art.meta.edges, art.meta.arcs, art.meta.elimination_tree_depth
        );
        Fixture {
            name,
            region: Region::from_artifact(art),
        }
    })
}

fn bench_matrix(c: &mut Criterion) {
    let f = fixture();
    let region = &f.region;
    let metric = region.free_flow();
    let (cch, cm) = (&region.cch, &metric.customized);
    let n = region.graph.num_nodes();
    let mut m2m = ManyToMany::new(cch);
    let (mut time, mut len) = (Vec::new(), Vec::new());
    let mut group = c.benchmark_group(format!("{}/matrix", f.name));
    for (k, (ns, nt)) in [(1, 50), (20, 20), (100, 100), (1000, 1000)]
        .into_iter()
        .enumerate()
    {
        let sources = nodes(n, ns, 100 + k as u64);
        let targets = nodes(n, nt, 200 + k as u64);
        if ns >= 1000 {
            group.sample_size(10);
        }
        let out = m2m
            .run_nodes(
                cch,
                cm,
                &sources,
                &targets,
                None,
                NodeCells::new(&mut time, &mut len),
            )
            .expect("matrix");
        eprintln!("{ns}x{nt}: {} bucket cells", out.bucket_cells);
        group.bench_function(format!("nodes_{ns}x{nt}"), |b| {
            b.iter(|| {
                black_box(
                    m2m.run_nodes(
                        cch,
                        cm,
                        &sources,
                        &targets,
                        None,
                        NodeCells::new(&mut time, &mut len),
                    )
                    .expect("matrix"),
                )
            })
        });
    }

    // The same 100×100 shape by 10,000 point queries.
    group.sample_size(10);
    let sources = nodes(n, 100, 102);
    let targets = nodes(n, 100, 202);
    let mut q = CchQuery::new(cch);
    group.bench_function("point_queries_100x100", |b| {
        b.iter(|| {
            let mut sum = 0u64;
            for &s in &sources {
                for &t in &targets {
                    if let Some(r) = q.node_to_node(cch, cm, s, t) {
                        sum += u64::from(r.time);
                    }
                }
            }
            black_box(sum)
        })
    });

    // Coordinates: snapping, mid-edge endpoints, one-road trips.
    group.sample_size(20);
    let g = &region.graph;
    let pts: Vec<LatLon> = nodes(n, 200, 300)
        .into_iter()
        .map(|v| {
            let p = g.node_pos(v);
            LatLon::new(p.lat + 0.0002, p.lon - 0.0002)
        })
        .collect();
    let (from, to) = pts.split_at(100);
    let mut out = PointMatrix::default();
    group.bench_function("coordinates_100x100", |b| {
        b.iter(|| {
            matrix(
                region,
                &metric,
                &mut m2m,
                from,
                to,
                MatrixLimits {
                    max_snap_m: 500.0,
                    deadline: None,
                },
                &mut out,
            )
            .expect("matrix");
            black_box(out.rows_done)
        })
    });
    group.finish();
}

criterion_group!(benches, bench_matrix);
criterion_main!(benches);
