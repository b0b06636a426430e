//! Checks on USA-road-d.NY from the 9th DIMACS Implementation Challenge
//! (found through HODOS_DATA_DIR; see ../shared/data/dimacs/SOURCES.md).
//! One test builds the hierarchy once and runs every NY check on it; without
//! the data it prints SKIPPED and passes.

use hodos_engine::build::{build_from_graph, Quiet};
use hodos_engine::import::dimacs;
use hodos_engine::region::Region;
use hodos_test_support::{assert_exact, dimacs_ny, random_speeds};
use std::collections::HashMap;
use std::time::Instant;

#[test]
fn ny_hierarchy_is_exact_small_and_calibrated() {
    let Some(ny) = dimacs_ny() else {
        return;
    };
    let (gr, co, t_gr) = (ny.distance_gr, ny.coordinates, ny.time_gr);
    let t0 = Instant::now();
    let raw = dimacs::read(&gr, &co).expect("read NY");
    // 9th DIMACS Challenge, USA-road-d.NY header `p sp 264346 733846`
    // (SOURCES.md): every node is read; arcs minus self-loops become edges.
    assert_eq!(raw.num_nodes(), 264_346);
    assert!(
        raw.num_edges() <= 733_846 && raw.num_edges() > 733_000,
        "{}",
        raw.num_edges()
    );
    let art = build_from_graph(
        "dimacs:NY".into(),
        raw,
        t0.elapsed().as_secs_f64(),
        &mut Quiet,
    )
    .expect("build");
    eprintln!("NY build phases: {:?}", art.meta.phase_seconds);
    eprintln!(
        "NY: {} nodes, {} edges, {} arcs, top separator {}, tree depth {}, dropped {:?}",
        art.meta.nodes,
        art.meta.edges,
        art.meta.arcs,
        art.meta.top_separator,
        art.meta.elimination_tree_depth,
        art.meta.dropped
    );

    // Rule of thumb (common practice): a city-scale road network is cut by
    // about √n nodes; allow 2·√n for the top-level separator.
    let n = art.meta.nodes as f64;
    assert!(
        (art.meta.top_separator as f64) <= 2.0 * n.sqrt(),
        "top separator {} > 2·√n = {:.0}",
        art.meta.top_separator,
        2.0 * n.sqrt()
    );

    // Circuity: Ballou, Rahardja & Sakai (2002) give about 1.2 for the US;
    // urban practice 1.2–1.4 (from memory). Accept 1.1–1.6 per band with a
    // useful sample, and overall.
    let cal = &art.calibration;
    eprintln!("NY calibration: {cal:?}");
    assert!(cal.pairs >= 2000, "{} pairs", cal.pairs);
    assert!(
        (1.1..=1.6).contains(&cal.overall_circuity),
        "overall circuity {}",
        cal.overall_circuity
    );
    for b in cal
        .bands
        .iter()
        .filter(|b| b.count >= 100 && b.lo_km >= 1.0)
    {
        assert!((1.1..=1.6).contains(&b.circuity), "band {b:?}");
    }

    let region = Region::from_artifact(art);
    // Exactness, free-flow (lengths at the DIMACS default speed).
    let ff = region.free_flow();
    let pairs = assert_exact(&region, &ff, 10, 100, 21, "NY free-flow");
    assert!(pairs >= 1000);

    // Second metric without rebuilding: USA-road-t.NY travel-time weights,
    // matched to our edges by (tail, head) external ids (smallest weight for
    // parallel arcs, as both engines then see the same per-edge value).
    let arcs = dimacs::read_arc_weights(&t_gr).expect("read t weights");
    let mut by_pair: HashMap<(u64, u64), u32> = HashMap::with_capacity(arcs.len());
    for (u, v, w) in arcs {
        let k = (u64::from(u) + 1, u64::from(v) + 1);
        let e = by_pair.entry(k).or_insert(w);
        *e = (*e).min(w);
    }
    let g = &region.graph;
    let t_weights: Vec<u32> = (0..g.num_edges())
        .map(|e| {
            by_pair[&(
                g.node_ext[g.edge_tail[e] as usize],
                g.node_ext[g.edge_head[e] as usize],
            )]
        })
        .collect();
    let tm = region.metric(t_weights);
    assert_exact(&region, &tm, 10, 100, 22, "NY USA-road-t");

    // A third: random per-edge speeds.
    let rs = region.metric(hodos_engine::metric::from_speeds(g, &random_speeds(g, 7)));
    assert_exact(&region, &rs, 5, 200, 23, "NY random speeds");
}
