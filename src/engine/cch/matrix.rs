//! Travel-time matrices by bucket many-to-many (Knopp, Sanders, Schultes,
//! Schulz & Wagner, "Computing Many-to-Many Shortest Paths Using Highway
//! Hierarchies", ALENEX 2007) on the customizable contraction hierarchy.
//!
//! The method: every target's backward upward search leaves, at each node it
//! settles, a bucket entry "target `j` is `d` away from here". Then every
//! source's forward upward search scans the buckets of the nodes it settles;
//! `forward + entry` over all common nodes is the exact distance, because a
//! shortest up-down path peaks at a node in both search spaces.
//!
//! On a CCH both upward search spaces are ancestor chains of the elimination
//! tree, so the searches are the priority-queue-free walks of
//! [`super::query`] over the same perfectly customized (pruned) search
//! graphs, but without stopping criterion (there is no single target to
//! bound by).
//! Buckets are dense: targets are sorted by the preorder position of their
//! node in the elimination tree, which makes the targets below any node (the
//! ones that can have an entry there) a contiguous run of slots. A bucket is
//! then a slice of times over a slot range, and the source-side scan is a
//! branch-free `min` over two arrays that the compiler vectorises. The top
//! separator's nodes, shared by every search, thus cost one SIMD pass over
//! the row instead of one scattered update per entry.
//!
//! Lengths ride along: every walk carries, per node, the length (cm) of the
//! path that set its time; each cell remembers its meeting node, and its
//! length is the forward length there plus the bucket's backward length.
//!
//! [`ManyToMany`] owns all scratch; after a warm-up call of the same size a
//! call allocates nothing. [`matrix`] is the coordinate front end: it snaps
//! every point once and gives per-cell answers equal to
//! [`Region::eta`](crate::engine::region::Region::eta) for the same pair.

use super::customize::{CustomizedMetric, PrunedArc, PrunedArcs, INFINITY};
use super::query::{Endpoint, MAX_ENDPOINTS};
use super::Cch;
use crate::engine::geo::LatLon;
use crate::engine::graph::NONE;
use crate::engine::region::{direct_stretch, snap_endpoints, End, EtaError, Metric, Region};
use crate::engine::snap::Snap;
use std::time::Instant;

/// Why a matrix could not be computed at all.
#[derive(Debug, Clone, Copy, PartialEq, Eq, thiserror::Error)]
pub enum MatrixError {
    #[error("endpoint node {node} does not exist (graph has {nodes} nodes)")]
    NodeOutOfRange { node: u32, nodes: usize },
    #[error("a matrix point has {count} endpoints (at most {max})")]
    TooManyEndpoints { count: usize, max: usize },
    #[error("matrix scratch sized for {scratch} nodes, hierarchy has {graph}")]
    ScratchMismatch { scratch: usize, graph: usize },
    #[error("metric has {metric} arcs, hierarchy has {graph}")]
    MetricMismatch { metric: usize, graph: usize },
    #[error("{sources} × {targets} matrix is too large")]
    TooLarge { sources: usize, targets: usize },
}

/// What [`ManyToMany::run`] managed before its deadline.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct MatrixOutcome {
    /// Sources whose rows are fully computed: always a prefix `0..rows_done`.
    /// Later rows hold [`INFINITY`] and are the caller's to fill.
    pub rows_done: usize,
    /// Dense bucket cells written by the backward walks (statistics: the
    /// scan work per source row is proportional to it).
    pub bucket_cells: usize,
}

/// A bucket: a run of target slots and where its times start.
#[derive(Debug, Clone, Copy)]
struct Bucket {
    /// First slot, or NONE when no target walk passes this node.
    first: u32,
    /// Number of slots (`last - first + 1`).
    count: u32,
    /// Index of slot `first` in `bucket_time` / `bucket_len`.
    offset: u32,
}

/// Target walks between deadline checks (a walk takes tens of µs on a
/// city graph, so the check costs nothing and overshoots little).
const DEADLINE_EVERY: usize = 16;

const EMPTY: Bucket = Bucket {
    first: NONE,
    count: 0,
    offset: 0,
};

