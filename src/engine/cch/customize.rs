//! Customization: per-edge weights → weights of every hierarchy arc.
//!
//! Basic customization (Dibbelt, Strasser & Wagner 2016, §4): first each arc
//! takes the smallest weight of the road edges it stands for, then every
//! lower triangle `{w, x, y}` with `w < x < y` is processed in increasing `w`
//! and may improve arc `(x, y)` through `w`. When `w` is processed both arcs
//! `(w, x)` and `(w, y)` are final, because all their lower triangles have
//! lower nodes below `w`. Afterwards the up/down weight of each arc is the
//! shortest travel time between its ends through lower-ranked nodes only,
//! which is what makes the upward query exact.
//!
//! Each arc also remembers *how* its weight was reached (a road edge or the
//! middle node of a triangle) so paths can be unpacked, and the length of
//! that path so an ETA's distance needs no unpacking. Given per-edge class
//! labels ([`CustomizedMetric::set_classes`]), each arc also carries the
//! milliseconds of its path per class (see [`super::classes`]).

use super::classes::{arc_class_times, ClassTimes};
use super::Cch;
use crate::graph::NONE;

pub use super::arc::{INFINITY, MAX_EDGE_WEIGHT};
pub(crate) use super::arc::{VIA_EDGE, VIA_NONE};

/// The hierarchy's arc weights for one metric.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CustomizedMetric {
    /// Basic weights during customization: travel time from `tail[a]`
    /// (lower) to `head[a]` (higher), and back. Emptied once the pruned
    /// search graphs are built; queries use [`forward`](Self::forward) and
    /// [`backward`](Self::backward).
    up: Vec<u32>,
    down: Vec<u32>,
    /// How `up[a]` was reached: `VIA_EDGE | edge`, a lower rank, or VIA_NONE.
    pub(crate) up_via: Vec<u32>,
    pub(crate) down_via: Vec<u32>,
    /// Length in centimetres of the path realising `up[a]` / `down[a]`.
    pub(crate) up_len: Vec<u32>,
    pub(crate) down_len: Vec<u32>,
    /// Milliseconds per edge class of the path realising `up[a]` /
    /// `down[a]`, so a query reports which kinds of edge its time lies on
    /// without unpacking. Empty unless [`set_classes`](Self::set_classes)
    /// was called (a metric without classes pays nothing).
    pub(crate) up_cls: Vec<ClassTimes>,
    pub(crate) down_cls: Vec<ClassTimes>,
    /// Forward search graph: per rank, the upward arcs still needed after
    /// perfect customization (see [`PrunedArcs`]).
    pub forward: PrunedArcs,
    /// Backward search graph: the downward directions still needed.
    pub backward: PrunedArcs,
}

/// The arcs of one search direction that can lie on a shortest path.
///
/// Perfect customization (Dibbelt, Strasser & Wagner 2016, §4.2) lowers each
/// arc to the true shortest distance between its ends, using upper and
/// intermediate triangles top-down. An arc direction whose basic weight is
/// larger than that distance is never needed by an upward search: a shorter
/// path through higher-ranked nodes exists and the search finds it along
/// other arcs. Dropping those directions keeps queries exact and cuts the
/// arcs a query relaxes. Kept arcs carry their basic weight (equal to the
/// perfect one) and their arc id, for predecessors and path unpacking.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct PrunedArcs {
    /// `first[x]..first[x+1]` index the kept arcs of rank `x`.
    pub first: Vec<u32>,
    /// The kept arcs, grouped by lower end: one array so a query's scan of a
    /// node's arcs touches one stream of memory.
    pub arcs: Vec<PrunedArc>,
}

/// One kept arc direction.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PrunedArc {
    /// Upper end (rank).
    pub head: u32,
    /// Weight in this direction.
    pub weight: u32,
    /// Hierarchy arc id (for predecessors and unpacking).
    pub arc: u32,
}

