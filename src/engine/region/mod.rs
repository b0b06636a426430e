//! A loaded region: graph, hierarchy, snapping index and calibration, and
//! the ETA/route answers computed on them for a given metric.
//!
//! This is the query engine's front door. It snaps both coordinates, starts
//! and ends the search mid-edge with the partial costs, and reports time,
//! distance and snap distances. It does no I/O and knows nothing about HTTP.
//! A metric made with per-edge classes ([`Region::metric_with_classes`])
//! also reports, per answer, the milliseconds spent on edges of each class
//! (partial first/last edges with their partial time; see
//! [`crate::cch::classes`]).
//!
//! # Layout
//!
//! - this file: [`Region`], [`Metric`], the ETA and route of one pair of
//!   coordinates, and why there may be none ([`EtaError`]).
//! - `endpoints`: a snapped point as search endpoints with partial costs,
//!   the trip along one shared road, and the rule choosing between that and
//!   the graph answer.
//! - [`matrix`]: coordinate matrices (every point snapped once, one bucket
//!   many-to-many over [`crate::cch::matrix`]), each cell equal to
//!   [`Region::eta`] for the same pair.

pub(crate) mod endpoints;
pub mod matrix;

use crate::artifact::{Artifact, Metadata};
use crate::calibration::Calibration;
use crate::cch::classes::ClassTimes;
use crate::cch::{Cch, CchQuery, CustomizedMetric};
use crate::geo::LatLon;
use crate::graph::{RoadGraph, NONE};
use crate::snap::{Snap, SnapIndex};
use endpoints::{choose, direct_stretch, snap_endpoints, Choice, Direct};

/// Largest snap distance accepted by default, in metres.
pub const DEFAULT_MAX_SNAP_M: f64 = 500.0;

/// A road graph ready to answer queries.
#[derive(Debug)]
pub struct Region {
    pub meta: Metadata,
    pub graph: RoadGraph,
    pub cch: Cch,
    pub snap: SnapIndex,
    pub calibration: Calibration,
}

/// Edge weights plus the hierarchy customized for them.
#[derive(Debug, Clone)]
pub struct Metric {
    /// Milliseconds per road edge; needed for the partial first/last edge.
    pub weights: Vec<u32>,
    /// Class per road edge (empty: a metric without classes), for the
    /// partial first/last edge's class.
    pub classes: Vec<u8>,
    pub customized: CustomizedMetric,
}

impl Metric {
    /// The class of road edge `e` (0 without classes).
    #[inline]
    pub fn class_of(&self, e: u32) -> u8 {
        self.classes.get(e as usize).copied().unwrap_or(0)
    }

    /// Weights and classes, as the endpoint helpers take them.
    #[inline]
    pub(crate) fn edges(&self) -> (&[u32], &[u8]) {
        (&self.weights, &self.classes)
    }
}

/// Which end of a trip.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum End {
    From,
    To,
}

impl End {
    pub fn name(self) -> &'static str {
        match self {
            End::From => "from",
            End::To => "to",
        }
    }
}

/// Why the graph gave no answer.
#[derive(Debug, Clone, Copy, PartialEq, thiserror::Error)]
pub enum EtaError {
    #[error("{} is {distance_m:.0} m from the nearest road (limit {limit_m:.0} m)", which.name())]
    OffNetwork {
        which: End,
        distance_m: f64,
        limit_m: f64,
    },
    #[error("no road path joins the two points")]
    Unreachable,
}

/// A graph answer.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Eta {
    pub time_s: f64,
    pub meters: f64,
    pub from: Snap,
    pub to: Snap,
    /// Milliseconds per edge class, adding up to the time (rounded to ms);
    /// `None` on a metric without classes.
    pub classes: Option<ClassTimes>,
}

/// How a path starts: the snapped edge and the first/last road edges used.
#[derive(Debug, Clone, PartialEq)]
pub struct Route {
    pub eta: Eta,
    /// The path's polyline from the snapped origin to the snapped destination.
    pub geometry: Vec<LatLon>,
}

impl Region {
    pub fn from_artifact(a: Artifact) -> Self {
        let snap = SnapIndex::new(&a.graph);
        Region {
            meta: a.meta,
            graph: a.graph,
            cch: a.cch,
            snap,
            calibration: a.calibration,
        }
    }

    /// Customizes the hierarchy for per-edge weights (milliseconds).
    pub fn metric(&self, weights: Vec<u32>) -> Metric {
        let customized = CustomizedMetric::new(&self.cch, &weights, &self.graph.edge_len_m);
        Metric {
            weights,
            classes: Vec::new(),
            customized,
        }
    }