/// Reusable many-to-many scratch for one hierarchy and one thread.
#[derive(Debug, Clone)]
pub struct ManyToMany {
    /// Per-node walk state.
    walker: Walker,
    /// Preorder position of each rank in the elimination tree: sorting
    /// targets by it makes every bucket a contiguous slot range.
    preorder: Vec<u32>,
    /// Per rank: its bucket (reset after each call for touched ranks only).
    bucket: Vec<Bucket>,
    /// Ranks whose bucket is in use by the current call.
    touched: Vec<u32>,
    /// Dense bucket times (INFINITY where a slot's walk never reached).
    bucket_time: Vec<u32>,
    /// Backward lengths (cm) alongside `bucket_time`.
    bucket_len: Vec<u32>,
    /// Target index of each slot (targets sorted by preorder).
    slot_target: Vec<u32>,
    /// Best time per slot for the current source row.
    row_time: Vec<u32>,
    /// Meeting rank realising `row_time`, to recover the length.
    row_meet: Vec<u32>,
}

/// The union of up to [`MAX_ENDPOINTS`] elimination-tree ancestor chains,
/// walked in increasing rank (as [`super::query`] does).
struct Chains {
    cur: [u32; MAX_ENDPOINTS],
}

impl Chains {
    #[inline]
    fn next(&mut self, parent: &[u32]) -> Option<u32> {
        let x = self.cur.iter().copied().min().unwrap_or(NONE);
        if x == NONE {
            return None;
        }
        let p = parent[x as usize];
        for c in self.cur.iter_mut() {
            if *c == x {
                *c = p;
            }
        }
        Some(x)
    }
}

impl ManyToMany {
    /// Scratch for `cch` (per-node arrays plus the tree's preorder). Used
    /// with another hierarchy of the same size it stays exact, only the
    /// buckets get sparser.
    pub fn new(cch: &Cch) -> Self {
        let n = cch.num_nodes();
        let parent = |x: usize| {
            let p = cch.parent[x];
            (p != NONE && (p as usize) < n && p as usize > x).then_some(p as usize)
        };
        // Subtree sizes bottom-up (a parent always has a higher rank), then
        // preorder positions top-down: each child gets the next free block of
        // its parent's range.
        let mut size = vec![1u32; n];
        for x in 0..n {
            if let Some(p) = parent(x) {
                size[p] += size[x];
            }
        }
        let mut preorder = vec![0u32; n];
        let mut next_free = vec![0u32; n];
        let mut root_free = 0u32;
        for x in (0..n).rev() {
            let pos = match parent(x) {
                Some(p) => {
                    let v = next_free[p];
                    next_free[p] += size[x];
                    v
                }
                None => {
                    let v = root_free;
                    root_free += size[x];
                    v
                }
            };
            preorder[x] = pos;
            next_free[x] = pos + 1;
        }
        Self {
            walker: Walker {
                dist: vec![INFINITY; n],
                pred: vec![NONE; n],
                len: vec![0; n],
            },
            preorder,
            bucket: vec![EMPTY; n],
            touched: Vec::new(),
            bucket_time: Vec::new(),
            bucket_len: Vec::new(),
            slot_target: Vec::new(),
            row_time: Vec::new(),
            row_meet: Vec::new(),
        }
    }

    /// Computes the `sources × targets` matrix, row-major, into `out_time`
    /// (metric units, [`INFINITY`] when unreachable or not computed) and
    /// `out_len_cm` (`u64::MAX` where the time is INFINITY). Each source or
    /// target is a list of at most [`MAX_ENDPOINTS`] endpoints (a snapped
    /// point leaves through both ends of its road), with partial costs.
    ///
    /// All target walks run first (a deadline passing during them abandons
    /// the matrix: no row can be computed without them); then source rows in
    /// order, checking `deadline` before each. Rows from the first one found
    /// past the deadline on are left INFINITY; [`MatrixOutcome::rows_done`]
    /// says how many were computed.
    #[allow(clippy::too_many_arguments)]
    pub fn run(
        &mut self,
        cch: &Cch,
        metric: &CustomizedMetric,
        sources: &[&[Endpoint]],
        targets: &[&[Endpoint]],
        deadline: Option<Instant>,
        out_time: &mut Vec<u32>,
        out_len_cm: &mut Vec<u64>,
    ) -> Result<MatrixOutcome, MatrixError> {
        self.run_with(
            cch,
            metric,
            sources.len(),
            |i| sources[i],
            targets.len(),
            |j| targets[j],
            deadline,
            out_time,
            out_len_cm,
        )
    }

