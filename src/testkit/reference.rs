//! The reference every exactness check compares against: one-to-all
//! shortest-path distances by petgraph's Dijkstra (`petgraph::algo::dijkstra`,
//! crates.io petgraph 0.8), on a directed graph given as edge arrays (tail,
//! head, weight per edge), so it needs no hodos type and every layer's tests
//! share this one copy.

use petgraph::graph::{DiGraph, NodeIndex};

/// A directed graph with one weighted arc per road edge, built once and
/// searched from many sources.
pub struct ReferenceGraph {
    graph: DiGraph<(), u32>,
}

impl ReferenceGraph {
    /// One arc `tails[e] → heads[e]` weighted `weights[e]` per edge `e`.
    pub fn new(num_nodes: usize, tails: &[u32], heads: &[u32], weights: &[u32]) -> Self {
        let mut graph = DiGraph::with_capacity(num_nodes, tails.len());
        for _ in 0..num_nodes {
            graph.add_node(());
        }
        for ((&t, &h), &w) in tails.iter().zip(heads).zip(weights) {
            graph.add_edge(NodeIndex::new(t as usize), NodeIndex::new(h as usize), w);
        }
        ReferenceGraph { graph }
    }

    /// Distances from node `s` to every node (`None`: unreachable).
    pub fn dists(&self, s: u32) -> Vec<Option<u64>> {
        let m = petgraph::algo::dijkstra(&self.graph, NodeIndex::new(s as usize), None, |e| {
            u64::from(*e.weight())
        });
        let mut out = vec![None; self.graph.node_count()];
        for (k, v) in m {
            out[k.index()] = Some(v);
        }
        out
    }

    /// The number of nodes.
    pub fn node_count(&self) -> usize {
        self.graph.node_count()
    }
}

/// One-to-all distances from `s` on a graph searched once.
pub fn reference_dists(
    num_nodes: usize,
    tails: &[u32],
    heads: &[u32],
    weights: &[u32],
    s: u32,
) -> Vec<Option<u64>> {
    ReferenceGraph::new(num_nodes, tails, heads, weights).dists(s)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A worked example: 0 → 1 (5), 1 → 2 (2), 0 → 2 (9), 3 isolated.
    #[test]
    fn small_example() {
        let d = reference_dists(4, &[0, 1, 0], &[1, 2, 2], &[5, 2, 9], 0);
        assert_eq!(d, vec![Some(0), Some(5), Some(7), None]);
    }
}
