//! Fixtures for the engine's unit tests: a small synthetic city built by
//! the real pipeline, the reference shortest-path distances of petgraph's
//! Dijkstra (`petgraph::algo::dijkstra`, crates.io petgraph 0.8) on the same
//! graph and weights, and a deterministic pair sampler (`testkit`'s).

use crate::engine::artifact::Artifact;
use crate::engine::build::{build_from_graph, Quiet};
use crate::engine::graph::RoadGraph;
use petgraph::graph::{DiGraph, NodeIndex};

/// A synthetic city of about `nodes` intersections (largest strongly
/// connected component), through the whole build pipeline.
pub(crate) fn city(nodes: usize, seed: u64) -> Artifact {
    let (graph, _) = crate::engine::import::synthetic::generate(nodes, seed).keep_largest_scc();
    build_from_graph("unit-test city".to_string(), graph, 0.0, &mut Quiet).expect("build")
}

/// One-to-all distances from road node `s` by petgraph's Dijkstra, with
/// one arc per road edge weighted `weights[e]` (`None`: unreachable).
pub(crate) fn reference_dists(g: &RoadGraph, weights: &[u32], s: u32) -> Vec<Option<u64>> {
    let mut pg = DiGraph::<(), u32>::with_capacity(g.num_nodes(), g.num_edges());
    for _ in 0..g.num_nodes() {
        pg.add_node(());
    }
    for ((&t, &h), &w) in g.edge_tail.iter().zip(&g.edge_head).zip(weights) {
        pg.add_edge(NodeIndex::new(t as usize), NodeIndex::new(h as usize), w);
    }
    let mut out = vec![None; g.num_nodes()];
    for (k, v) in petgraph::algo::dijkstra(&pg, NodeIndex::new(s as usize), None, |e| {
        u64::from(*e.weight())
    }) {
        out[k.index()] = Some(v);
    }
    out
}

/// Deterministic pseudo-random numbers (SplitMix64, shared with the
/// integration tests and benches), so sampled pairs are the same on every
/// run.
pub(crate) use crate::testkit::SplitMix64 as Rng;
