//! Edge naming: `(from_node, to_node)` external node ids → edge ids.
//!
//! Speed tables name an edge by the external ids of its tail and head
//! ([`RoadGraph::node_ext`]). Several edges may share both ends (parallel
//! roads, two ways between the same intersections); a row naming those ends
//! applies to all of them, because the table cannot tell them apart.
//!
//! Built once per graph: a sorted array of end pairs (24 bytes per edge with
//! the edge ids both ways) plus an open-addressing hash table of `u32` slots
//! at load ≤ 1/2 (4–8 bytes per distinct pair). A lookup is one or two cache
//! misses, where a binary search over ~10⁶ pairs is about twenty: a
//! million-row table spends most of its parse time in lookups.

use crate::graph::{RoadGraph, NONE};

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
    /// Hash table (linear probing): the first slot of each distinct pair, or
    /// [`NONE`]; the length is a power of two.
    table: Vec<u32>,
}

/// Mixes an end pair into a table position (multiply-xorshift with the
/// 64-bit golden-ratio constant and the MurmurHash3 finaliser constant).
/// Keys come from the graph, not from uploads, so no keyed hash is needed.
#[inline]
fn hash(key: (u64, u64)) -> u64 {
    let h = key.0.wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ key.1;
    let h = (h ^ (h >> 32)).wrapping_mul(0xC4CE_B9FE_1A85_EC53);
    h ^ (h >> 29)
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
        let keys: Vec<(u64, u64)> = t.iter().map(|&(a, b, _)| (a, b)).collect();
        let edges = t.iter().map(|&(_, _, e)| e).collect();
        drop(t);
        let distinct = (0..keys.len())
            .filter(|&i| i == 0 || keys[i - 1] != keys[i])
            .count();
        let size = (2 * distinct).next_power_of_two().max(2);
        let mut table = vec![NONE; size];
        let mask = size - 1;
        for slot in 0..keys.len() {
            if slot > 0 && keys[slot - 1] == keys[slot] {
                continue;
            }
            let mut i = hash(keys[slot]) as usize & mask;
            while table[i] != NONE {
                i = (i + 1) & mask;
            }
            table[i] = slot as u32;
        }
        EdgeIndex {
            keys,
            edges,
            slot_of_edge,
            table,
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
        if self.table.is_empty() {
            return &[];
        }
        let mask = self.table.len() - 1;
        let mut i = hash(key) as usize & mask;
        loop {
            let slot = self.table[i];
            if slot == NONE {
                return &[];
            }
            let lo = slot as usize;
            if self.keys[lo] == key {
                let n = self.keys[lo..].iter().take_while(|k| **k == key).count();
                return &self.edges[lo..lo + n];
            }
            i = (i + 1) & mask;
        }
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