impl PrunedArcs {
    #[inline]
    pub fn range(&self, x: u32) -> std::ops::Range<usize> {
        self.first[x as usize] as usize..self.first[x as usize + 1] as usize
    }

    fn build(cch: &Cch, basic: &[u32], perfect: &[u32]) -> Self {
        let n = cch.num_nodes();
        let mut p = PrunedArcs {
            first: Vec::with_capacity(n + 1),
            ..Default::default()
        };
        p.first.push(0);
        for x in 0..n as u32 {
            for a in cch.arcs(x) {
                if basic[a] < INFINITY && basic[a] == perfect[a] {
                    p.arcs.push(PrunedArc {
                        head: cch.head[a],
                        weight: basic[a],
                        arc: a as u32,
                    });
                }
            }
            p.first.push(p.arcs.len() as u32);
        }
        p
    }
}

impl CustomizedMetric {
    /// Customizes `cch` for per-edge `weights` (milliseconds, one per road
    /// edge, in road edge order); `edge_len_m` gives each edge's length.
    pub fn new(cch: &Cch, weights: &[u32], edge_len_m: &[f64]) -> Self {
        let m = cch.num_arcs();
        let mut c = CustomizedMetric {
            up: vec![INFINITY; m],
            down: vec![INFINITY; m],
            up_via: vec![VIA_NONE; m],
            down_via: vec![VIA_NONE; m],
            up_len: vec![0; m],
            down_len: vec![0; m],
            up_cls: Vec::new(),
            down_cls: Vec::new(),
            forward: PrunedArcs::default(),
            backward: PrunedArcs::default(),
        };
        c.customize(cch, weights, edge_len_m);
        c
    }

    /// Recomputes all weights in place for a new metric (reuses buffers).
    pub fn customize(&mut self, cch: &Cch, weights: &[u32], edge_len_m: &[f64]) {
        self.customize_with(cch, weights, edge_len_m, true);
    }

    /// [`customize`](Self::customize), optionally without threads (the
    /// results are identical; tests compare them).
    pub fn customize_with(
        &mut self,
        cch: &Cch,
        weights: &[u32],
        edge_len_m: &[f64],
        parallel: bool,
    ) {
        assert_eq!(
            weights.len(),
            cch.edge_arc.len(),
            "one weight per road edge"
        );
        assert_eq!(
            edge_len_m.len(),
            cch.edge_arc.len(),
            "one length per road edge"
        );
        // The basic weights live only during customization (see `prune`).
        let m = cch.num_arcs();
        self.up.clear();
        self.up.resize(m, INFINITY);
        self.down.clear();
        self.down.resize(m, INFINITY);
        self.up_via.fill(VIA_NONE);
        self.down_via.fill(VIA_NONE);
        self.up_len.fill(0);
        self.down_len.fill(0);
        // Class times belong to the previous weights.
        self.up_cls = Vec::new();
        self.down_cls = Vec::new();
        // Respecting: each arc takes its cheapest road edge per direction.
        for (e, (&ea, &w)) in cch.edge_arc.iter().zip(weights).enumerate() {
            let a = (ea >> 1) as usize;
            let w = w.min(MAX_EDGE_WEIGHT);
            let len = (edge_len_m[e] * 100.0).round().clamp(0.0, u32::MAX as f64) as u32;
            let (wt, via, l) = if ea & 1 == 0 {
                (&mut self.up, &mut self.up_via, &mut self.up_len)
            } else {
                (&mut self.down, &mut self.down_via, &mut self.down_len)
            };
            if w < wt[a] {
                wt[a] = w;
                via[a] = VIA_EDGE | e as u32;
                l[a] = len;
            }
        }
        // Lower triangles, bottom-up: the two halves below the first branch
        // of the elimination tree in parallel, then the top.
        let n = cch.num_nodes() as u32;
        let all = ArcSlab {
            base: 0,
            up: &mut self.up,
            down: &mut self.down,
            up_via: &mut self.up_via,
            down_via: &mut self.down_via,
            up_len: &mut self.up_len,
            down_len: &mut self.down_len,
        };
        match Split::find(cch).filter(|_| parallel) {
            None => {
                let mut all = all;
                lower_triangles(cch, 0..n, &mut all, None);
            }
            Some(sp) => {
                let (a_mid, a_top) = (
                    cch.first_out[sp.mid as usize] as usize,
                    cch.first_out[sp.top as usize] as usize,
                );
                let (mut g0, rest) = all.split_at(a_mid);
                let (mut g1, mut top) = rest.split_at(a_top);
                let mut buf0 = TopCopy::of(&top);
                let mut buf1 = TopCopy::of(&top);
                std::thread::scope(|scope| {
                    let mut b0 = buf0.slab(a_top);
                    scope.spawn(move || lower_triangles(cch, 0..sp.mid, &mut g0, Some(&mut b0)));
                    let mut b1 = buf1.slab(a_top);
                    lower_triangles(cch, sp.mid..sp.top, &mut g1, Some(&mut b1));
                });
                buf0.merge_into(&mut top);
                buf1.merge_into(&mut top);
                lower_triangles(cch, sp.top..n, &mut top, None);
            }
        }
        self.prune(cch, parallel);
    }

