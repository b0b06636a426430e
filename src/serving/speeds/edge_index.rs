//! Edge naming: `(from_node, to_node)` external node ids → edge ids.
//!
//! Speed tables name an edge by the external ids of its tail and head
//! ([`RoadGraph::node_ext`]). Several edges may share both ends (parallel
//! roads, two ways between the same intersections); a row naming those ends
//! applies to all of them, because the table cannot tell them apart.
//!
//! Built once per graph and held for the life of a region, so it is laid out
//! for size (about 20 bytes per edge and 12 per node; a hash map of pairs
//! was twice that): the distinct external node ids, sorted, are the
//! *groups*; edges are stored grouped by their tail's group and, within it,
//! sorted by their head's group (a CSR over external ids). An
//! open-addressing hash table maps an external id to its group in one or
//! two cache misses, where a binary search over ~10⁵ ids is about twenty: a
//! million-row table spends most of its parse time in lookups. Two nodes
//! with the same external id share one group, so their edges answer to the
//! same name.

use crate::engine::graph::{RoadGraph, NONE};

/// Lookup from external end ids to edge ids.
#[derive(Debug, Clone, Default)]
pub struct EdgeIndex {
    /// Distinct external node ids, ascending; a position is a group.
    exts: Vec<u64>,
    /// Hash table (linear probing, load ≤ 2/3): group of an external id, or
    /// [`NONE`]; the length is a power of two.
    table: Vec<u32>,
    /// `out[first[g]..first[g + 1]]`: edges whose tail is in group `g`,
    /// ordered by head group, then edge id.
    first: Vec<u32>,
    out: Vec<u32>,
    /// Head group of each `out` entry (what lookups compare).
    out_head: Vec<u32>,
    /// Position of each edge in `out`, for the reverse direction (saving
    /// live data by name rather than by id).
    pos_of_edge: Vec<u32>,
}

/// Mixes an external id into a table position (multiply-xorshift with the
/// 64-bit golden-ratio constant and the MurmurHash3 finaliser constant).
/// Keys come from the graph, not from uploads, so no keyed hash is needed.
#[inline]
fn hash(key: u64) -> u64 {
    let h = key.wrapping_mul(0x9E37_79B9_7F4A_7C15);
    let h = (h ^ (h >> 32)).wrapping_mul(0xC4CE_B9FE_1A85_EC53);
    h ^ (h >> 29)
}

impl EdgeIndex {
    pub fn new(g: &RoadGraph) -> Self {
        let m = g.num_edges();
        let mut exts = g.node_ext.clone();
        exts.sort_unstable();
        exts.dedup();
        exts.shrink_to_fit();
        let size = (exts.len() + exts.len() / 2).next_power_of_two().max(2);
        let mut table = vec![NONE; size];
        let mask = size - 1;
        for (grp, &x) in exts.iter().enumerate() {
            let mut i = hash(x) as usize & mask;
            while table[i] != NONE {
                i = (i + 1) & mask;
            }
            table[i] = grp as u32;
        }
        let mut idx = EdgeIndex {
            exts,
            table,
            ..Default::default()
        };
        let group_of_node: Vec<u32> = g
            .node_ext
            .iter()
            .map(|&x| idx.group(x).expect("every node id is in the table"))
            .collect();
        let mut t: Vec<(u32, u32, u32)> = (0..m)
            .map(|e| {
                (
                    group_of_node[g.edge_tail[e] as usize],
                    group_of_node[g.edge_head[e] as usize],
                    e as u32,
                )
            })
            .collect();
        drop(group_of_node);
        t.sort_unstable();
        let groups = idx.exts.len();
        let mut first = vec![0u32; groups + 1];
        for &(tg, _, _) in &t {
            first[tg as usize + 1] += 1;
        }
        for i in 0..groups {
            first[i + 1] += first[i];
        }
        let mut pos_of_edge = vec![0u32; m];
        for (p, &(_, _, e)) in t.iter().enumerate() {
            pos_of_edge[e as usize] = p as u32;
        }
        idx.out = t.iter().map(|&(_, _, e)| e).collect();
        idx.out_head = t.iter().map(|&(_, h, _)| h).collect();
        idx.first = first;
        idx.pos_of_edge = pos_of_edge;
        idx
    }

    /// The group of an external node id.
    #[inline]
    fn group(&self, ext: u64) -> Option<u32> {
        if self.table.is_empty() {
            return None;
        }
        let mask = self.table.len() - 1;
        let mut i = hash(ext) as usize & mask;
        loop {
            let grp = self.table[i];
            if grp == NONE {
                return None;
            }
            if self.exts[grp as usize] == ext {
                return Some(grp);
            }
            i = (i + 1) & mask;
        }
    }

    /// Edges of the graph this index was built from.
    pub fn num_edges(&self) -> usize {
        self.out.len()
    }

    /// Edges from external node `from` to external node `to`, ascending;
    /// empty if the graph has none.
    pub fn edges(&self, from: u64, to: u64) -> &[u32] {
        let (Some(tg), Some(hg)) = (self.group(from), self.group(to)) else {
            return &[];
        };
        let (lo, hi) = (
            self.first[tg as usize] as usize,
            self.first[tg as usize + 1] as usize,
        );
        let heads = &self.out_head[lo..hi];
        let a = heads.partition_point(|&h| h < hg);
        let b = a + heads[a..].partition_point(|&h| h == hg);
        &self.out[lo + a..lo + b]
    }

    /// External `(from, to)` node ids of an edge; `None` for an id out of
    /// range.
    pub fn ends(&self, edge: u32) -> Option<(u64, u64)> {
        let p = *self.pos_of_edge.get(edge as usize)?;
        // The tail group is the one whose range holds position p.
        let tg = self.first.partition_point(|&f| f <= p) - 1;
        Some((self.exts[tg], self.exts[self.out_head[p as usize] as usize]))
    }

    /// Every distinct end pair with its edges, in ascending pair order.
    pub fn groups(&self) -> impl Iterator<Item = ((u64, u64), &[u32])> + '_ {
        let mut tg = 0usize;
        let mut i = 0usize;
        std::iter::from_fn(move || {
            if i >= self.out.len() {
                return None;
            }
            while self.first[tg + 1] as usize <= i {
                tg += 1;
            }
            let end = self.first[tg + 1] as usize;
            let hg = self.out_head[i];
            let n = self.out_head[i..end].partition_point(|&h| h == hg);
            let out = ((self.exts[tg], self.exts[hg as usize]), &self.out[i..i + n]);
            i += n;
            Some(out)
        })
    }
}