    /// [`metric`](Self::metric) with a class per road edge (`< CLASSES`),
    /// so answers report their time per class.
    pub fn metric_with_classes(&self, weights: Vec<u32>, classes: Vec<u8>) -> Metric {
        let mut m = self.metric(weights);
        m.customized.set_classes(&self.cch, &m.weights, &classes);
        m.classes = classes;
        m
    }

    /// The free-flow metric.
    pub fn free_flow(&self) -> Metric {
        self.metric(crate::metric::free_flow(&self.graph))
    }

    /// Snaps a coordinate, enforcing the maximum snap distance.
    pub fn snap_within(&self, p: LatLon, which: End, max_snap_m: f64) -> Result<Snap, EtaError> {
        match self.snap.snap(p) {
            Some(s) if s.distance_m <= max_snap_m => Ok(s),
            Some(s) => Err(EtaError::OffNetwork {
                which,
                distance_m: s.distance_m,
                limit_m: max_snap_m,
            }),
            None => Err(EtaError::OffNetwork {
                which,
                distance_m: f64::INFINITY,
                limit_m: max_snap_m,
            }),
        }
    }

    /// Travel time and distance between two coordinates.
    pub fn eta(
        &self,
        metric: &Metric,
        q: &mut CchQuery,
        from: LatLon,
        to: LatLon,
        max_snap_m: f64,
    ) -> Result<Eta, EtaError> {
        let a = self.snap_within(from, End::From, max_snap_m)?;
        let b = self.snap_within(to, End::To, max_snap_m)?;
        self.eta_snapped(metric, q, a, b).map(|(eta, _)| eta)
    }

    /// The trip between two snapped points, and how it was found.
    fn eta_snapped(
        &self,
        metric: &Metric,
        q: &mut CchQuery,
        a: Snap,
        b: Snap,
    ) -> Result<(Eta, Via), EtaError> {
        let (src, ns) = snap_endpoints(&self.graph, metric.edges(), a, true);
        let (dst, nt) = snap_endpoints(&self.graph, metric.edges(), b, false);
        let graph_best = q.run(&self.cch, &metric.customized, &src[..ns], &dst[..nt]);
        let direct = direct_stretch(&self.graph, &metric.weights, a, b);
        let with_classes = !metric.classes.is_empty();
        let eta = |time_ms: f64, cm: f64, classes: ClassTimes| Eta {
            time_s: time_ms / 1000.0,
            meters: cm / 100.0,
            from: a,
            to: b,
            classes: with_classes.then_some(classes),
        };
        match choose(graph_best.map(|r| (r, f64::from(r.time))), direct) {
            Some(Choice::Graph(r)) => Ok((
                eta(f64::from(r.time), r.len_cm as f64, r.classes),
                Via::Graph {
                    source: r.source,
                    target: r.target,
                },
            )),
            Some(Choice::Direct(d)) => Ok((
                eta(d.time_ms, d.len_m * 100.0, d.classes(metric)),
                Via::Direct(d),
            )),
            None => Err(EtaError::Unreachable),
        }
    }

    /// ETA plus the path's geometry.
    pub fn route(
        &self,
        metric: &Metric,
        q: &mut CchQuery,
        from: LatLon,
        to: LatLon,
        max_snap_m: f64,
    ) -> Result<Route, EtaError> {
        let a = self.snap_within(from, End::From, max_snap_m)?;
        let b = self.snap_within(to, End::To, max_snap_m)?;
        let (eta, via) = self.eta_snapped(metric, q, a, b)?;
        let g = &self.graph;
        let mut geometry = Vec::new();
        match via {
            Via::Direct(d) => push_sub_polyline(g, d.edge, d.from_frac, d.to_frac, &mut geometry),
            Via::Graph { source, target } => {
                let (e0, from0, to0) = self.leg(a, source, true);
                push_sub_polyline(g, e0, from0, to0, &mut geometry);
                let mut edges = Vec::new();
                q.unpack_edges(&self.cch, &metric.customized, &mut edges);
                for &e in &edges {
                    g.edge_polyline_into(e, &mut geometry);
                }
                let (e1, from1, to1) = self.leg(b, target, false);
                push_sub_polyline(g, e1, from1, to1, &mut geometry);
            }
        }
        geometry.dedup();
        if geometry.len() == 1 {
            geometry.push(geometry[0]);
        }
        Ok(Route { eta, geometry })
    }

