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
    }

    /// Bytes held by this metric.
    pub fn heap_bytes(&self) -> usize {
        6 * 4 * self.up.len()
    }
}
