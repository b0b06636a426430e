//! How a snapped point enters the search, and the one-road shortcut.
//!
//! A snapped point lies part-way along a road edge. [`snap_endpoints`] turns
//! it into search endpoints with the partial cost of the stretch to each end
//! of the road; [`direct_stretch`] is the trip that never leaves the shared
//! road when both points lie on it; [`choose`] is the single rule that picks
//! between the two. The ETA, the route and every matrix cell go through
//! these three, so they give the same answer for the same pair.

use crate::cch::query::Endpoint;
use crate::graph::{RoadGraph, NONE};
use crate::snap::Snap;

/// Search starts (origin) or ends (destination) for a snapped point:
/// endpoint 0 runs along the snapped edge, endpoint 1 along its twin. On a
/// one-way road a point exactly at the node it leaves (origin) or enters
/// (destination) gets that node itself, at no cost, as endpoint 1 (with a
/// twin, the twin's endpoint is already that node at no cost), so a point
/// at an intersection starts or ends there whichever road it snapped to.
/// Partial costs are the snap's share of the edge's time and of its stored
/// length, in the class of its edge (`classes[e]`, 0 when `classes` is
/// empty). Shared with the matrix so its cells equal ETAs.
pub(crate) fn snap_endpoints(
    g: &RoadGraph,
    (weights, classes): (&[u32], &[u8]),
    s: Snap,
    origin: bool,
) -> ([Endpoint; 2], usize) {
    let e = s.edge as usize;
    let len = g.edge_len_m[e];
    let t = s.fraction;
    let mut out = [Endpoint::at(0); 2];
    let part = |w: u32, frac: f64| {
        (
            (f64::from(w) * frac).round() as u32,
            (len * frac * 100.0).round() as u32,
        )
    };
    // Along the edge itself: origin leaves through its head, destination
    // is entered from its tail.
    let (node, frac) = if origin {
        (g.edge_head[e], 1.0 - t)
    } else {
        (g.edge_tail[e], t)
    };
    let class_of = |e: usize| classes.get(e).copied().unwrap_or(0);
    let (time, len_cm) = part(weights[e], frac);
    out[0] = Endpoint {
        node,
        time,
        len_cm,
        class: class_of(e),
    };
    let twin = g.edge_twin[e];
    if twin == NONE {
        // At the node the search would otherwise have to leave or enter
        // through this road: that node itself.
        if origin && t == 0.0 {
            return (with_node(out, g.edge_tail[e]), 2);
        }
        if !origin && t == 1.0 {
            return (with_node(out, g.edge_head[e]), 2);
        }
        return (out, 1);
    }
    // Along the twin (reverse direction): its share before the point is 1−t.
    let tw = twin as usize;
    let (node, frac) = if origin {
        (g.edge_head[tw], t)
    } else {
        (g.edge_tail[tw], 1.0 - t)
    };
    let (time, len_cm) = part(weights[tw], frac);
    out[1] = Endpoint {
        node,
        time,
        len_cm,
        class: class_of(tw),
    };
    (out, 2)
}

/// `out` with endpoint 1 the node `v` itself, at no cost.
#[inline]
fn with_node(mut out: [Endpoint; 2], v: u32) -> [Endpoint; 2] {
    out[1] = Endpoint::at(v);
    out
}

/// A trip that stays on one road between the two snapped points: the share
/// of the edge's time and stored length between their fractions.
pub(crate) fn direct_stretch(g: &RoadGraph, weights: &[u32], a: Snap, b: Snap) -> Option<Direct> {
    if a.edge != b.edge {
        return None;
    }
    let e = a.edge as usize;
    let len = g.edge_len_m[e];
    if a.fraction <= b.fraction {
        let d = b.fraction - a.fraction;
        return Some(Direct {
            edge: a.edge,
            from_frac: a.fraction,
            to_frac: b.fraction,
            time_ms: (f64::from(weights[e]) * d).round(),
            len_m: len * d,
        });
    }
    let tw = g.edge_twin[e];
    if tw == NONE {
        return None;
    }
    let d = a.fraction - b.fraction;
    Some(Direct {
        edge: tw,
        from_frac: 1.0 - a.fraction,
        to_frac: 1.0 - b.fraction,
        time_ms: (f64::from(weights[tw as usize]) * d).round(),
        len_m: len * d,
    })
}

/// A trip along a single road between two snapped points.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Direct {
    pub(crate) edge: u32,
    /// Where the trip starts on `edge`, as a share of it from its tail.
    pub(crate) from_frac: f64,
    /// Where it ends, likewise.
    pub(crate) to_frac: f64,
    pub(crate) time_ms: f64,
    pub(crate) len_m: f64,
}

impl Direct {
    /// The trip's time in the class of its edge.
    #[inline]
    pub(crate) fn classes(&self, metric: &super::Metric) -> crate::cch::classes::ClassTimes {
        crate::cch::classes::single(metric.class_of(self.edge), self.time_ms as u32)
    }
}

/// Which of the two candidate answers a trip uses.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Choice<G> {
    /// The graph answer (whatever the caller carries with it).
    Graph(G),
    /// Staying on the shared road.
    Direct(Direct),
}

/// The rule for a pair of snapped points, given the graph answer with its
/// time in milliseconds and the direct stretch: the graph answer only when
/// there is no direct stretch or the direct stretch is strictly slower;
/// otherwise the direct stretch. `None` when neither exists.
#[inline]
pub(crate) fn choose<G>(graph: Option<(G, f64)>, direct: Option<Direct>) -> Option<Choice<G>> {
    match (graph, direct) {
        (Some((g, ms)), Some(d)) if d.time_ms > ms => Some(Choice::Graph(g)),
        (Some((g, _)), None) => Some(Choice::Graph(g)),
        (_, Some(d)) => Some(Choice::Direct(d)),
        (None, None) => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn direct(time_ms: f64) -> Direct {
        Direct {
            edge: 0,
            from_frac: 0.0,
            to_frac: 1.0,
            time_ms,
            len_m: 1.0,
        }
    }

    /// The rule as `Region::eta` documents it: the graph answer only when
    /// strictly faster than staying on the shared road (a tie stays on the
    /// road), the graph when there is no shared road, nothing when neither.
    #[test]
    fn choose_prefers_the_road_unless_the_graph_is_strictly_faster() {
        assert_eq!(
            choose(Some(("g", 999.0)), Some(direct(1000.0))),
            Some(Choice::Graph("g"))
        );
        assert_eq!(
            choose(Some(("g", 1000.0)), Some(direct(1000.0))),
            Some(Choice::Direct(direct(1000.0)))
        );
        assert_eq!(
            choose(Some(("g", 1001.0)), Some(direct(1000.0))),
            Some(Choice::Direct(direct(1000.0)))
        );
        assert_eq!(choose(Some(("g", 5.0)), None), Some(Choice::Graph("g")));
        assert_eq!(
            choose(None::<(&str, f64)>, Some(direct(7.0))),
            Some(Choice::Direct(direct(7.0)))
        );
        assert_eq!(choose(None::<(&str, f64)>, None), None);
    }
}
