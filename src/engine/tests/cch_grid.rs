//! Hierarchy exactness on small irregular grids against petgraph's Dijkstra
//! (the reference implementation). Fast; exercises one-way arcs and parallel
//! edges that the real-data checks may not hit.

use hodos_engine::cch::{customize::CustomizedMetric, CchQuery};
use hodos_engine::graph::{GraphBuilder, RoadGraph};
use hodos_test_support::graphs::{add_link, grid_nodes, hierarchy, Link};
use hodos_test_support::{petgraph_of, reference_dists, SplitMix64};

fn grid(w: u32, h: u32, seed: u64) -> RoadGraph {
    let mut rng = SplitMix64::new(seed);
    let mut b = grid_nodes(w, h);
    let mut way = 0;
    let mut add = |b: &mut GraphBuilder, a: u32, c: u32, rng: &mut SplitMix64| {
        way += 1;
        let link = match rng.below(10) {
            0 => return, // missing link
            1 => Link::Backward,
            2 => Link::Forward,
            3 => Link::BothWithSlowParallel,
            _ => Link::Both,
        };
        let speed = 10.0 + rng.below(90) as f32;
        add_link(b, a, c, link, speed, way);
    };
    for y in 0..h {
        for x in 0..w {
            let v = y * w + x;
            if x + 1 < w {
                add(&mut b, v, v + 1, &mut rng);
            }
            if y + 1 < h {
                add(&mut b, v, v + w, &mut rng);
            }
            if x + 1 < w && y + 1 < h && rng.below(7) == 0 {
                add(&mut b, v, v + w + 1, &mut rng);
            }
        }
    }
    b.finish()
}

#[test]
fn grid_queries_equal_petgraph_dijkstra() {
    for (w, h, seed) in [(5, 4, 1), (30, 20, 2), (60, 50, 3)] {
        let g = grid(w, h, seed);
        let cch = hierarchy(&g);
        let weights = hodos_engine::metric::free_flow(&g);
        let metric = CustomizedMetric::new(&cch, &weights, &g.edge_len_m);
        let pg = petgraph_of(&g, &weights);
        let mut q = CchQuery::new(&cch);
        let mut rng = SplitMix64::new(seed * 77);
        let mut edges = Vec::new();
        for _ in 0..20 {
            let s = rng.below(g.num_nodes());
            let reference = reference_dists(&pg, s);
            for t in 0..g.num_nodes() as u32 {
                let got = q.node_to_node(&cch, &metric, s, t);
                assert_eq!(
                    got.map(|r| u64::from(r.time)),
                    reference[t as usize],
                    "{w}x{h} {s}->{t}"
                );
                if let Some(r) = got {
                    edges.clear();
                    q.unpack_edges(&cch, &metric, &mut edges);
                    // The unpacked path is a real walk from s to t whose
                    // weights add up to the reported time.
                    let mut at = s;
                    let mut sum = 0u64;
                    let mut len = 0.0;
                    for &e in &edges {
                        assert_eq!(g.edge_tail[e as usize], at);
                        at = g.edge_head[e as usize];
                        sum += u64::from(weights[e as usize]);
                        len += g.edge_len_m[e as usize];
                    }
                    assert_eq!(at, t);
                    assert_eq!(sum, u64::from(r.time));
                    assert!((len * 100.0 - r.len_cm as f64).abs() <= edges.len() as f64);
                }
            }
        }
    }
}