    /// [`run`](Self::run) with node-to-node endpoints (road node ids).
    #[allow(clippy::too_many_arguments)]
    pub fn run_nodes(
        &mut self,
        cch: &Cch,
        metric: &CustomizedMetric,
        sources: &[u32],
        targets: &[u32],
        deadline: Option<Instant>,
        out_time: &mut Vec<u32>,
        out_len_cm: &mut Vec<u64>,
    ) -> Result<MatrixOutcome, MatrixError> {
        let src = |i: usize| [Endpoint::at(sources[i])];
        let dst = |j: usize| [Endpoint::at(targets[j])];
        self.run_inner(
            cch,
            metric,
            sources.len(),
            src,
            targets.len(),
            dst,
            deadline,
            out_time,
            out_len_cm,
        )
    }

    /// `run` over points given by index (so callers can keep endpoints in
    /// their own reusable storage).
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn run_with<'e>(
        &mut self,
        cch: &Cch,
        metric: &CustomizedMetric,
        num_sources: usize,
        source: impl Fn(usize) -> &'e [Endpoint],
        num_targets: usize,
        target: impl Fn(usize) -> &'e [Endpoint],
        deadline: Option<Instant>,
        out_time: &mut Vec<u32>,
        out_len_cm: &mut Vec<u64>,
    ) -> Result<MatrixOutcome, MatrixError> {
        self.run_inner(
            cch,
            metric,
            num_sources,
            source,
            num_targets,
            target,
            deadline,
            out_time,
            out_len_cm,
        )
    }

    #[allow(clippy::too_many_arguments)]
    fn run_inner<L: AsRef<[Endpoint]>>(
        &mut self,
        cch: &Cch,
        metric: &CustomizedMetric,
        num_sources: usize,
        source: impl Fn(usize) -> L,
        num_targets: usize,
        target: impl Fn(usize) -> L,
        deadline: Option<Instant>,
        out_time: &mut Vec<u32>,
        out_len_cm: &mut Vec<u64>,
    ) -> Result<MatrixOutcome, MatrixError> {
        let n = cch.num_nodes();
        if self.walker.dist.len() != n || cch.parent.len() != n {
            return Err(MatrixError::ScratchMismatch {
                scratch: self.walker.dist.len(),
                graph: n,
            });
        }
        let m = cch.num_arcs();
        let pruned_ok = |p: &PrunedArcs| {
            p.first.len() == n + 1 && p.first.last().is_some_and(|&l| l as usize == p.arcs.len())
        };
        for l in [
            metric.up_via.len(),
            metric.down_via.len(),
            metric.up_len.len(),
            metric.down_len.len(),
            if pruned_ok(&metric.forward) && pruned_ok(&metric.backward) {
                m
            } else {
                usize::MAX
            },
        ] {
            if l != m {
                return Err(MatrixError::MetricMismatch {
                    metric: l,
                    graph: m,
                });
            }
        }
        let too_large = MatrixError::TooLarge {
            sources: num_sources,
            targets: num_targets,
        };
        let cells = num_sources.checked_mul(num_targets).ok_or(too_large)?;
        if num_targets >= NONE as usize {
            return Err(too_large);
        }
        let check = |eps: &[Endpoint]| -> Result<(), MatrixError> {
            if eps.len() > MAX_ENDPOINTS {
                return Err(MatrixError::TooManyEndpoints {
                    count: eps.len(),
                    max: MAX_ENDPOINTS,
                });
            }
            match eps.iter().find(|e| e.node as usize >= n) {
                Some(e) => Err(MatrixError::NodeOutOfRange {
                    node: e.node,
                    nodes: n,
                }),
                None => Ok(()),
            }
        };
        for i in 0..num_sources {
            check(source(i).as_ref())?;
        }
        for j in 0..num_targets {
            check(target(j).as_ref())?;
        }
        out_time.clear();
        out_time.resize(cells, INFINITY);
        out_len_cm.clear();
        out_len_cm.resize(cells, u64::MAX);
        let past = |d: Option<Instant>| d.is_some_and(|d| Instant::now() >= d);
        if num_targets == 0 || num_sources == 0 {
            return Ok(MatrixOutcome {
                rows_done: num_sources,
                bucket_cells: 0,
            });
        }
        if past(deadline) {
            return Ok(MatrixOutcome {
                rows_done: 0,
                bucket_cells: 0,
            });
        }

        // Slots: targets sorted by the preorder of their first endpoint, so
        // the targets below a node occupy (nearly) one run of slots.
        let rank = &cch.rank;
        self.slot_target.clear();
        self.slot_target.extend(0..num_targets as u32);
        {
            let pre = &self.preorder;
            let key = |j: u32| {
                target(j as usize)
                    .as_ref()
                    .first()
                    .map_or(u32::MAX, |e| pre[rank[e.node as usize] as usize])
            };
            self.slot_target.sort_unstable_by_key(|&j| key(j));
        }

        // Pass 1: which slots pass each node (tree structure only).
        for (k, &j) in self.slot_target.iter().enumerate() {
            let mut walk = chains_of(target(j as usize).as_ref(), rank);
            while let Some(x) = walk.next(&cch.parent) {
                let b = &mut self.bucket[x as usize];
                if b.first == NONE {
                    b.first = k as u32;
                    self.touched.push(x);
                }
                b.count = k as u32 - b.first + 1;
            }
        }
        let mut total: usize = 0;
        for &x in &self.touched {
            let b = &mut self.bucket[x as usize];
            b.offset = total as u32;
            total += b.count as usize;
            if total > u32::MAX as usize {
                // Undo so the scratch stays clean for the next call.
                self.clear_buckets();
                return Err(too_large);
            }
        }
        self.bucket_time.clear();
        self.bucket_time.resize(total, INFINITY);
        self.bucket_len.clear();
        self.bucket_len.resize(total, 0);

        // Pass 2: backward walks (down arcs) fill the buckets. No row can be
        // computed without all of them, so a deadline passing here (checked
        // every few walks) abandons the whole matrix.
        for k in 0..num_targets {
            if k % DEADLINE_EVERY == DEADLINE_EVERY - 1 && past(deadline) {
                self.clear_buckets();
                return Ok(MatrixOutcome {
                    rows_done: 0,
                    bucket_cells: total,
                });
            }
            let j = self.slot_target[k];
            let eps = target(j as usize);
            let eps = eps.as_ref();
            let (bucket, bucket_time, bucket_len) =
                (&self.bucket, &mut self.bucket_time, &mut self.bucket_len);
            self.walker
                .walk(cch, &metric.backward, &metric.down_len, eps, |x, d, l| {
                    let b = bucket[x as usize];
                    let at = b.offset as usize + k - b.first as usize;
                    bucket_time[at] = d;
                    bucket_len[at] = l;
                });
        }

        // Source rows.
        self.row_time.clear();
        self.row_time.resize(num_targets, INFINITY);
        self.row_meet.clear();
        self.row_meet.resize(num_targets, NONE);
        let mut rows_done = num_sources;
        for i in 0..num_sources {
            if past(deadline) {
                rows_done = i;
                break;
            }
            let eps = source(i);
            let eps = eps.as_ref();
            let (bucket, bucket_time, row_time, row_meet) = (
                &self.bucket,
                &self.bucket_time,
                &mut self.row_time,
                &mut self.row_meet,
            );
            self.walker
                .walk(cch, &metric.forward, &metric.up_len, eps, |x, d, _| {
                    let b = bucket[x as usize];
                    if b.first != NONE {
                        let (lo, cnt, off) =
                            (b.first as usize, b.count as usize, b.offset as usize);
                        scan(
                            d,
                            x,
                            &bucket_time[off..off + cnt],
                            &mut row_time[lo..lo + cnt],
                            &mut row_meet[lo..lo + cnt],
                        );
                    }
                });
            // The row, back in target order, with lengths from the meeting
            // nodes; then clear it for the next source.
            let base = i * num_targets;
            for k in 0..num_targets {
                let t = self.row_time[k];
                if t >= INFINITY {
                    continue;
                }
                self.row_time[k] = INFINITY;
                let j = self.slot_target[k] as usize;
                let meet = self.row_meet[k] as usize;
                let b = self.bucket[meet];
                let back = self.bucket_len[b.offset as usize + k - b.first as usize];
                out_time[base + j] = t;
                out_len_cm[base + j] = u64::from(self.walker.len[meet]) + u64::from(back);
            }
        }

        self.clear_buckets();
        Ok(MatrixOutcome {
            rows_done,
            bucket_cells: total,
        })
    }

    /// Empties the buckets this call used (the per-node array is reused).
    fn clear_buckets(&mut self) {
        for &x in &self.touched {
            self.bucket[x as usize] = EMPTY;
        }
        self.touched.clear();
    }

    /// Bytes held by this scratch (per-node arrays plus reusable buffers).
    pub fn heap_bytes(&self) -> usize {
        4 * (self.walker.dist.capacity()
            + self.walker.pred.capacity()
            + self.walker.len.capacity()
            + self.preorder.capacity())
            + std::mem::size_of::<Bucket>() * self.bucket.capacity()
            + 4 * (self.touched.capacity()
                + self.bucket_time.capacity()
                + self.bucket_len.capacity()
                + self.slot_target.capacity()
                + self.row_time.capacity()
                + self.row_meet.capacity())
    }
}

