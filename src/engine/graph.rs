//! The road graph: intersections (nodes) and directed road segments (edges).
//!
//! Every importer produces a [`RoadGraph`] through a [`GraphBuilder`]. Nodes
//! exist only at intersections and dead ends; the bends of a road between two
//! intersections are kept as interior shape points of its edge, so lengths,
//! geometry and snapping stay faithful. Each edge remembers the external ids
//! that name it in speed tables (way id, end node ids).
//!
//! The layout is struct-of-arrays indexed by `u32` ids: the hierarchy, the
//! metric and the snapping index all refer to edges and nodes by index.

use crate::geo::{haversine_m, LatLon};
use serde::{Deserialize, Serialize};

/// Marker for "no such id" in `u32` index arrays.
pub const NONE: u32 = u32::MAX;

/// Road class of an edge. Used for default speeds and reporting.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[repr(u8)]
pub enum RoadClass {
    Motorway,
    MotorwayLink,
    Trunk,
    TrunkLink,
    Primary,
    PrimaryLink,
    Secondary,
    SecondaryLink,
    Tertiary,
    TertiaryLink,
    Unclassified,
    Residential,
    LivingStreet,
    Service,
    /// Source without road classes (DIMACS).
    Unknown,
}

impl RoadClass {
    pub fn name(self) -> &'static str {
        match self {
            RoadClass::Motorway => "motorway",
            RoadClass::MotorwayLink => "motorway_link",
            RoadClass::Trunk => "trunk",
            RoadClass::TrunkLink => "trunk_link",
            RoadClass::Primary => "primary",
            RoadClass::PrimaryLink => "primary_link",
            RoadClass::Secondary => "secondary",
            RoadClass::SecondaryLink => "secondary_link",
            RoadClass::Tertiary => "tertiary",
            RoadClass::TertiaryLink => "tertiary_link",
            RoadClass::Unclassified => "unclassified",
            RoadClass::Residential => "residential",
            RoadClass::LivingStreet => "living_street",
            RoadClass::Service => "service",
            RoadClass::Unknown => "unknown",
        }
    }
}

/// One directed edge as handed to the builder.
#[derive(Debug, Clone)]
pub struct EdgeSpec<'a> {
    pub tail: u32,
    pub head: u32,
    /// Length in metres; `None` computes it by haversine over the shape.
    pub length_m: Option<f64>,
    /// Free-flow speed in km/h (must be > 0).
    pub speed_kmh: f32,
    /// External id of the road (OSM way id; a synthetic id elsewhere).
    pub way_id: u64,
    pub class: RoadClass,
    /// Interior shape points from tail to head, excluding both ends.
    pub shape: &'a [LatLon],
}

/// The road graph. Immutable once built.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
pub struct RoadGraph {
    pub node_lat: Vec<f64>,
    pub node_lon: Vec<f64>,
    /// External node id (OSM node id, DIMACS 1-based id, synthetic id): the
    /// name speed tables use for this intersection.
    pub node_ext: Vec<u64>,
    pub edge_tail: Vec<u32>,
    pub edge_head: Vec<u32>,
    pub edge_len_m: Vec<f64>,
    /// Free-flow speed in km/h; the default metric.
    pub edge_speed_kmh: Vec<f32>,
    pub edge_way: Vec<u64>,
    pub edge_class: Vec<RoadClass>,
    /// `shape[edge_shape_first[e]..edge_shape_first[e+1]]` are the interior
    /// shape points of edge `e`; length is `edges + 1`.
    pub edge_shape_first: Vec<u32>,
    pub shape: Vec<LatLon>,
    /// The opposite edge of the same road (head→tail on the same way with the
    /// same shape reversed), or [`NONE`]. Lets a query that starts mid-edge
    /// leave in both directions of a two-way road.
    pub edge_twin: Vec<u32>,
}

impl RoadGraph {
    pub fn num_nodes(&self) -> usize {
        self.node_lat.len()
    }

    pub fn num_edges(&self) -> usize {
        self.edge_tail.len()
    }

    pub fn node_pos(&self, n: u32) -> LatLon {
        LatLon::new(self.node_lat[n as usize], self.node_lon[n as usize])
    }

    /// Interior shape points of an edge (excluding its end nodes).
    pub fn edge_interior(&self, e: u32) -> &[LatLon] {
        let a = self.edge_shape_first[e as usize] as usize;
        let b = self.edge_shape_first[e as usize + 1] as usize;
        &self.shape[a..b]
    }

