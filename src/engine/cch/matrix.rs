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
//! [`super::query`] (over `cch::chains`) on the same perfectly
//! customized (pruned) search graphs, but without stopping criterion (there
//! is no single target to bound by).
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
//! Class times ride along the same way on a metric with classes
//! ([`super::classes`]), when the caller asks for them
//! ([`NodeCells::classes`]): each settled node gets its predecessor's class
//! times plus its arc's, bucket entries keep the backward ones, and a cell's
//! are the forward ones at its meeting node plus the bucket entry's.
//!
//! [`ManyToMany`] owns all scratch; after a warm-up call of the same size a
//! call allocates nothing. Its endpoints are road nodes with partial costs;
//! the coordinate front end (snapping, trips along one road) is
//! [`crate::region::matrix`].

use super::chains::Chains;
use super::classes::{add, single, ClassTimes, CLASSES};
use super::customize::{CustomizedMetric, PrunedArc, PrunedArcs, INFINITY};
use super::query::{Endpoint, MAX_ENDPOINTS};
use super::Cch;
use crate::graph::NONE;
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
    /// Backward class times alongside `bucket_time` (only when asked for).
    bucket_cls: Vec<ClassTimes>,
    /// Target index of each slot (targets sorted by preorder).
    slot_target: Vec<u32>,
    /// Best time per slot for the current source row.
    row_time: Vec<u32>,
    /// Meeting rank realising `row_time`, to recover the length.
    row_meet: Vec<u32>,
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
                cls: Vec::new(),
            },
            preorder,
            bucket: vec![EMPTY; n],
            touched: Vec::new(),
            bucket_time: Vec::new(),
            bucket_len: Vec::new(),
            bucket_cls: Vec::new(),
            slot_target: Vec::new(),
            row_time: Vec::new(),
            row_meet: Vec::new(),
        }
    }

    /// Computes the `sources × targets` matrix, row-major, into `out.time`
    /// (metric units, [`INFINITY`] when unreachable or not computed) and
    /// `out.len_cm` (`u64::MAX` where the time is INFINITY). Each source or
    /// target is a list of at most [`MAX_ENDPOINTS`] endpoints (a snapped
    /// point leaves through both ends of its road), with partial costs.
    ///
    /// All target walks run first (a deadline passing during them abandons
    /// the matrix: no row can be computed without them); then source rows in
    /// order, checking `deadline` before each. Rows from the first one found
    /// past the deadline on are left INFINITY; [`MatrixOutcome::rows_done`]
    /// says how many were computed.
    pub fn run(
        &mut self,
        cch: &Cch,
        metric: &CustomizedMetric,
        sources: &[&[Endpoint]],
        targets: &[&[Endpoint]],
        deadline: Option<Instant>,
        out: NodeCells<'_>,
    ) -> Result<MatrixOutcome, MatrixError> {
        self.run_points(
            cch,
            metric,
            Points::new(sources.len(), |i| sources[i]),
            Points::new(targets.len(), |j| targets[j]),
            deadline,
            out,
        )
    }

    /// [`run`](Self::run) with node-to-node endpoints (road node ids).
    pub fn run_nodes(
        &mut self,
        cch: &Cch,
        metric: &CustomizedMetric,
        sources: &[u32],
        targets: &[u32],
        deadline: Option<Instant>,
        out: NodeCells<'_>,
    ) -> Result<MatrixOutcome, MatrixError> {
        self.run_points(
            cch,
            metric,
            Points::new(sources.len(), |i| [Endpoint::at(sources[i])]),
            Points::new(targets.len(), |j| [Endpoint::at(targets[j])]),
            deadline,
            out,
        )
    }

    /// [`run`](Self::run) over points given by index (so callers can keep
    /// endpoints in their own reusable storage).
    pub(crate) fn run_points<L: AsRef<[Endpoint]>>(
        &mut self,
        cch: &Cch,
        metric: &CustomizedMetric,
        sources: Points<impl Fn(usize) -> L>,
        targets: Points<impl Fn(usize) -> L>,
        deadline: Option<Instant>,
        mut out: NodeCells<'_>,
    ) -> Result<MatrixOutcome, MatrixError> {
        let cells = self.check(cch, metric, &sources, &targets)?;
        out.time.clear();
        out.time.resize(cells, INFINITY);
        out.len_cm.clear();
        out.len_cm.resize(cells, u64::MAX);
        let with_classes = out.classes.is_some() && metric.has_classes();
        if let Some(c) = out.classes.as_deref_mut() {
            c.clear();
            c.resize(cells, [0; CLASSES]);
        }
        if with_classes && self.walker.cls.len() != self.walker.dist.len() {
            self.walker.cls.resize(self.walker.dist.len(), [0; CLASSES]);
        }
        if targets.count == 0 || sources.count == 0 {
            return Ok(MatrixOutcome {
                rows_done: sources.count,
                bucket_cells: 0,
            });
        }
        if past(deadline) {
            return Ok(MatrixOutcome {
                rows_done: 0,
                bucket_cells: 0,
            });
        }
        self.sort_slots(&cch.rank, &targets);
        let Some(total) = self.lay_out_buckets(cch, &targets, with_classes) else {
            return Err(MatrixError::TooLarge {
                sources: sources.count,
                targets: targets.count,
            });
        };
        let filled = if with_classes {
            self.fill_buckets::<true, _>(cch, metric, &targets, deadline)
        } else {
            self.fill_buckets::<false, _>(cch, metric, &targets, deadline)
        };
        if !filled {
            self.clear_buckets();
            return Ok(MatrixOutcome {
                rows_done: 0,
                bucket_cells: total,
            });
        }
        let rows_done = if with_classes {
            self.source_rows::<true, _>(cch, metric, &sources, deadline, out)
        } else {
            self.source_rows::<false, _>(cch, metric, &sources, deadline, out)
        };
        self.clear_buckets();
        Ok(MatrixOutcome {
            rows_done,
            bucket_cells: total,
        })
    }

    /// Checks scratch, metric and every endpoint against the hierarchy;
    /// returns the number of cells.
    fn check<L: AsRef<[Endpoint]>>(
        &self,
        cch: &Cch,
        metric: &CustomizedMetric,
        sources: &Points<impl Fn(usize) -> L>,
        targets: &Points<impl Fn(usize) -> L>,
    ) -> Result<usize, MatrixError> {
        let n = cch.num_nodes();
        if self.walker.dist.len() != n || cch.parent.len() != n {
            return Err(MatrixError::ScratchMismatch {
                scratch: self.walker.dist.len(),
                graph: n,
            });
        }
        check_metric(cch, metric)?;
        let too_large = MatrixError::TooLarge {
            sources: sources.count,
            targets: targets.count,
        };
        let cells = sources.count.checked_mul(targets.count).ok_or(too_large)?;
        if targets.count >= NONE as usize {
            return Err(too_large);
        }
        for i in 0..sources.count {
            check_endpoints(sources.get(i).as_ref(), n)?;
        }
        for j in 0..targets.count {
            check_endpoints(targets.get(j).as_ref(), n)?;
        }
        Ok(cells)
    }

    /// Slots: targets sorted by the preorder of their first endpoint, so
    /// the targets below a node occupy (nearly) one run of slots.
    fn sort_slots<L: AsRef<[Endpoint]>>(
        &mut self,
        rank: &[u32],
        targets: &Points<impl Fn(usize) -> L>,
    ) {
        self.slot_target.clear();
        self.slot_target.extend(0..targets.count as u32);
        let pre = &self.preorder;
        let key = |j: u32| {
            targets
                .get(j as usize)
                .as_ref()
                .first()
                .map_or(u32::MAX, |e| pre[rank[e.node as usize] as usize])
        };
        self.slot_target.sort_unstable_by_key(|&j| key(j));
    }

    /// Pass 1: which slots pass each node (tree structure only), then where
    /// each bucket's slice starts. Returns the number of bucket cells, or
    /// `None` (scratch left clean) when they do not fit u32 offsets.
    fn lay_out_buckets<L: AsRef<[Endpoint]>>(
        &mut self,
        cch: &Cch,
        targets: &Points<impl Fn(usize) -> L>,
        with_classes: bool,
    ) -> Option<usize> {
        for (k, &j) in self.slot_target.iter().enumerate() {
            let mut walk = chains_of(targets.get(j as usize).as_ref(), &cch.rank);
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
                return None;
            }
        }
        self.bucket_time.clear();
        self.bucket_time.resize(total, INFINITY);
        self.bucket_len.clear();
        self.bucket_len.resize(total, 0);
        self.bucket_cls.clear();
        if with_classes {
            self.bucket_cls.resize(total, [0; CLASSES]);
        }
        Some(total)
    }

    /// Pass 2: backward walks (down arcs) fill the buckets. No row can be
    /// computed without all of them, so a deadline passing here (checked
    /// every few walks) abandons the whole matrix: returns false.
    fn fill_buckets<const C: bool, L: AsRef<[Endpoint]>>(
        &mut self,
        cch: &Cch,
        metric: &CustomizedMetric,
        targets: &Points<impl Fn(usize) -> L>,
        deadline: Option<Instant>,
    ) -> bool {
        for k in 0..targets.count {
            if k % DEADLINE_EVERY == DEADLINE_EVERY - 1 && past(deadline) {
                return false;
            }
            let j = self.slot_target[k];
            let eps = targets.get(j as usize);
            let eps = eps.as_ref();
            let (bucket, bucket_time, bucket_len, bucket_cls) = (
                &self.bucket,
                &mut self.bucket_time,
                &mut self.bucket_len,
                &mut self.bucket_cls,
            );
            let arcs = (&metric.backward, &metric.down_len[..], &metric.down_cls[..]);
            self.walker.walk::<C>(cch, arcs, eps, |x, d, l, c| {
                let b = bucket[x as usize];
                let at = b.offset as usize + k - b.first as usize;
                bucket_time[at] = d;
                bucket_len[at] = l;
                if C {
                    bucket_cls[at] = *c;
                }
            });
        }
        true
    }

    /// Source rows in order, checking `deadline` before each: forward walks
    /// (up arcs) scan the buckets they pass. Returns the rows computed.
    fn source_rows<const C: bool, L: AsRef<[Endpoint]>>(
        &mut self,
        cch: &Cch,
        metric: &CustomizedMetric,
        sources: &Points<impl Fn(usize) -> L>,
        deadline: Option<Instant>,
        mut out: NodeCells<'_>,
    ) -> usize {
        let num_targets = self.slot_target.len();
        self.row_time.clear();
        self.row_time.resize(num_targets, INFINITY);
        self.row_meet.clear();
        self.row_meet.resize(num_targets, NONE);
        for i in 0..sources.count {
            if past(deadline) {
                return i;
            }
            let eps = sources.get(i);
            let eps = eps.as_ref();
            let (bucket, bucket_time, row_time, row_meet) = (
                &self.bucket,
                &self.bucket_time,
                &mut self.row_time,
                &mut self.row_meet,
            );
            let arcs = (&metric.forward, &metric.up_len[..], &metric.up_cls[..]);
            self.walker.walk::<C>(cch, arcs, eps, |x, d, _, _| {
                let b = bucket[x as usize];
                if b.first != NONE {
                    let (lo, cnt, off) = (b.first as usize, b.count as usize, b.offset as usize);
                    scan(
                        d,
                        x,
                        &bucket_time[off..off + cnt],
                        &mut row_time[lo..lo + cnt],
                        &mut row_meet[lo..lo + cnt],
                    );
                }
            });
            let base = i * num_targets;
            let row = base..base + num_targets;
            let classes = match out.classes.as_deref_mut() {
                Some(c) if C => Some(&mut c[row.clone()]),
                _ => None,
            };
            self.emit_row(&mut out.time[row.clone()], &mut out.len_cm[row], classes);
        }
        sources.count
    }

    /// The current row, back in target order, with lengths (and class
    /// times, when given) from the meeting nodes; clears it for the next
    /// source.
    #[inline]
    fn emit_row(
        &mut self,
        time: &mut [u32],
        len_cm: &mut [u64],
        mut classes: Option<&mut [ClassTimes]>,
    ) {
        for k in 0..self.row_time.len() {
            let t = self.row_time[k];
            if t >= INFINITY {
                continue;
            }
            self.row_time[k] = INFINITY;
            let j = self.slot_target[k] as usize;
            let meet = self.row_meet[k] as usize;
            let b = self.bucket[meet];
            let at = b.offset as usize + k - b.first as usize;
            let back = self.bucket_len[at];
            time[j] = t;
            len_cm[j] = u64::from(self.walker.len[meet]) + u64::from(back);
            if let Some(c) = classes.as_deref_mut() {
                let mut ct = self.walker.cls[meet];
                add(&mut ct, &self.bucket_cls[at]);
                c[j] = ct;
            }
        }
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
            + std::mem::size_of::<ClassTimes>()
                * (self.walker.cls.capacity() + self.bucket_cls.capacity())
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
    /// Class times of the path to a settled node, like `len` (sized on the
    /// first call that asks for classes; empty before).
    cls: Vec<ClassTimes>,
}

