//! The cost of per-answer speed sources (edge classes) on USA-road-d.NY
//! (9th DIMACS Challenge, via `HODOS_DATA_DIR`): customization, memory per
//! metric, ETA latency and 100×100 matrix time, each with and without
//! classes, interleaved in one run; medians.
//! `cargo run --release --example provenance_cost`.
use hodos::engine::build::{build_from_graph, Quiet};
use hodos::engine::cch::matrix::ManyToMany;
use hodos::engine::cch::CchQuery;
use hodos::engine::geo::LatLon;
use hodos::engine::import::dimacs;
use hodos::engine::region::matrix::{matrix, MatrixLimits, PointMatrix};
use hodos::engine::region::{Metric, Region, DEFAULT_MAX_SNAP_M};
use hodos_testkit::{DimacsNy, SplitMix64};
use std::time::Instant;

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let ny = match DimacsNy::find() {
        Ok(ny) => ny,
        Err(why) => return hodos_testkit::skipped(why),
    };
    let raw = dimacs::read(&ny.distance_gr, &ny.coordinates).expect("read NY");
    let art = build_from_graph("dimacs:NY".into(), raw, 0.0, &mut Quiet).expect("build");
    let region = Region::from_artifact(art);
    let g = &region.graph;
    let mut rng = SplitMix64::new(7);
    let speeds: Vec<f32> = (0..g.num_edges())
        .map(|_| 10.0 + rng.below(100) as f32)
        .collect();
    let classes: Vec<u8> = (0..g.num_edges()).map(|_| rng.below(3) as u8).collect();
    let w = hodos::engine::metric::from_speeds(g, &speeds);

    // Customization: interleaved, 5 each.
    let (mut t_plain, mut t_cls) = (Vec::new(), Vec::new());
    let (mut plain, mut with): (Option<Metric>, Option<Metric>) = (None, None);
    for _ in 0..5 {
        let t = Instant::now();
        plain = Some(region.metric(w.clone()));
        t_plain.push(t.elapsed().as_secs_f64() * 1000.0);
        let t = Instant::now();
        with = Some(region.metric_with_classes(w.clone(), classes.clone()));
        t_cls.push(t.elapsed().as_secs_f64() * 1000.0);
    }
    let (plain, with) = (plain.unwrap(), with.unwrap());
    let arcs = region.cch.num_arcs();
    let (b0, b1) = (plain.customized.heap_bytes(), with.customized.heap_bytes());
    println!(
        "NY: {} nodes, {} edges, {} arcs",
        g.num_nodes(),
        g.num_edges(),
        arcs
    );
    println!(
        "arc directions kept by perfect customization: {} of {}",
        with.customized.forward.arcs.len() + with.customized.backward.arcs.len(),
        2 * arcs
    );
    println!(
        "customization median (of 5): {:.1} ms without classes, {:.1} ms with",
        median(t_plain),
        median(t_cls)
    );
    println!(
        "metric heap: {:.1} MB without classes, {:.1} MB with (+{:.1} MB = {:.1} B per arc); \
         per-edge class vector {:.1} MB",
        b0 as f64 / 1e6,
        b1 as f64 / 1e6,
        (b1 - b0) as f64 / 1e6,
        (b1 - b0) as f64 / arcs as f64,
        g.num_edges() as f64 / 1e6
    );

    // ETAs between random node coordinates, interleaved per pair.
    let n = g.num_nodes() as usize;
    let pts: Vec<(LatLon, LatLon)> = (0..4000)
        .map(|_| (g.node_pos(rng.below(n)), g.node_pos(rng.below(n))))
        .collect();
    let mut q = CchQuery::new(&region.cch);
    let (mut e_plain, mut e_cls) = (Vec::new(), Vec::new());
    for (i, &(a, b)) in pts.iter().enumerate() {
        let order: [&Metric; 2] = if i % 2 == 0 {
            [&plain, &with]
        } else {
            [&with, &plain]
        };
        for m in order {
            let t = Instant::now();
            let r = region.eta(m, &mut q, a, b, DEFAULT_MAX_SNAP_M);
            let us = t.elapsed().as_secs_f64() * 1e6;
            std::hint::black_box(r.ok());
            if std::ptr::eq(m, &plain) {
                e_plain.push(us);
            } else {
                e_cls.push(us);
            }
        }
    }
    println!(
        "ETA median (of {}): {:.1} µs without classes, {:.1} µs with",
        pts.len(),
        median(e_plain),
        median(e_cls)
    );

    // 100×100 matrices, interleaved, 61 each (after one warm-up each).
    let from: Vec<LatLon> = (0..100).map(|_| g.node_pos(rng.below(n))).collect();
    let to: Vec<LatLon> = (0..100).map(|_| g.node_pos(rng.below(n))).collect();
    let mut m2m = ManyToMany::new(&region.cch);
    let mut out = PointMatrix::default();
    let limits = MatrixLimits {
        max_snap_m: DEFAULT_MAX_SNAP_M,
        deadline: None,
    };
    let (mut m_plain, mut m_cls) = (Vec::new(), Vec::new());
    for round in 0..62 {
        for m in [&plain, &with] {
            let t = Instant::now();
            matrix(&region, m, &mut m2m, &from, &to, limits, &mut out).expect("matrix");
            let ms = t.elapsed().as_secs_f64() * 1000.0;
            if round > 0 {
                if std::ptr::eq(m, &plain) {
                    m_plain.push(ms);
                } else {
                    m_cls.push(ms);
                }
            }
        }
    }
    println!(
        "100×100 matrix median (of 61): {:.2} ms without classes, {:.2} ms with; scratch {:.1} MB",
        median(m_plain),
        median(m_cls),
        m2m.heap_bytes() as f64 / 1e6
    );
}
