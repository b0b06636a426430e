//! Coordinate matrices: every origin and destination snapped once (within
//! the snap limit), one bucket many-to-many ([`ManyToMany`]) over the
//! snapped points, then per cell the same choice as [`Region::eta`] between
//! the graph answer and a trip along one shared road. A point off the
//! network makes its row or column [`Cell::Unavailable`], not the whole
//! matrix. On a metric with classes every answered cell also gets its
//! milliseconds per edge class ([`PointMatrix::classes`]).

use super::endpoints::{choose, direct_stretch, snap_endpoints, Choice};
use super::{End, EtaError, Metric, Region};
use crate::cch::classes::{ClassTimes, CLASSES};
use crate::cch::customize::INFINITY;
use crate::cch::matrix::{ManyToMany, MatrixError, NodeCells, Points};
use crate::cch::query::Endpoint;
use crate::geo::LatLon;
use crate::graph::NONE;
use crate::snap::Snap;
use std::time::Instant;

/// One cell of a coordinate matrix.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Cell {
    /// The graph answer, as [`Region::eta`] gives it for the same pair.
    Eta { time_s: f64, meters: f64 },
    /// Both points are on the network but no road path joins them.
    Unreachable,
    /// The origin or the destination is off the network (see
    /// [`PointMatrix::from`] / [`PointMatrix::to`]).
    Unavailable,
    /// The deadline passed before this row was computed.
    NotComputed,
}

/// A coordinate matrix and the buffers that produce it (reused between
/// calls; create once per thread with [`Default`]).
#[derive(Debug, Clone, Default)]
pub struct PointMatrix {
    /// Row-major `from.len() × to.len()` cells.
    pub cells: Vec<Cell>,
    /// Each origin's snap, or why it is off the network.
    pub from: Vec<Result<Snap, EtaError>>,
    /// Each destination's snap, or why it is off the network.
    pub to: Vec<Result<Snap, EtaError>>,
    /// Rows fully answered (a prefix); later rows hold
    /// [`Cell::NotComputed`] except cells that are [`Cell::Unavailable`].
    pub rows_done: usize,
    /// Statistics of the node-level run.
    pub bucket_cells: usize,
    /// Per cell (row-major, like `cells`), milliseconds per edge class of
    /// a [`Cell::Eta`] (adding up to its time, rounded to ms; all zero for
    /// other cells). Empty on a metric without classes.
    pub classes: Vec<ClassTimes>,
    /// The snapped origins, as the node-level run sees them.
    src: Snapped,
    /// The snapped destinations.
    dst: Snapped,
    /// Node-level results over the snapped points.
    node_time: Vec<u32>,
    node_len: Vec<u64>,
    node_cls: Vec<ClassTimes>,
}

/// One side's points on the network, in compact order (off-network points
/// left out, so the node-level run only sees real endpoints).
#[derive(Debug, Clone, Default)]
struct Snapped {
    /// Compact index of each point (NONE when off the network).
    compact: Vec<u32>,
    /// Endpoints of the snapped points, in compact order.
    eps: Vec<([Endpoint; 2], usize)>,
}

impl Snapped {
    /// Snaps `pts` (within `max_snap_m`) into `snaps` and the compact
    /// endpoint list.
    fn snap(
        &mut self,
        region: &Region,
        metric: &Metric,
        pts: &[LatLon],
        which: End,
        max_snap_m: f64,
        snaps: &mut Vec<Result<Snap, EtaError>>,
    ) {
        snaps.clear();
        self.compact.clear();
        self.eps.clear();
        for &p in pts {
            let s = region.snap_within(p, which, max_snap_m);
            match s {
                Ok(s) => {
                    self.compact.push(self.eps.len() as u32);
                    self.eps.push(snap_endpoints(
                        &region.graph,
                        metric.edges(),
                        s,
                        which == End::From,
                    ));
                }
                Err(_) => self.compact.push(NONE),
            }
            snaps.push(s);
        }
    }

    /// The node-level points of this side.
    #[inline]
    fn points<'a>(&'a self) -> Points<impl Fn(usize) -> &'a [Endpoint] + 'a> {
        Points::new(self.eps.len(), |i: usize| &self.eps[i].0[..self.eps[i].1])
    }
}

