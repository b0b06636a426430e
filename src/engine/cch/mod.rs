//! Customizable contraction hierarchy (Dibbelt, Strasser & Wagner,
//! "Customizable Contraction Hierarchies", ACM JEA 2016).
//!
//! Three phases:
//! 1. **Contraction** ([`Cch::build`], metric-independent, in `hodos build`):
//!    given a nested-dissection order ([`crate::order`]), eliminate nodes in
//!    rank order and add every fill-in arc. The result is a chordal
//!    supergraph of the road graph in which each node keeps only its
//!    higher-ranked ("upper") neighbours. Its shape never depends on speeds.
//! 2. **Customization** ([`customize`]): per-edge travel times → weights of
//!    every hierarchy arc, by processing lower triangles bottom-up. Cheap
//!    enough to rerun whenever speeds change.
//! 3. **Query** ([`query`]): bidirectional elimination-tree search, exact
//!    (equal to Dijkstra on the same metric), plus path unpacking to the
//!    original edges; [`matrix`]: bucket many-to-many between node-level
//!    endpoints.
//!
//! Nodes inside the hierarchy are identified by rank; `rank[v]` maps a road
//! graph node to it.
//!
//! # Layout
//!
//! - this file: [`Cch`], the contraction (topology only).
//! - `arc`: the encoding of an arc's weight and origin (no-path weight,
//!   largest edge weight, `via` markers), shared by all below.
//! - [`customize`]: [`CustomizedMetric`], weights of every hierarchy arc.
//! - [`classes`]: per-arc milliseconds per caller-given edge class.
//! - `chains`: the walk over elimination-tree ancestor chains shared by
//!   every search.
//! - [`query`]: [`CchQuery`], point-to-point search and path unpacking.
//! - [`matrix`]: [`matrix::ManyToMany`], bucket many-to-many.
//!
//! **Architecture Invariant:** this module does no I/O and knows nothing about
//! HTTP, files or speed tables: it maps `&[u32]` edge weights to answers. It
//! never imports the region (coordinates, snapping): that front end sits on
//! top, in [`crate::region`].

mod arc;
mod chains;
pub mod classes;
pub mod customize;
pub mod matrix;
pub mod query;

use crate::graph::{RoadGraph, NONE};
use serde::{Deserialize, Serialize};

pub use customize::CustomizedMetric;
pub use query::{CchQuery, PathResult};

/// The metric-independent hierarchy topology.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Cch {
    /// Road node → rank.
    pub rank: Vec<u32>,
    /// Rank → road node.
    pub order: Vec<u32>,
    /// `head[first_out[x]..first_out[x+1]]`: upper neighbours of rank `x`,
    /// ascending. Arc `a` joins `tail[a] < head[a]`.
    pub first_out: Vec<u32>,
    pub head: Vec<u32>,
    /// Lower end of each arc (kept so a path can be walked from arcs alone).
    pub tail: Vec<u32>,
    /// Elimination-tree parent: the lowest upper neighbour, or NONE.
    pub parent: Vec<u32>,
    /// For each road edge: `arc << 1 | d` where `d = 1` means the edge runs
    /// from the higher to the lower rank ("down").
    pub edge_arc: Vec<u32>,
}

impl Cch {
    /// Contracts `graph` in the given rank order.
    pub fn build(graph: &RoadGraph, rank: Vec<u32>) -> Cch {
        let n = graph.num_nodes();
        assert_eq!(rank.len(), n, "one rank per node");
        let mut order = vec![0u32; n];
        for (v, &r) in rank.iter().enumerate() {
            order[r as usize] = v as u32;
        }
        let mut up: Vec<Vec<u32>> = vec![Vec::new(); n];
        for e in 0..graph.num_edges() {
            let rt = rank[graph.edge_tail[e] as usize];
            let rh = rank[graph.edge_head[e] as usize];
            if rt != rh {
                up[rt.min(rh) as usize].push(rt.max(rh));
            }
        }
        // Elimination with fill-in: the upper neighbours of x, minus the
        // lowest one p, become upper neighbours of p. That is enough to make
        // the graph chordal (each node's upper neighbourhood a clique).
        let mut parent = vec![NONE; n];
        for x in 0..n {
            let mut list = std::mem::take(&mut up[x]);
            list.sort_unstable();
            list.dedup();
            if let Some((&p, rest)) = list.split_first() {
                parent[x] = p;
                up[p as usize].extend_from_slice(rest);
            }
            up[x] = list;
        }
        let mut first_out = Vec::with_capacity(n + 1);
        first_out.push(0u32);
        let total: usize = up.iter().map(|l| l.len()).sum();
        let mut head = Vec::with_capacity(total);
        let mut tail = Vec::with_capacity(total);
        for (x, list) in up.into_iter().enumerate() {
            head.extend_from_slice(&list);
            tail.extend(std::iter::repeat_n(x as u32, list.len()));
            first_out.push(head.len() as u32);
        }
        let mut cch = Cch {
            rank,
            order,
            first_out,
            head,
            tail,
            parent,
            edge_arc: Vec::new(),
        };
        cch.edge_arc = (0..graph.num_edges())
            .map(|e| {
                let rt = cch.rank[graph.edge_tail[e] as usize];
                let rh = cch.rank[graph.edge_head[e] as usize];
                let a = cch
                    .find_arc(rt.min(rh), rt.max(rh))
                    .expect("every road edge has a hierarchy arc");
                (a << 1) | u32::from(rt > rh)
            })
            .collect();
        cch
    }

    pub fn num_nodes(&self) -> usize {
        self.rank.len()
    }

    pub fn num_arcs(&self) -> usize {
        self.head.len()
    }

    /// Arcs of rank `x` to its upper neighbours.
    #[inline]
    pub fn arcs(&self, x: u32) -> std::ops::Range<usize> {
        self.first_out[x as usize] as usize..self.first_out[x as usize + 1] as usize
    }

    /// The arc joining ranks `lo < hi`, if any.
    pub fn find_arc(&self, lo: u32, hi: u32) -> Option<u32> {
        let r = self.arcs(lo);
        let s = r.start;
        self.head[r].binary_search(&hi).ok().map(|i| (s + i) as u32)
    }

    /// Number of hierarchy arcs that are not the image of a road edge.
    pub fn num_shortcuts(&self) -> usize {
        let mut is_edge = vec![false; self.num_arcs()];
        for &ea in &self.edge_arc {
            is_edge[(ea >> 1) as usize] = true;
        }
        is_edge.iter().filter(|&&b| !b).count()
    }

    /// Depth of the elimination tree (longest root path): the most nodes a
    /// query walks on one side.
    pub fn elimination_tree_depth(&self) -> usize {
        let n = self.num_nodes();
        let mut depth = vec![0u32; n];
        let mut best = 0;
        for x in (0..n).rev() {
            let p = self.parent[x];
            depth[x] = if p == NONE { 1 } else { depth[p as usize] + 1 };
            best = best.max(depth[x]);
        }
        best as usize
    }
}