    /// Labels every road edge with a class (`classes[e] < CLASSES`) and
    /// computes each arc's milliseconds per class for the `weights` this
    /// metric was customized with (see [`super::classes`]).
    pub fn set_classes(&mut self, cch: &Cch, weights: &[u32], classes: &[u8]) {
        assert_eq!(classes.len(), weights.len(), "one class per road edge");
        arc_class_times(
            cch,
            (&self.up_via, &self.down_via),
            weights,
            classes,
            (&mut self.up_cls, &mut self.down_cls),
        );
    }

    /// Whether arcs carry class times.
    #[inline]
    pub fn has_classes(&self) -> bool {
        !self.up_cls.is_empty()
    }

    /// Bytes held by this metric.
    pub fn heap_bytes(&self) -> usize {
        let pruned = |p: &PrunedArcs| 4 * (p.first.len() + 3 * p.arcs.len());
        std::mem::size_of::<ClassTimes>() * (self.up_cls.capacity() + self.down_cls.capacity())
            + 4 * (self.up.capacity() + self.down.capacity())
            + 4 * 4 * self.up_via.len()
            + pruned(&self.forward)
            + pruned(&self.backward)
    }

    /// Perfect customization on copies of the basic weights, then the pruned
    /// search graphs.
    fn prune(&mut self, cch: &Cch, parallel: bool) {
        let mut up = self.up.clone();
        let mut down = self.down.clone();
        let n = cch.num_nodes() as u32;
        match Split::find(cch).filter(|_| parallel) {
            None => upper_triangles(cch, 0..n, 0, &mut up, &mut down, None),
            Some(sp) => {
                // Top first (it reads only itself), then both halves in
                // parallel against the finished top.
                let (a_mid, a_top) = (
                    cch.first_out[sp.mid as usize] as usize,
                    cch.first_out[sp.top as usize] as usize,
                );
                let (low_up, top_up) = up.split_at_mut(a_top);
                let (low_down, top_down) = down.split_at_mut(a_top);
                upper_triangles(cch, sp.top..n, a_top, top_up, top_down, None);
                let (top_up, top_down) = (&*top_up, &*top_down);
                let (u0, u1) = low_up.split_at_mut(a_mid);
                let (d0, d1) = low_down.split_at_mut(a_mid);
                std::thread::scope(|scope| {
                    scope.spawn(move || {
                        upper_triangles(cch, 0..sp.mid, 0, u0, d0, Some((a_top, top_up, top_down)))
                    });
                    upper_triangles(
                        cch,
                        sp.mid..sp.top,
                        a_mid,
                        u1,
                        d1,
                        Some((a_top, top_up, top_down)),
                    );
                });
            }
        }
        self.forward = PrunedArcs::build(cch, &self.up, &up);
        self.backward = PrunedArcs::build(cch, &self.down, &down);
        // Queries read the pruned arcs, unpacking reads `via` and lengths;
        // nothing reads the basic weights again, so free them (12 MB per
        // metric on USA-road-d.NY).
        self.up = Vec::new();
        self.down = Vec::new();
    }
}