/// Per-node state of one upward walk.
#[derive(Debug, Clone)]
struct Walker {
    /// Time per rank. INFINITY outside a walk: a walk resets each node right
    /// after settling it, so nothing needs a reset pass.
    dist: Vec<u32>,
    /// Arc that set `dist`, or NONE for a seeded endpoint; only trusted where
    /// `dist` was set by the current walk.
    pred: Vec<u32>,
    /// Length (cm) of the path to a settled node, computed when it is
    /// settled (from its predecessor's, already final). Read after a source
    /// walk for the meeting nodes, so never reset.
    len: Vec<u32>,
}

impl Walker {
    /// Walks the ancestor chains of `eps` in increasing rank over one pruned
    /// search graph (`arcs`, with per-arc lengths `arc_len`), calling
    /// `settle(rank, time, length)` for every node reached.
    #[inline(always)]
    fn walk(
        &mut self,
        cch: &Cch,
        arcs: &PrunedArcs,
        arc_len: &[u32],
        eps: &[Endpoint],
        mut settle: impl FnMut(u32, u32, u32),
    ) {
        // Seeds: the first of equally cheap endpoints on one rank wins, as
        // in the point query.
        for e in eps {
            let r = cch.rank[e.node as usize] as usize;
            if e.time < self.dist[r] {
                self.dist[r] = e.time;
                self.pred[r] = NONE;
                self.len[r] = e.len_cm;
            }
        }
        let mut chains = chains_of(eps, &cch.rank);
        while let Some(x) = chains.next(&cch.parent) {
            let xi = x as usize;
            let d = self.dist[xi];
            if d >= INFINITY {
                continue;
            }
            self.dist[xi] = INFINITY;
            let p = self.pred[xi];
            let l = if p == NONE {
                self.len[xi]
            } else {
                let p = p as usize;
                self.len[cch.tail[p] as usize].saturating_add(arc_len[p])
            };
            self.len[xi] = l;
            // Branch-free relaxation, as in the point query.
            for &PrunedArc { head, weight, arc } in &arcs.arcs[arcs.range(x)] {
                let y = head as usize;
                let nd = d + weight;
                let old = self.dist[y];
                let better = nd < old;
                self.dist[y] = if better { nd } else { old };
                let op = self.pred[y];
                self.pred[y] = if better { arc } else { op };
            }
            settle(x, d, l);
        }
    }
}