    /// The stretch of road between a snapped point and the search endpoint
    /// `side` of it (see `endpoints::snap_endpoints`): the edge and the
    /// shares of it (from its tail) where the stretch starts and ends.
    /// Endpoint 0 runs along the snapped edge, endpoint 1 along its twin or,
    /// on a one-way road, is the node the point lies at (an empty stretch).
    fn leg(&self, s: Snap, side: usize, origin: bool) -> (u32, f64, f64) {
        let tw = self.graph.edge_twin[s.edge as usize];
        let (e, t) = match (side, tw) {
            (1, NONE) => return (s.edge, s.fraction, s.fraction),
            (1, tw) => (tw, 1.0 - s.fraction),
            _ => (s.edge, s.fraction),
        };
        if origin {
            (e, t, 1.0)
        } else {
            (e, 0.0, t)
        }
    }
}

/// How an answer was found.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Via {
    /// Along the hierarchy, leaving/entering through these endpoints.
    Graph { source: usize, target: usize },
    /// Along a single road between the two snapped points.
    Direct(Direct),
}

/// Appends the part of edge `e`'s polyline between the shares `from..to`
/// of its (haversine) length, measured from its tail.
fn push_sub_polyline(g: &RoadGraph, e: u32, from: f64, to: f64, out: &mut Vec<LatLon>) {
    use crate::geo::{haversine_m, lerp};
    let poly = g.edge_polyline(e);
    let total: f64 = poly.windows(2).map(|w| haversine_m(w[0], w[1])).sum();
    let from_m = from.clamp(0.0, 1.0) * total;
    let to_m = to.clamp(0.0, 1.0) * total;
    let to_m = to_m.max(from_m);
    let mut acc = 0.0;
    let mut started = false;
    for w in poly.windows(2) {
        let l = haversine_m(w[0], w[1]);
        let (s0, s1) = (acc, acc + l);
        if !started && from_m <= s1 {
            let t = if l > 0.0 { (from_m - s0) / l } else { 0.0 };
            out.push(lerp(w[0], w[1], t.clamp(0.0, 1.0)));
            started = true;
        }
        if started {
            if to_m <= s1 {
                let t = if l > 0.0 { (to_m - s0) / l } else { 0.0 };
                out.push(lerp(w[0], w[1], t.clamp(0.0, 1.0)));
                return;
            }
            out.push(w[1]);
        }
        acc = s1;
    }
    if !started {
        if let Some(&last) = poly.last() {
            out.push(last);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testing::{city, reference_dists, Rng};

    fn region() -> Region {
        Region::from_artifact(city(3_000, 21))
    }

    /// Ways out of (origin) or into (destination) the road of a snapped
    /// point: (node, partial cost in ms), the share of the edge's time
    /// proportional to the distance along it, per direction of travel.
    fn ways(g: &RoadGraph, w: &[u32], s: Snap, origin: bool) -> Vec<(u32, u64)> {
        let e = s.edge as usize;
        let t = s.offset_m / g.edge_len_m[e];
        let part = |w: u32, frac: f64| (f64::from(w) * frac).round() as u64;
        let mut v = vec![if origin {
            (g.edge_head[e], part(w[e], 1.0 - t))
        } else {
            (g.edge_tail[e], part(w[e], t))
        }];
        let tw = g.edge_twin[e];
        if tw != NONE {
            let tw = tw as usize;
            v.push(if origin {
                (g.edge_head[tw], part(w[tw], t))
            } else {
                (g.edge_tail[tw], part(w[tw], 1.0 - t))
            });
        }
        v
    }

    /// The best trip through the graph between two snapped points by
    /// petgraph's Dijkstra (the reference): partial cost out of the origin's
    /// road + Dijkstra distance + partial cost into the destination's road.
    fn graph_reference(g: &RoadGraph, w: &[u32], a: Snap, b: Snap) -> Option<u64> {
        let ins = ways(g, w, b, false);
        ways(g, w, a, true)
            .into_iter()
            .flat_map(|(s, cs)| {
                let d = reference_dists(g, w, s);
                ins.iter()
                    .filter_map(move |&(t, ct)| d[t as usize].map(|x| cs + x + ct))
                    .collect::<Vec<_>>()
            })
            .min()
    }

    /// `Region::eta` between coordinates exactly at two intersections
    /// equals petgraph's Dijkstra (the reference) between the two nodes,
    /// exactly, and `Region::route` reports the same ETA. Intersections
    /// whose roads are all two-way: a point at a node is snapped onto one
    /// of its roads, and on a one-way road it can only leave forwards.
    #[test]
    fn eta_at_nodes_equals_dijkstra() {
        let r = region();
        let g = &r.graph;
        let metric = r.free_flow();
        let mut two_way = vec![true; g.num_nodes()];
        for e in 0..g.num_edges() {
            if g.edge_twin[e] == NONE {
                two_way[g.edge_tail[e] as usize] = false;
                two_way[g.edge_head[e] as usize] = false;
            }
        }
        let nodes: Vec<u32> = (0..g.num_nodes() as u32)
            .filter(|&v| two_way[v as usize])
            .collect();
        assert!(nodes.len() > 100, "the city has two-way intersections");
        let mut q = CchQuery::new(&r.cch);
        let mut rng = Rng::new(8);
        let mut compared = 0;
        for _ in 0..10 {
            let s = nodes[rng.below(nodes.len()) as usize];
            let reference = reference_dists(g, &metric.weights, s);
            for _ in 0..20 {
                let t = nodes[rng.below(nodes.len()) as usize];
                let (a, b) = (g.node_pos(s), g.node_pos(t));
                if s == t || a == b {
                    continue;
                }
                let eta = r
                    .eta(&metric, &mut q, a, b, DEFAULT_MAX_SNAP_M)
                    .expect("strongly connected");
                let d = reference[t as usize].expect("strongly connected");
                assert_eq!(eta.time_s, d as f64 / 1000.0, "{s} -> {t}");
                let route = r
                    .route(&metric, &mut q, a, b, DEFAULT_MAX_SNAP_M)
                    .expect("route");
                assert_eq!(route.eta, eta);
                compared += 1;
            }
        }
        assert!(compared >= 150, "{compared} pairs compared");
    }

    /// Two points on one straight road, at 30 % and 70 % of its length:
    /// along the road's direction the answer is the along-road time (the
    /// share of the edge's time, the snapped offsets measured against the
    /// haversine length) unless the graph reference (petgraph's Dijkstra) is
    /// strictly faster; against a one-way road's direction there is no
    /// along-road trip and the answer is the graph reference.
    #[test]
    fn direct_stretch_rule() {
        let r = region();
        let g = &r.graph;
        let metric = r.free_flow();
        let w = &metric.weights;
        let mut q = CchQuery::new(&r.cch);
        let (mut along, mut one_way) = (0, 0);
        for e in (0..g.num_edges() as u32).step_by(7) {
            let ei = e as usize;
            let len = g.edge_len_m[ei];
            if !g.edge_interior(e).is_empty() || len < 40.0 {
                continue;
            }
            let twin = g.edge_twin[ei];
            let (tail, head) = (g.node_pos(g.edge_tail[ei]), g.node_pos(g.edge_head[ei]));
            let (p30, p70) = (
                crate::geo::lerp(tail, head, 0.3),
                crate::geo::lerp(tail, head, 0.7),
            );
            // Forward along e (or, if two-way, backward along its twin).
            for (from, to, forward) in [(p30, p70, true), (p70, p30, false)] {
                let Ok(eta) = r.eta(&metric, &mut q, from, to, DEFAULT_MAX_SNAP_M) else {
                    continue;
                };
                let (a, b) = (eta.from, eta.to);
                // Only points that landed on this road (another road may
                // cross it exactly there).
                let on_e = |s: Snap| s.edge == e || (twin != NONE && s.edge == twin);
                if !on_e(a) || !on_e(b) || a.edge != b.edge {
                    continue;
                }
                // Offsets in e's frame.
                let off = |s: Snap| {
                    if s.edge == e {
                        s.offset_m
                    } else {
                        len - s.offset_m
                    }
                };
                let (oa, ob) = (off(a), off(b));
                assert!((oa - (if forward { 0.3 } else { 0.7 }) * len).abs() < 0.01 * len);
                assert!((ob - (if forward { 0.7 } else { 0.3 }) * len).abs() < 0.01 * len);
                let direct = if oa <= ob {
                    Some((f64::from(w[ei]) * (ob - oa) / len).round())
                } else if twin != NONE {
                    Some((f64::from(w[twin as usize]) * (oa - ob) / len).round())
                } else {
                    None
                };
                let via_graph = graph_reference(g, w, a, b).map(|x| x as f64);
                let expect = match (direct, via_graph) {
                    (Some(d), Some(gr)) if gr < d => gr,
                    (Some(d), _) => {
                        along += 1;
                        d
                    }
                    (None, Some(gr)) => {
                        one_way += 1;
                        gr
                    }
                    (None, None) => panic!("strongly connected"),
                };
                assert_eq!(eta.time_s, expect / 1000.0, "edge {e}, forward {forward}");
            }
            if along > 40 && one_way > 5 {
                break;
            }
        }
        assert!(along > 40, "{along} along-road answers checked");
        assert!(one_way > 5, "{one_way} one-way reverse trips checked");
    }
}