/// The six per-arc arrays for the arcs `base..base + len`, mutably.
struct ArcSlab<'a> {
    base: usize,
    up: &'a mut [u32],
    down: &'a mut [u32],
    up_via: &'a mut [u32],
    down_via: &'a mut [u32],
    up_len: &'a mut [u32],
    down_len: &'a mut [u32],
}

impl<'a> ArcSlab<'a> {
    /// Lowers arc `k` (global index) through middle node `w` where the
    /// `(time, length)` candidates beat it.
    #[inline(always)]
    fn improve(&mut self, k: usize, w: u32, via_xy: (u32, u32), via_yx: (u32, u32)) {
        let ik = k - self.base;
        if via_xy.0 < self.up[ik] {
            self.up[ik] = via_xy.0;
            self.up_via[ik] = w;
            self.up_len[ik] = via_xy.1;
        }
        if via_yx.0 < self.down[ik] {
            self.down[ik] = via_yx.0;
            self.down_via[ik] = w;
            self.down_len[ik] = via_yx.1;
        }
    }

    /// Splits at global arc index `at`.
    fn split_at(self, at: usize) -> (ArcSlab<'a>, ArcSlab<'a>) {
        let i = at - self.base;
        let (u0, u1) = self.up.split_at_mut(i);
        let (d0, d1) = self.down.split_at_mut(i);
        let (uv0, uv1) = self.up_via.split_at_mut(i);
        let (dv0, dv1) = self.down_via.split_at_mut(i);
        let (ul0, ul1) = self.up_len.split_at_mut(i);
        let (dl0, dl1) = self.down_len.split_at_mut(i);
        (
            ArcSlab {
                base: self.base,
                up: u0,
                down: d0,
                up_via: uv0,
                down_via: dv0,
                up_len: ul0,
                down_len: dl0,
            },
            ArcSlab {
                base: at,
                up: u1,
                down: d1,
                up_via: uv1,
                down_via: dv1,
                up_len: ul1,
                down_len: dl1,
            },
        )
    }
}

/// One worker's private copy of the top arcs: both halves below the split
/// improve top arcs, so each writes its own copy and the copies are merged
/// by minimum afterwards.
struct TopCopy {
    up: Vec<u32>,
    down: Vec<u32>,
    up_via: Vec<u32>,
    down_via: Vec<u32>,
    up_len: Vec<u32>,
    down_len: Vec<u32>,
}

impl TopCopy {
    fn of(s: &ArcSlab<'_>) -> Self {
        TopCopy {
            up: s.up.to_vec(),
            down: s.down.to_vec(),
            up_via: s.up_via.to_vec(),
            down_via: s.down_via.to_vec(),
            up_len: s.up_len.to_vec(),
            down_len: s.down_len.to_vec(),
        }
    }

    fn slab(&mut self, base: usize) -> ArcSlab<'_> {
        ArcSlab {
            base,
            up: &mut self.up,
            down: &mut self.down,
            up_via: &mut self.up_via,
            down_via: &mut self.down_via,
            up_len: &mut self.up_len,
            down_len: &mut self.down_len,
        }
    }

    fn merge_into(&self, t: &mut ArcSlab<'_>) {
        for i in 0..self.up.len() {
            if self.up[i] < t.up[i] {
                t.up[i] = self.up[i];
                t.up_via[i] = self.up_via[i];
                t.up_len[i] = self.up_len[i];
            }
            if self.down[i] < t.down[i] {
                t.down[i] = self.down[i];
                t.down_via[i] = self.down_via[i];
                t.down_len[i] = self.down_len[i];
            }
        }
    }
}