/// The bounds a coordinate matrix works within.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MatrixLimits {
    /// Farthest a point may be from a road and still be snapped, metres.
    pub max_snap_m: f64,
    /// Rows not started by then are left [`Cell::NotComputed`].
    pub deadline: Option<Instant>,
}

/// Travel-time matrix between coordinates: each point snapped once (within
/// `max_snap_m`), then one bucket many-to-many over the snapped points. A
/// point off the network makes its row or column [`Cell::Unavailable`], not
/// the whole matrix. Cells equal [`Region::eta`] for the same pair,
/// including trips that stay on one road.
pub fn matrix(
    region: &Region,
    metric: &Metric,
    m2m: &mut ManyToMany,
    from: &[LatLon],
    to: &[LatLon],
    limits: MatrixLimits,
    out: &mut PointMatrix,
) -> Result<(), MatrixError> {
    let MatrixLimits {
        max_snap_m,
        deadline,
    } = limits;
    let cell_count = from
        .len()
        .checked_mul(to.len())
        .ok_or(MatrixError::TooLarge {
            sources: from.len(),
            targets: to.len(),
        })?;
    out.src
        .snap(region, metric, from, End::From, max_snap_m, &mut out.from);
    out.dst
        .snap(region, metric, to, End::To, max_snap_m, &mut out.to);
    let outcome = m2m.run_points(
        &region.cch,
        &metric.customized,
        out.src.points(),
        out.dst.points(),
        deadline,
        NodeCells {
            time: &mut out.node_time,
            len_cm: &mut out.node_len,
            classes: (!metric.classes.is_empty()).then_some(&mut out.node_cls),
        },
    )?;
    out.bucket_cells = outcome.bucket_cells;
    out.assemble(region, metric, outcome.rows_done, cell_count);
    Ok(())
}

impl PointMatrix {
    /// Fills `cells` from the node-level results (`node_rows` of them
    /// computed) and the snaps, choosing per cell as [`Region::eta`] does.
    fn assemble(&mut self, region: &Region, metric: &Metric, node_rows: usize, cell_count: usize) {
        let g = &region.graph;
        // The first origin row that was not computed bounds the done prefix.
        self.rows_done = self
            .src
            .compact
            .iter()
            .position(|&c| c != NONE && c as usize >= node_rows)
            .unwrap_or(self.from.len());
        let nt = self.dst.eps.len();
        let with_classes = !metric.classes.is_empty();
        self.cells.clear();
        self.cells.reserve(cell_count);
        self.classes.clear();
        if with_classes {
            self.classes.reserve(cell_count);
        }
        for (i, a) in self.from.iter().enumerate() {
            for (j, b) in self.to.iter().enumerate() {
                let mut classes = [0; CLASSES];
                let (Ok(a), Ok(b)) = (a, b) else {
                    self.cells.push(Cell::Unavailable);
                    if with_classes {
                        self.classes.push(classes);
                    }
                    continue;
                };
                let (ci, cj) = (self.src.compact[i] as usize, self.dst.compact[j] as usize);
                if ci >= node_rows {
                    self.cells.push(Cell::NotComputed);
                    if with_classes {
                        self.classes.push(classes);
                    }
                    continue;
                }
                let t = self.node_time[ci * nt + cj];
                let graph = (t < INFINITY).then(|| {
                    let ms = f64::from(t);
                    ((ms, self.node_len[ci * nt + cj] as f64), ms)
                });
                let direct = direct_stretch(g, &metric.weights, *a, *b);
                self.cells.push(match choose(graph, direct) {
                    Some(Choice::Graph((ms, cm))) => {
                        if with_classes {
                            classes = self.node_cls[ci * nt + cj];
                        }
                        eta_cell(ms, cm)
                    }
                    Some(Choice::Direct(d)) => {
                        classes = d.classes(metric);
                        eta_cell(d.time_ms, d.len_m * 100.0)
                    }
                    None => Cell::Unreachable,
                });
                if with_classes {
                    self.classes.push(classes);
                }
            }
        }
    }
}

/// A cell from a time in milliseconds and a length in centimetres.
#[inline]
fn eta_cell(ms: f64, cm: f64) -> Cell {
    Cell::Eta {
        time_s: ms / 1000.0,
        meters: cm / 100.0,
    }
}
