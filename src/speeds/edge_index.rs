//! Edge naming: `(from_node, to_node)` external node ids → edge ids.
//!
//! Speed tables name an edge by the external ids of its tail and head
//! ([`RoadGraph::node_ext`]). Several edges may share both ends (parallel
//! roads, two ways between the same intersections); a row naming those ends
//! applies to all of them, because the table cannot tell them apart.
//!
//! Built once per graph: one sorted array of end pairs (binary search, no
//! hash table overhead), 24 bytes per edge.

use crate::graph::RoadGraph;

/// Lookup from external end ids to edge ids.
#[derive(Debug, Clone, Default)]
pub struct EdgeIndex {
    /// `(node_ext[tail], node_ext[head])` per slot, sorted; equal pairs are
    /// adjacent so parallel edges come out as one slice.
    keys: Vec<(u64, u64)>,
    /// Edge id of each slot (ascending within equal keys).
    edges: Vec<u32>,
    /// Slot of each edge, for the reverse direction (saving live data by
    /// name rather than by id).
    slot_of_edge: Vec<u32>,
}

impl EdgeIndex {
    pub fn new(g: &RoadGraph) -> Self {
        let m = g.num_edges();
        let mut t: Vec<(u64, u64, u32)> = (0..m)
            .map(|e| {
                let tail = g.edge_tail[e] as usize;
                let head = g.edge_head[e] as usize;
                (g.node_ext[tail], g.node_ext[head], e as u32)
            })
            .collect();
        t.sort_unstable();
        let mut slot_of_edge = vec![0u32; m];
        for (slot, &(_, _, e)) in t.iter().enumerate() {
            slot_of_edge[e as usize] = slot as u32;
        }
        let keys = t.iter().map(|&(a, b, _)| (a, b)).collect();
        let edges = t.iter().map(|&(_, _, e)| e).collect();
        EdgeIndex {
            keys,
            edges,
            slot_of_edge,
        }
    }

    /// Edges of the graph this index was built for.
    pub fn num_edges(&self) -> usize {
        self.edges.len()
    }

    /// The edges from `from` to `to` (external node ids), ascending; empty
    /// when no edge has these ends.
    pub fn edges(&self, from: u64, to: u64) -> &[u32] {
        let key = (from, to);
        let lo = self.keys.partition_point(|k| *k < key);
        let n = self.keys[lo..].partition_point(|k| *k == key);
        &self.edges[lo..lo + n]
    }

    /// External `(from, to)` node ids of an edge; `None` for an id out of
    /// range.
    pub fn ends(&self, edge: u32) -> Option<(u64, u64)> {
        let slot = *self.slot_of_edge.get(edge as usize)?;
        Some(self.keys[slot as usize])
    }

    /// Every distinct end pair with its edges, in ascending pair order.
    pub fn groups(&self) -> impl Iterator<Item = ((u64, u64), &[u32])> + '_ {
        let mut i = 0;
        std::iter::from_fn(move || {
            if i >= self.keys.len() {
                return None;
            }
            let key = self.keys[i];
            let n = self.keys[i..].partition_point(|k| *k == key);
            let out = (key, &self.edges[i..i + n]);
            i += n;
            Some(out)
        })
    }
}