/// Where the elimination tree first branches: ranks `0..mid` and
/// `mid..top` are unions of whole subtrees (no node of one is an ancestor
/// of a node of the other), `top..n` is the chain above them. Customizing
/// either half touches only its own arcs and the top's, which is what lets
/// the halves run in parallel.
#[derive(Debug, Clone, Copy)]
struct Split {
    mid: u32,
    top: u32,
}

impl Split {
    /// Pieces smaller than this are not worth a thread.
    const MIN_NODES: usize = 20_000;

    fn find(cch: &Cch) -> Option<Split> {
        let n = cch.num_nodes();
        if n < Self::MIN_NODES {
            return None;
        }
        let mut size = vec![1u32; n];
        let mut min_desc: Vec<u32> = (0..n as u32).collect();
        let mut children = vec![0u32; n];
        for x in 0..n {
            let p = cch.parent[x];
            if p != NONE {
                let p = p as usize;
                size[p] += size[x];
                min_desc[p] = min_desc[p].min(min_desc[x]);
                children[p] += 1;
            }
        }
        // The root: the one node without a parent (a connected graph).
        let roots: Vec<usize> = (0..n).filter(|&x| cch.parent[x] == NONE).collect();
        if roots.len() != 1 {
            return None;
        }
        let mut cur = roots[0];
        while children[cur] == 1 {
            cur = (0..cur).rev().find(|&c| cch.parent[c] == cur as u32)?;
        }
        if children[cur] < 2 {
            return None;
        }
        // Children of the branch, each a contiguous rank range, in order.
        let mut kids: Vec<usize> = (0..cur).filter(|&c| cch.parent[c] == cur as u32).collect();
        kids.sort_by_key(|&c| min_desc[c]);
        let mut next = 0u32;
        for &c in &kids {
            if min_desc[c] != next || c as u32 + 1 - min_desc[c] != size[c] {
                return None;
            }
            next = c as u32 + 1;
        }
        if next as usize != cur {
            return None;
        }
        // Cut the children into two runs of about equal arc count.
        let arcs_below = cch.first_out[cur] as u64;
        let mut best: Option<(u64, u32)> = None;
        for &c in &kids[..kids.len() - 1] {
            let end = c as u32 + 1;
            let left = cch.first_out[end as usize] as u64;
            let imbalance = left.abs_diff(arcs_below - left);
            if best.map(|b| imbalance < b.0).unwrap_or(true) {
                best = Some((imbalance, end));
            }
        }
        let (_, mid) = best?;
        Some(Split {
            mid,
            top: cur as u32,
        })
    }
}

/// Basic customization for the lower nodes `ws`: every lower triangle
/// `{w, x, y}` improves arc `(x, y)`. Arcs of `ws` live in `own`; arcs whose
/// lower end is at or above `top`'s base go to `top` when given.
fn lower_triangles(
    cch: &Cch,
    ws: std::ops::Range<u32>,
    own: &mut ArcSlab<'_>,
    mut top: Option<&mut ArcSlab<'_>>,
) {
    let top_base = top.as_ref().map(|t| t.base).unwrap_or(usize::MAX);
    for w in ws {
        let arcs = cch.arcs(w);
        let (fw, lw) = (arcs.start, arcs.end);
        for a1 in fw..lw {
            let x = cch.head[a1];
            let i1 = a1 - own.base;
            // a1 joins w–x: up[a1] is w→x, down[a1] is x→w.
            let (x_to_w, w_to_x) = (own.down[i1], own.up[i1]);
            if x_to_w >= INFINITY && w_to_x >= INFINITY {
                continue;
            }
            let (x_to_w_len, w_to_x_len) = (own.down_len[i1], own.up_len[i1]);
            let mut k = cch.first_out[x as usize] as usize;
            for a2 in a1 + 1..lw {
                let y = cch.head[a2];
                // Chordality: y is an upper neighbour of x; lists are sorted.
                while cch.head[k] != y {
                    k += 1;
                }
                let i2 = a2 - own.base;
                let (up2, down2, up2_len, down2_len) =
                    (own.up[i2], own.down[i2], own.up_len[i2], own.down_len[i2]);
                let via_xy = (
                    x_to_w.saturating_add(up2),
                    x_to_w_len.saturating_add(up2_len),
                );
                let via_yx = (
                    down2.saturating_add(w_to_x),
                    down2_len.saturating_add(w_to_x_len),
                );
                match top.as_deref_mut() {
                    Some(t) if k >= top_base => t.improve(k, w, via_xy, via_yx),
                    _ => own.improve(k, w, via_xy, via_yx),
                }
            }
        }
    }
}