    /// Full polyline of an edge, tail to head.
    pub fn edge_polyline(&self, e: u32) -> Vec<LatLon> {
        let mut v = Vec::with_capacity(self.edge_interior(e).len() + 2);
        self.edge_polyline_into(e, &mut v);
        v
    }

    /// Appends the full polyline of an edge, tail to head, to `out`.
    pub fn edge_polyline_into(&self, e: u32, out: &mut Vec<LatLon>) {
        out.push(self.node_pos(self.edge_tail[e as usize]));
        out.extend_from_slice(self.edge_interior(e));
        out.push(self.node_pos(self.edge_head[e as usize]));
    }

    /// Bounding box `(min, max)` of all nodes.
    pub fn bbox(&self) -> (LatLon, LatLon) {
        let mut lo = LatLon::new(f64::INFINITY, f64::INFINITY);
        let mut hi = LatLon::new(f64::NEG_INFINITY, f64::NEG_INFINITY);
        for i in 0..self.num_nodes() {
            lo.lat = lo.lat.min(self.node_lat[i]);
            lo.lon = lo.lon.min(self.node_lon[i]);
            hi.lat = hi.lat.max(self.node_lat[i]);
            hi.lon = hi.lon.max(self.node_lon[i]);
        }
        (lo, hi)
    }

    /// Out-edges in CSR form: `(first, edges)`, `edges[first[v]..first[v+1]]`
    /// are the ids of the edges leaving `v`.
    pub fn out_csr(&self) -> (Vec<u32>, Vec<u32>) {
        let n = self.num_nodes();
        let mut first = vec![0u32; n + 1];
        for &t in &self.edge_tail {
            first[t as usize + 1] += 1;
        }
        for i in 0..n {
            first[i + 1] += first[i];
        }
        let mut pos = first.clone();
        let mut out = vec![0u32; self.num_edges()];
        for (e, &t) in self.edge_tail.iter().enumerate() {
            out[pos[t as usize] as usize] = e as u32;
            pos[t as usize] += 1;
        }
        (first, out)
    }

    /// Keeps only the largest strongly connected component (petgraph's
    /// Kosaraju), renumbering nodes and edges densely in their old order.
    pub fn keep_largest_scc(self) -> (RoadGraph, SccReport) {
        use petgraph::graph::{DiGraph, NodeIndex};
        let n = self.num_nodes();
        let mut g: DiGraph<(), ()> = DiGraph::with_capacity(n, self.num_edges());
        for _ in 0..n {
            g.add_node(());
        }
        for e in 0..self.num_edges() {
            g.add_edge(
                NodeIndex::new(self.edge_tail[e] as usize),
                NodeIndex::new(self.edge_head[e] as usize),
                (),
            );
        }
        let comps = petgraph::algo::kosaraju_scc(&g);
        let components = comps.len();
        let mut keep = vec![false; n];
        if let Some(best) = comps.iter().max_by_key(|c| c.len()) {
            for v in best {
                keep[v.index()] = true;
            }
        }
        drop(g);
        let kept_nodes = keep.iter().filter(|&&k| k).count();
        let before_edges = self.num_edges();
        let out = self.retain_nodes(&keep);
        let report = SccReport {
            components,
            dropped_nodes: n - kept_nodes,
            dropped_edges: before_edges - out.num_edges(),
        };
        (out, report)
    }

    /// Keeps the nodes with `keep[v]` and the edges between them.
    pub fn retain_nodes(&self, keep: &[bool]) -> RoadGraph {
        let mut map = vec![NONE; self.num_nodes()];
        let mut b = GraphBuilder::default();
        for v in 0..self.num_nodes() {
            if keep[v] {
                map[v] = b.add_node(self.node_pos(v as u32), self.node_ext[v]);
            }
        }
        for e in 0..self.num_edges() {
            let (t, h) = (self.edge_tail[e], self.edge_head[e]);
            if keep[t as usize] && keep[h as usize] {
                b.add_edge(EdgeSpec {
                    tail: map[t as usize],
                    head: map[h as usize],
                    length_m: Some(self.edge_len_m[e]),
                    speed_kmh: self.edge_speed_kmh[e],
                    way_id: self.edge_way[e],
                    class: self.edge_class[e],
                    shape: self.edge_interior(e as u32),
                });
            }
        }
        b.finish()
    }
}

/// What keeping the largest strongly connected component removed.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct SccReport {
    pub components: usize,
    pub dropped_nodes: usize,
    pub dropped_edges: usize,
}