fn chains_of(eps: &[Endpoint], rank: &[u32]) -> Chains {
    let mut cur = [NONE; MAX_ENDPOINTS];
    for (c, e) in cur.iter_mut().zip(eps) {
        *c = rank[e.node as usize];
    }
    Chains { cur }
}

/// One bucket against the current row: `row = min(row, d + bucket)`,
/// remembering the meeting rank. Branch-free so it vectorises; strict `<`
/// keeps the lowest-rank meeting node among equal times, as the point query
/// does.
#[inline]
fn scan(d: u32, x: u32, bucket: &[u32], row: &mut [u32], meet: &mut [u32]) {
    // d < INFINITY and bucket ≤ INFINITY, so the sum fits in u32.
    for ((r, m), &b) in row.iter_mut().zip(meet.iter_mut()).zip(bucket) {
        let c = d + b;
        let better = c < *r;
        *r = if better { c } else { *r };
        *m = if better { x } else { *m };
    }
}

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
    /// Compact index of each snapped origin / destination (NONE when off
    /// the network).
    src_compact: Vec<u32>,
    dst_compact: Vec<u32>,
    /// Endpoints of the snapped points, in compact order.
    src_eps: Vec<([Endpoint; 2], usize)>,
    dst_eps: Vec<([Endpoint; 2], usize)>,
    /// Node-level results over the snapped points.
    node_time: Vec<u32>,
    node_len: Vec<u64>,
}

