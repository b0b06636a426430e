//! A loaded region: graph, hierarchy, snapping index and calibration, and
//! the ETA/route answers computed on them for a given metric.
//!
//! This is the query engine's front door. It snaps both coordinates, starts
//! and ends the search mid-edge with the partial costs, and reports time,
//! distance and snap distances. It does no I/O and knows nothing about HTTP.
//!
//! # Layout
//!
//! - this file: [`Region`], [`Metric`], the ETA and route of one pair of
//!   coordinates, and why there may be none ([`EtaError`]).
//! - `endpoints`: a snapped point as search endpoints with partial costs,
//!   the trip along one shared road, and the rule choosing between that and
//!   the graph answer.
//! - [`matrix`]: coordinate matrices (every point snapped once, one bucket
//!   many-to-many over [`crate::engine::cch::matrix`]), each cell equal to
//!   [`Region::eta`] for the same pair.

pub(crate) mod endpoints;
pub mod matrix;

use crate::engine::artifact::{Artifact, Metadata};
use crate::engine::calibration::Calibration;
use crate::engine::cch::{Cch, CchQuery, CustomizedMetric};
use crate::engine::geo::LatLon;
use crate::engine::graph::{RoadGraph, NONE};
use crate::engine::snap::{Snap, SnapIndex};
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
    pub customized: CustomizedMetric,
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
            customized,
        }
    }

    /// The free-flow metric.
    pub fn free_flow(&self) -> Metric {
        self.metric(crate::engine::metric::free_flow(&self.graph))
    }

    /// Snaps a coordinate, enforcing the maximum snap distance.
    pub fn snap_within(&self, p: LatLon, which: End, max_snap_m: f64) -> Result<Snap, EtaError> {
        match self.snap.snap(&self.graph, p) {
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
        let (src, ns) = snap_endpoints(&self.graph, &metric.weights, a, true);
        let (dst, nt) = snap_endpoints(&self.graph, &metric.weights, b, false);
        let graph_best = q.run(&self.cch, &metric.customized, &src[..ns], &dst[..nt]);
        let direct = direct_stretch(&self.graph, &metric.weights, a, b);
        let eta = |time_ms: f64, cm: f64| Eta {
            time_s: time_ms / 1000.0,
            meters: cm / 100.0,
            from: a,
            to: b,
        };
        match choose(graph_best.map(|r| (r, f64::from(r.time))), direct) {
            Some(Choice::Graph(r)) => Ok((
                eta(f64::from(r.time), r.len_cm as f64),
                Via::Graph {
                    source: r.source,
                    target: r.target,
                },
            )),
            Some(Choice::Direct(d)) => Ok((eta(d.time_ms, d.len_m * 100.0), Via::Direct(d))),
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
            Via::Direct(d) => push_sub_polyline(g, d.edge, d.from_m, d.to_m, &mut geometry),
            Via::Graph { source, target } => {
                // Endpoint 0 runs along the snapped edge, endpoint 1 along
                // its twin (see `endpoints`).
                let (e0, t0) = self.side(a, source);
                push_sub_polyline(g, e0, t0, g.edge_len_m[e0 as usize], &mut geometry);
                let mut edges = Vec::new();
                q.unpack_edges(&self.cch, &metric.customized, &mut edges);
                for &e in &edges {
                    g.edge_polyline_into(e, &mut geometry);
                }
                let (e1, t1) = self.side(b, target);
                push_sub_polyline(g, e1, 0.0, t1, &mut geometry);
            }
        }
        geometry.dedup();
        if geometry.len() == 1 {
            geometry.push(geometry[0]);
        }
        Ok(Route { eta, geometry })
    }

    /// The edge and offset (from its tail) of a snapped point seen from
    /// endpoint `side` (0: the snapped edge, 1: its twin).
    fn side(&self, s: Snap, side: usize) -> (u32, f64) {
        let g = &self.graph;
        let tw = g.edge_twin[s.edge as usize];
        if side == 1 && tw != NONE {
            (tw, g.edge_len_m[s.edge as usize] - s.offset_m)
        } else {
            (s.edge, s.offset_m)
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

/// Appends the part of edge `e`'s polyline between offsets `from_m..to_m`.
fn push_sub_polyline(g: &RoadGraph, e: u32, from_m: f64, to_m: f64, out: &mut Vec<LatLon>) {
    let poly = g.edge_polyline(e);
    let mut acc = 0.0;
    let (from_m, to_m) = (from_m.max(0.0), to_m.max(from_m));
    let mut started = false;
    for w in poly.windows(2) {
        let l = crate::engine::geo::haversine_m(w[0], w[1]);
        let (s0, s1) = (acc, acc + l);
        if !started && from_m <= s1 {
            let t = if l > 0.0 { (from_m - s0) / l } else { 0.0 };
            out.push(crate::engine::geo::lerp(w[0], w[1], t.clamp(0.0, 1.0)));
            started = true;
        }
        if started {
            if to_m <= s1 {
                let t = if l > 0.0 { (to_m - s0) / l } else { 0.0 };
                out.push(crate::engine::geo::lerp(w[0], w[1], t.clamp(0.0, 1.0)));
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