/// Perfect customization for the nodes `xs`, top-down: upper and
/// intermediate triangles `{x, y, z}` (x < y < z) lower arcs `(x, y)` and
/// `(x, z)`. `up`/`down` hold the arcs from global index `base`; arcs at
/// or above `above.0` are read from the (finished) `above` slices.
fn upper_triangles(
    cch: &Cch,
    xs: std::ops::Range<u32>,
    base: usize,
    up: &mut [u32],
    down: &mut [u32],
    above: Option<(usize, &[u32], &[u32])>,
) {
    for x in xs.rev() {
        let arcs = cch.arcs(x);
        let (fx, lx) = (arcs.start, arcs.end);
        for a_xy in fx..lx {
            let y = cch.head[a_xy];
            let mut k = cch.first_out[y as usize] as usize;
            for a_xz in a_xy + 1..lx {
                let z = cch.head[a_xz];
                while cch.head[k] != z {
                    k += 1;
                }
                // Arc k joins y–z and is final already.
                let (y_to_z, z_to_y) = match above {
                    Some((ab, au, ad)) if k >= ab => (au[k - ab], ad[k - ab]),
                    _ => (up[k - base], down[k - base]),
                };
                let (ixy, ixz) = (a_xy - base, a_xz - base);
                // x→z through y, z→x through y (intermediate triangle).
                up[ixz] = up[ixz].min(up[ixy].saturating_add(y_to_z));
                down[ixz] = down[ixz].min(z_to_y.saturating_add(down[ixy]));
                // x→y through z, y→x through z (upper triangle).
                up[ixy] = up[ixy].min(up[ixz].saturating_add(z_to_y));
                down[ixy] = down[ixy].min(y_to_z.saturating_add(down[ixz]));
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geo::LocalProjection;
    use crate::order::{nested_dissection, UndirectedGraph};

    /// The two-thread customization gives exactly the sequential result
    /// (weights, middle nodes, lengths and pruned arcs).
    #[test]
    fn parallel_equals_sequential() {
        let (g, _) = crate::import::synthetic::generate(40_000, 3).keep_largest_scc();
        let ug = UndirectedGraph::from_edges(
            g.num_nodes(),
            g.edge_tail.iter().copied().zip(g.edge_head.iter().copied()),
        );
        let proj = LocalProjection::new(45.0);
        let xy: Vec<[f64; 2]> = (0..g.num_nodes() as u32)
            .map(|v| proj.project(g.node_pos(v)))
            .collect();
        let cch = Cch::build(&g, nested_dissection(&ug, &xy, &mut |_| {}).rank);
        let split = Split::find(&cch).expect("a 40,000-node city branches");
        assert!(split.mid > 0 && split.mid < split.top);
        let w = crate::metric::free_flow(&g);
        let mut a = CustomizedMetric::new(&cch, &w, &g.edge_len_m);
        let b = a.clone();
        a.customize_with(&cch, &w, &g.edge_len_m, false);
        assert_eq!(a, b);
    }
}