/// Accumulates nodes and edges, then computes twins in [`finish`](Self::finish).
#[derive(Debug, Default)]
pub struct GraphBuilder {
    g: RoadGraph,
}

impl GraphBuilder {
    pub fn with_capacity(nodes: usize, edges: usize) -> Self {
        let mut b = Self::default();
        b.g.node_lat.reserve(nodes);
        b.g.node_lon.reserve(nodes);
        b.g.node_ext.reserve(nodes);
        b.g.edge_tail.reserve(edges);
        b.g.edge_head.reserve(edges);
        b.g.edge_len_m.reserve(edges);
        b.g.edge_speed_kmh.reserve(edges);
        b.g.edge_way.reserve(edges);
        b.g.edge_class.reserve(edges);
        b.g.edge_shape_first.reserve(edges + 1);
        b
    }

    pub fn num_nodes(&self) -> usize {
        self.g.num_nodes()
    }

    pub fn num_edges(&self) -> usize {
        self.g.num_edges()
    }

    pub fn add_node(&mut self, pos: LatLon, ext_id: u64) -> u32 {
        let id = self.g.node_lat.len() as u32;
        self.g.node_lat.push(pos.lat);
        self.g.node_lon.push(pos.lon);
        self.g.node_ext.push(ext_id);
        id
    }

    /// Adds a directed edge. Self-loops are ignored (they never lie on a
    /// shortest path and a hierarchy has no use for them); returns whether the
    /// edge was added.
    pub fn add_edge(&mut self, e: EdgeSpec<'_>) -> bool {
        if e.tail == e.head {
            return false;
        }
        debug_assert!((e.tail as usize) < self.num_nodes());
        debug_assert!((e.head as usize) < self.num_nodes());
        debug_assert!(e.speed_kmh > 0.0);
        let g = &mut self.g;
        if g.edge_shape_first.is_empty() {
            g.edge_shape_first.push(0);
        }
        let len = e.length_m.unwrap_or_else(|| {
            let mut prev = g.node_pos(e.tail);
            let mut sum = 0.0;
            for &p in e.shape {
                sum += haversine_m(prev, p);
                prev = p;
            }
            sum + haversine_m(prev, g.node_pos(e.head))
        });
        g.edge_tail.push(e.tail);
        g.edge_head.push(e.head);
        g.edge_len_m.push(len);
        g.edge_speed_kmh.push(e.speed_kmh);
        g.edge_way.push(e.way_id);
        g.edge_class.push(e.class);
        g.shape.extend_from_slice(e.shape);
        g.edge_shape_first.push(g.shape.len() as u32);
        true
    }

    /// Finishes the graph: computes twins (pairs `t→h`, `h→t` on the same way
    /// whose shapes mirror each other).
    pub fn finish(mut self) -> RoadGraph {
        let g = &mut self.g;
        if g.edge_shape_first.is_empty() {
            g.edge_shape_first.push(0);
        }
        let m = g.num_edges();
        g.edge_twin = vec![NONE; m];
        let mut keyed: Vec<(u32, u32, u64, u32)> = (0..m as u32)
            .map(|e| {
                let (t, h) = (g.edge_tail[e as usize], g.edge_head[e as usize]);
                (t.min(h), t.max(h), g.edge_way[e as usize], e)
            })
            .collect();
        keyed.sort_unstable();
        let mut i = 0;
        while i < keyed.len() {
            let mut j = i + 1;
            while j < keyed.len()
                && keyed[j].0 == keyed[i].0
                && keyed[j].1 == keyed[i].1
                && keyed[j].2 == keyed[i].2
            {
                j += 1;
            }
            // Pair each edge with an unpaired opposite edge of mirrored shape.
            for a in i..j {
                let ea = keyed[a].3;
                if g.edge_twin[ea as usize] != NONE {
                    continue;
                }
                for item in keyed.iter().take(j).skip(a + 1) {
                    let eb = item.3;
                    if g.edge_twin[eb as usize] == NONE
                        && g.edge_tail[ea as usize] == g.edge_head[eb as usize]
                        && mirrored(g, ea, eb)
                    {
                        g.edge_twin[ea as usize] = eb;
                        g.edge_twin[eb as usize] = ea;
                        break;
                    }
                }
            }
            i = j;
        }
        self.g
    }
}

fn mirrored(g: &RoadGraph, a: u32, b: u32) -> bool {
    let (sa, sb) = (g.edge_interior(a), g.edge_interior(b));
    sa.len() == sb.len() && sa.iter().zip(sb.iter().rev()).all(|(p, q)| p == q)
}
