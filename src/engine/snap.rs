//! Snapping: a coordinate → the nearest point on a road.
//!
//! An R-tree ([`rstar`]) holds every straight segment of every road's
//! polyline, in a local equirectangular projection (metres). A two-way road
//! is indexed once, under the lower id of its twin pair; the query side
//! leaves through both directions. The answer names the edge, the offset
//! along it (metres from its tail), the share of the edge's polyline before
//! the point, the snapped point and the snap distance.

use crate::geo::{haversine_m, lerp, LatLon, LocalProjection};
use crate::graph::{RoadGraph, NONE};
use rstar::primitives::{GeomWithData, Line};
use rstar::RTree;

/// Where a coordinate lands on the road graph.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Snap {
    /// The edge (the lower id of a twin pair for two-way roads).
    pub edge: u32,
    /// Metres from the edge's tail along its polyline.
    pub offset_m: f64,
    /// `offset_m` as a share of the polyline's own (haversine) length, in
    /// `0.0..=1.0`: the share of the edge's time and length before the
    /// point. Measured against the polyline and not the edge's stored
    /// length, which may differ (DIMACS lengths come from the file), so
    /// that a point at the tail or head node is exactly 0.0 or 1.0.
    pub fraction: f64,
    /// The point on the road.
    pub point: LatLon,
    /// Great-circle metres from the query coordinate to `point`.
    pub distance_m: f64,
}

#[derive(Debug, Clone, Copy, PartialEq)]
struct SegInfo {
    edge: u32,
    /// Metres along the edge where this segment starts.
    start_m: f64,
    /// Haversine length of this segment.
    len_m: f64,
    /// Haversine length of the edge's whole polyline (the sum of its
    /// segments', in order, so the last segment ends at exactly this).
    edge_m: f64,
}

type Seg = GeomWithData<Line<[f64; 2]>, SegInfo>;

/// The snapping index for one graph.
pub struct SnapIndex {
    tree: RTree<Seg>,
    proj: LocalProjection,
}

impl std::fmt::Debug for SnapIndex {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SnapIndex")
            .field("segments", &self.tree.size())
            .finish()
    }
}

impl SnapIndex {
    pub fn new(g: &RoadGraph) -> Self {
        let (lo, hi) = g.bbox();
        let proj = LocalProjection::new(if lo.lat.is_finite() {
            (lo.lat + hi.lat) / 2.0
        } else {
            0.0
        });
        let mut segs = Vec::with_capacity(g.num_edges() / 2 + g.shape.len());
        let mut poly = Vec::new();
        for e in 0..g.num_edges() as u32 {
            let twin = g.edge_twin[e as usize];
            if twin != NONE && twin < e {
                continue;
            }
            poly.clear();
            g.edge_polyline_into(e, &mut poly);
            let first = segs.len();
            let mut start = 0.0;
            for w in poly.windows(2) {
                let len = haversine_m(w[0], w[1]);
                segs.push(Seg::new(
                    Line::new(proj.project(w[0]), proj.project(w[1])),
                    SegInfo {
                        edge: e,
                        start_m: start,
                        len_m: len,
                        edge_m: 0.0,
                    },
                ));
                start += len;
            }
            for s in &mut segs[first..] {
                s.data.edge_m = start;
            }
        }
        Self {
            tree: RTree::bulk_load(segs),
            proj,
        }
    }

    pub fn num_segments(&self) -> usize {
        self.tree.size()
    }

    /// The nearest road point to `p`, if the graph has any segment.
    pub fn snap(&self, p: LatLon) -> Option<Snap> {
        let q = self.proj.project(p);
        let seg = self.tree.nearest_neighbor(&q)?;
        let (a, b) = (seg.geom().from, seg.geom().to);
        let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
        let l2 = dx * dx + dy * dy;
        let t = if l2 > 0.0 {
            (((q[0] - a[0]) * dx + (q[1] - a[1]) * dy) / l2).clamp(0.0, 1.0)
        } else {
            0.0
        };
        let info = seg.data;
        let offset_m = (info.start_m + t * info.len_m).clamp(0.0, info.edge_m);
        // At the tail t and start_m are 0; at the head the last segment's
        // start + length is edge_m, so the share is exactly 0 or 1 there.
        let fraction = if info.edge_m > 0.0 {
            (offset_m / info.edge_m).clamp(0.0, 1.0)
        } else {
            0.0
        };
        let point = lerp(self.proj.unproject(a), self.proj.unproject(b), t);
        Some(Snap {
            edge: info.edge,
            offset_m,
            fraction,
            point,
            distance_m: haversine_m(p, point),
        })
    }
}