impl Walker {
    /// Walks the ancestor chains of `eps` in increasing rank over one pruned
    /// search graph (`arcs`, with per-arc lengths `arc_len` and, when `C`,
    /// class times `arc_cls`), calling `settle(rank, time, length, class
    /// times)` for every node reached (class times all zero unless `C`).
    #[inline(always)]
    fn walk<const C: bool>(
        &mut self,
        cch: &Cch,
        (arcs, arc_len, arc_cls): (&PrunedArcs, &[u32], &[ClassTimes]),
        eps: &[Endpoint],
        mut settle: impl FnMut(u32, u32, u32, &ClassTimes),
    ) {
        const ZERO: ClassTimes = [0; CLASSES];
        // Seeds: the first of equally cheap endpoints on one rank wins, as
        // in the point query.
        for e in eps {
            let r = cch.rank[e.node as usize] as usize;
            if e.time < self.dist[r] {
                self.dist[r] = e.time;
                self.pred[r] = NONE;
                self.len[r] = e.len_cm;
                if C {
                    self.cls[r] = single(e.class, e.time);
                }
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
                if C {
                    let mut c = self.cls[cch.tail[p] as usize];
                    add(&mut c, &arc_cls[p]);
                    self.cls[xi] = c;
                }
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
            settle(x, d, l, if C { &self.cls[xi] } else { &ZERO });
        }
    }
}

/// One side of a node-level matrix: `count` points, point `i` given by
/// `at(i)` as its endpoints (so callers can keep them in their own storage
/// or build them on the fly).
pub(crate) struct Points<F> {
    pub(crate) count: usize,
    pub(crate) at: F,
}

impl<F> Points<F> {
    pub(crate) fn new(count: usize, at: F) -> Self {
        Self { count, at }
    }

