//! Fixtures for the engine's unit tests: a small synthetic city built by
//! the real pipeline, the reference shortest-path distances of petgraph's
//! Dijkstra (`petgraph::algo::dijkstra`, crates.io petgraph 0.8) on the same
//! graph and weights, and a deterministic pair sampler (`testkit`'s).

use crate::artifact::Artifact;
use crate::build::{build_from_graph, Quiet};
use crate::graph::RoadGraph;

/// A synthetic city of about `nodes` intersections (largest strongly
/// connected component), through the whole build pipeline.
pub(crate) fn city(nodes: usize, seed: u64) -> Artifact {
    let (graph, _) = crate::import::synthetic::generate(nodes, seed).keep_largest_scc();
    build_from_graph("unit-test city".to_string(), graph, 0.0, &mut Quiet).expect("build")
}

/// One-to-all distances from road node `s` by petgraph's Dijkstra, with
/// one arc per road edge weighted `weights[e]` (`None`: unreachable).
pub(crate) fn reference_dists(g: &RoadGraph, weights: &[u32], s: u32) -> Vec<Option<u64>> {
    hodos_testkit::reference_dists(g.num_nodes(), &g.edge_tail, &g.edge_head, weights, s)
}

/// Deterministic pseudo-random numbers (SplitMix64, shared with the
/// integration tests and benches), so sampled pairs are the same on every
/// run.
pub(crate) use hodos_testkit::SplitMix64 as Rng;
