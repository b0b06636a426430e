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
//! that path so an ETA's distance needs no unpacking.

use super::Cch;

/// Weight of an arc with no path (one-way pair, or a pure fill-in arc that
/// no triangle improves). Sums of two stay below `u32::MAX`.
pub const INFINITY: u32 = u32::MAX / 2;

/// Largest accepted edge weight; larger ones are clamped to it.
pub const MAX_EDGE_WEIGHT: u32 = INFINITY / 4;

/// `via` value meaning "this weight is a road edge", OR-ed with the edge id.
pub(crate) const VIA_EDGE: u32 = 1 << 31;
/// `via` value meaning "no path".
pub(crate) const VIA_NONE: u32 = u32::MAX;

/// The hierarchy's arc weights for one metric.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CustomizedMetric {
    /// Travel time from `tail[a]` (lower) to `head[a]` (higher).
    pub up: Vec<u32>,
    /// Travel time from `head[a]` to `tail[a]`.
    pub down: Vec<u32>,
    /// How `up[a]` was reached: `VIA_EDGE | edge`, a lower rank, or VIA_NONE.
    pub(crate) up_via: Vec<u32>,
    pub(crate) down_via: Vec<u32>,
    /// Length in centimetres of the path realising `up[a]` / `down[a]`.
    pub(crate) up_len: Vec<u32>,
    pub(crate) down_len: Vec<u32>,
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
            forward: PrunedArcs::default(),
            backward: PrunedArcs::default(),
        };
        c.customize(cch, weights, edge_len_m);
        c
    }

    /// Recomputes all weights in place for a new metric (reuses buffers).
    pub fn customize(&mut self, cch: &Cch, weights: &[u32], edge_len_m: &[f64]) {
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
        self.up.fill(INFINITY);
        self.down.fill(INFINITY);
        self.up_via.fill(VIA_NONE);
        self.down_via.fill(VIA_NONE);
        self.up_len.fill(0);
        self.down_len.fill(0);
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
        // Lower triangles, bottom-up.
        let n = cch.num_nodes();
        for w in 0..n as u32 {
            let arcs = cch.arcs(w);
            let (fw, lw) = (arcs.start, arcs.end);
            for a1 in fw..lw {
                let x = cch.head[a1];
                // a1 joins w–x: up[a1] is w→x, down[a1] is x→w.
                let (x_to_w, w_to_x) = (self.down[a1], self.up[a1]);
                if x_to_w >= INFINITY && w_to_x >= INFINITY {
                    continue;
                }
                let (x_to_w_len, w_to_x_len) = (self.down_len[a1], self.up_len[a1]);
                let mut k = cch.first_out[x as usize] as usize;
                for a2 in a1 + 1..lw {
                    let y = cch.head[a2];
                    // Chordality: y is an upper neighbour of x; lists are sorted.
                    while cch.head[k] != y {
                        k += 1;
                    }
                    let via_xy = x_to_w.saturating_add(self.up[a2]);
                    if via_xy < self.up[k] {
                        self.up[k] = via_xy;
                        self.up_via[k] = w;
                        self.up_len[k] = x_to_w_len.saturating_add(self.up_len[a2]);
                    }
                    let via_yx = self.down[a2].saturating_add(w_to_x);
                    if via_yx < self.down[k] {
                        self.down[k] = via_yx;
                        self.down_via[k] = w;
                        self.down_len[k] = self.down_len[a2].saturating_add(w_to_x_len);
                    }
                }
            }
        }
        self.prune(cch);
    }

    /// Bytes held by this metric.
    pub fn heap_bytes(&self) -> usize {
        let pruned = |p: &PrunedArcs| 4 * (p.first.len() + 3 * p.arcs.len());
        6 * 4 * self.up.len() + pruned(&self.forward) + pruned(&self.backward)
    }

    /// Perfect customization on copies of the basic weights, then the pruned
    /// search graphs.
    fn prune(&mut self, cch: &Cch) {
        let mut up = self.up.clone();
        let mut down = self.down.clone();
        let n = cch.num_nodes();
        for x in (0..n as u32).rev() {
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
                    // Triangle x < y < z; arc k joins y–z (final already).
                    let (y_to_z, z_to_y) = (up[k], down[k]);
                    // x→z through y, z→x through y (intermediate triangle).
                    up[a_xz] = up[a_xz].min(up[a_xy].saturating_add(y_to_z));
                    down[a_xz] = down[a_xz].min(z_to_y.saturating_add(down[a_xy]));
                    // x→y through z, y→x through z (upper triangle).
                    up[a_xy] = up[a_xy].min(up[a_xz].saturating_add(z_to_y));
                    down[a_xy] = down[a_xy].min(y_to_z.saturating_add(down[a_xz]));
                }
            }
        }
        self.forward = PrunedArcs::build(cch, &self.up, &up);
        self.backward = PrunedArcs::build(cch, &self.down, &down);
    }
}