    #[inline]
    fn get<L>(&self, i: usize) -> L
    where
        F: Fn(usize) -> L,
    {
        (self.at)(i)
    }
}

/// Where a node-level matrix goes: row-major times and lengths (see
/// [`ManyToMany::run`]).
/// Where a node-level run writes its row-major cells: the caller's
/// buffers, reused between calls so a warm run allocates nothing.
#[derive(Debug)]
pub struct NodeCells<'a> {
    /// Travel time per cell in metric units ([`INFINITY`] when none).
    pub time: &'a mut Vec<u32>,
    /// Length per cell in cm (`u64::MAX` where the time is INFINITY).
    pub len_cm: &'a mut Vec<u64>,
    /// Class times per cell (adding up to the time), when asked for and
    /// the metric has classes; all zero where the time is INFINITY.
    pub classes: Option<&'a mut Vec<ClassTimes>>,
}

impl<'a> NodeCells<'a> {
    pub fn new(time: &'a mut Vec<u32>, len_cm: &'a mut Vec<u64>) -> Self {
        NodeCells {
            time,
            len_cm,
            classes: None,
        }
    }

    /// Also asks for each cell's class times.
    pub fn with_classes(mut self, classes: &'a mut Vec<ClassTimes>) -> Self {
        self.classes = Some(classes);
        self
    }
}