/// Travel-time matrix between coordinates: each point snapped once (within
/// `max_snap_m`), then one bucket many-to-many over the snapped points. A
/// point off the network makes its row or column [`Cell::Unavailable`], not
/// the whole matrix. Cells equal [`Region::eta`] for the same pair,
/// including trips that stay on one road.
#[allow(clippy::too_many_arguments)]
pub fn matrix(
    region: &Region,
    metric: &Metric,
    m2m: &mut ManyToMany,
    from: &[LatLon],
    to: &[LatLon],
    max_snap_m: f64,
    deadline: Option<Instant>,
    out: &mut PointMatrix,
) -> Result<(), MatrixError> {
    let g = &region.graph;
    let PointMatrix {
        cells,
        from: from_snaps,
        to: to_snaps,
        rows_done,
        bucket_cells,
        src_compact,
        dst_compact,
        src_eps,
        dst_eps,
        node_time,
        node_len,
    } = out;
    let cell_count = from
        .len()
        .checked_mul(to.len())
        .ok_or(MatrixError::TooLarge {
            sources: from.len(),
            targets: to.len(),
        })?;
    let snap_all = |pts: &[LatLon],
                    which: End,
                    snaps: &mut Vec<Result<Snap, EtaError>>,
                    compact: &mut Vec<u32>,
                    eps: &mut Vec<([Endpoint; 2], usize)>| {
        snaps.clear();
        compact.clear();
        eps.clear();
        for &p in pts {
            let s = region.snap_within(p, which, max_snap_m);
            match s {
                Ok(s) => {
                    compact.push(eps.len() as u32);
                    eps.push(snap_endpoints(g, &metric.weights, s, which == End::From));
                }
                Err(_) => compact.push(NONE),
            }
            snaps.push(s);
        }
    };
    snap_all(from, End::From, from_snaps, src_compact, src_eps);
    snap_all(to, End::To, to_snaps, dst_compact, dst_eps);

    let outcome = m2m.run_with(
        &region.cch,
        &metric.customized,
        src_eps.len(),
        |i| &src_eps[i].0[..src_eps[i].1],
        dst_eps.len(),
        |j| &dst_eps[j].0[..dst_eps[j].1],
        deadline,
        node_time,
        node_len,
    )?;
    *bucket_cells = outcome.bucket_cells;

    // The first origin row that was not computed bounds the done prefix.
    *rows_done = src_compact
        .iter()
        .position(|&c| c != NONE && c as usize >= outcome.rows_done)
        .unwrap_or(from.len());
    let nt = dst_eps.len();
    cells.clear();
    cells.reserve(cell_count);
    for (i, a) in from_snaps.iter().enumerate() {
        for (j, b) in to_snaps.iter().enumerate() {
            let (Ok(a), Ok(b)) = (a, b) else {
                cells.push(Cell::Unavailable);
                continue;
            };
            let (ci, cj) = (src_compact[i] as usize, dst_compact[j] as usize);
            if ci >= outcome.rows_done {
                cells.push(Cell::NotComputed);
                continue;
            }
            let t = node_time[ci * nt + cj];
            let graph = (t < INFINITY).then(|| (f64::from(t), node_len[ci * nt + cj] as f64));
            // Same choice as Region::eta: the graph path only when strictly
            // faster than staying on the shared road.
            let best = match (
                graph,
                direct_stretch(g, &metric.weights, *a, *b).map(|d| (d.time_ms, d.len_m)),
            ) {
                (Some(gr), Some(d)) if d.0 > gr.0 => Some(gr),
                (Some(gr), None) => Some(gr),
                (_, Some(d)) => Some((d.0, d.1 * 100.0)),
                (None, None) => None,
            };
            cells.push(match best {
                Some((ms, cm)) => Cell::Eta {
                    time_s: ms / 1000.0,
                    meters: cm / 100.0,
                },
                None => Cell::Unreachable,
            });
        }
    }
    Ok(())
}