/// Whether `deadline` has passed.
#[inline]
fn past(deadline: Option<Instant>) -> bool {
    deadline.is_some_and(|d| Instant::now() >= d)
}

/// The customized metric must belong to a hierarchy of `cch`'s shape.
fn check_metric(cch: &Cch, metric: &CustomizedMetric) -> Result<(), MatrixError> {
    let (n, m) = (cch.num_nodes(), cch.num_arcs());
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
    Ok(())
}

/// A point's endpoints: at most [`MAX_ENDPOINTS`], each an existing node.
fn check_endpoints(eps: &[Endpoint], n: usize) -> Result<(), MatrixError> {
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
}

/// The ancestor chains of a point's endpoints.
#[inline]
fn chains_of(eps: &[Endpoint], rank: &[u32]) -> Chains<MAX_ENDPOINTS> {
    Chains::new(eps.iter().map(|e| rank[e.node as usize]))
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cch::CchQuery;
    use crate::testing::{city, reference_dists, Rng};

    /// Many-to-many with class times on random edge classes: every cell's
    /// time equals petgraph's Dijkstra (the reference), its class times add
    /// up to it, and they equal the point query's class times for the same
    /// pair (itself checked against the unpacked path in `cch::query`).
    #[test]
    fn cell_class_times_equal_the_point_query() {
        let art = city(3_000, 31);
        let (g, cch) = (&art.graph, &art.cch);
        let n = g.num_nodes();
        let mut rng = Rng::new(12);
        let speeds: Vec<f32> = (0..g.num_edges())
            .map(|_| 5.0 + rng.below(116) as f32)
            .collect();
        let weights = crate::metric::from_speeds(g, &speeds);
        let classes: Vec<u8> = (0..g.num_edges()).map(|_| rng.below(3) as u8).collect();
        let mut metric = CustomizedMetric::new(cch, &weights, &g.edge_len_m);
        metric.set_classes(cch, &weights, &classes);
        let sources: Vec<u32> = (0..12).map(|_| rng.below(n)).collect();
        let targets: Vec<u32> = (0..15).map(|_| rng.below(n)).collect();
        let (mut time, mut len, mut cls) = (Vec::new(), Vec::new(), Vec::new());
        let mut m2m = ManyToMany::new(cch);
        let cells = NodeCells::new(&mut time, &mut len).with_classes(&mut cls);
        m2m.run_nodes(cch, &metric, &sources, &targets, None, cells)
            .expect("matrix");
        let mut q = CchQuery::new(cch);
        for (i, &s) in sources.iter().enumerate() {
            let reference = reference_dists(g, &weights, s);
            for (j, &t) in targets.iter().enumerate() {
                let k = i * targets.len() + j;
                assert_eq!(Some(u64::from(time[k])), reference[t as usize]);
                let sum: u64 = cls[k].iter().map(|&c| u64::from(c)).sum();
                assert_eq!(sum, u64::from(time[k]), "class times add up");
                let r = q.node_to_node(cch, &metric, s, t).expect("connected");
                assert_eq!(cls[k], r.classes, "{s} -> {t}");
            }
        }
    }
}
