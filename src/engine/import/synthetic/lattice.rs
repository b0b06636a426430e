//! The street lattice in local metres: an [`Axis`] of streets each way
//! (positions, through streets, classes, one-way pairs, the river gap),
//! the cells where streets meet, its [`Block`]s, and [`plan`], which sizes
//! downtown and the outer city for a requested node count.

use super::{
    CITY_CENTER, CUL_DE_SAC_SHARE, DOWNTOWN_BLOCK, DOWNTOWN_SHARE, INTERCHANGE_SPACING_M,
    M_PER_DEG, OUTER_BLOCK, RING_MARGIN_M, RIVER_GAP, STUB_SHARE,
};
use crate::geo::LatLon;
use crate::graph::{RoadClass, NONE};
use rand::Rng;
use rand_chacha::ChaCha8Rng;

/// One axis of the lattice: the streets running across it (columns for the x
/// axis, rows for the y axis).
pub(super) struct Axis {
    /// Base coordinate of each street (before node jitter), increasing.
    pub(super) pos: Vec<f64>,
    /// Street continues outside downtown.
    pub(super) through: Vec<bool>,
    pub(super) class: Vec<RoadClass>,
    /// +1: one-way toward increasing index on the other axis; -1: toward
    /// decreasing; 0: two-way.
    pub(super) oneway: Vec<i8>,
    /// Downtown street index range `[lo, hi)`.
    pub(super) dt: (usize, usize),
    /// For the y axis: the river runs between streets `k` and `k + 1`.
    pub(super) river: Option<usize>,
}

impl Axis {
    pub(super) fn new(m: usize, outer: usize, with_river: bool, rng: &mut ChaCha8Rng) -> Axis {
        let d = 3 * m + 1;
        let total = d + 2 * outer;
        let (lo, hi) = (outer, outer + d);
        let river = with_river.then_some(lo + 3 * (m / 2));
        let mut pos = vec![0.0; total];
        for k in 1..total {
            let range = if river == Some(k - 1) {
                RIVER_GAP
            } else if k > lo && k < hi {
                DOWNTOWN_BLOCK
            } else {
                OUTER_BLOCK
            };
            pos[k] = pos[k - 1] + rng.random_range(range.0..range.1);
        }
        let origin = match river {
            Some(k) => (pos[k] + pos[k + 1]) / 2.0,
            None => (pos[lo] + pos[hi - 1]) / 2.0,
        };
        for p in &mut pos {
            *p -= origin;
        }
        let through: Vec<bool> = (0..total)
            .map(|k| k < lo || k >= hi || (k - lo) % 3 == 0 || river.map(|r| r + 1) == Some(k))
            .collect();
        // Arterial classes by through-street ordinal counted from the centre.
        let through_idx: Vec<usize> = (0..total).filter(|&k| through[k]).collect();
        let centre = through_idx
            .iter()
            .enumerate()
            .min_by(|a, b| pos[*a.1].abs().total_cmp(&pos[*b.1].abs()))
            .map_or(0, |(o, _)| o);
        let mut class = vec![RoadClass::Residential; total];
        for (o, &k) in through_idx.iter().enumerate() {
            let delta = o.abs_diff(centre);
            class[k] = if delta % 6 == 0 {
                RoadClass::Primary
            } else if delta % 3 == 0 {
                RoadClass::Secondary
            } else {
                RoadClass::Residential
            };
        }
        if let Some(r) = river {
            for k in [r, r + 1] {
                if class[k] == RoadClass::Residential {
                    class[k] = RoadClass::Secondary;
                }
            }
        }
        let mut oneway = vec![0i8; total];
        let mut minor = 0usize;
        for k in 0..total {
            if !through[k] {
                oneway[k] = if minor % 2 == 0 { 1 } else { -1 };
                minor += 1;
            }
        }
        Axis {
            pos,
            through,
            class,
            oneway,
            dt: (lo, hi),
            river,
        }
    }

    pub(super) fn len(&self) -> usize {
        self.pos.len()
    }

    pub(super) fn in_downtown(&self, k: usize) -> bool {
        (self.dt.0..self.dt.1).contains(&k)
    }

    pub(super) fn is_arterial(&self, k: usize) -> bool {
        matches!(self.class[k], RoadClass::Primary | RoadClass::Secondary)
    }

    /// Index of the street nearest to coordinate `v`.
    pub(super) fn nearest(&self, v: f64) -> usize {
        let k = self.pos.partition_point(|&p| p < v);
        if k == 0 {
            0
        } else if k == self.len() || (v - self.pos[k - 1]) < (self.pos[k] - v) {
            k - 1
        } else {
            k
        }
    }
}

/// Lattice node count for downtown `3m+1` streets and `oc` / `or` outer
/// streets per side (columns / rows): downtown cells plus through×through
/// cells, minus the through×through cells already inside downtown.
pub(super) fn lattice_count(m: usize, oc: usize, or: usize) -> usize {
    let d = 3 * m + 1;
    let (tdc, tdr) = (m + 1, m + 2); // rows have the extra embankment street
    d * d + (tdc + 2 * oc) * (tdr + 2 * or) - tdc * tdr
}

/// Chooses `(m, outer_cols, outer_rows)` so the whole city has about `nodes`.
pub(super) fn plan(nodes: usize) -> (usize, usize, usize) {
    let n = nodes as f64;
    let m = ((((DOWNTOWN_SHARE * n).sqrt() - 1.0) / 3.0).round() as usize).max(2);
    // Nodes outside the lattice: spurs, stubs and ring interchanges.
    let ring_est = {
        let r = 1.5 * 100.0 * m as f64 + RING_MARGIN_M;
        (2.0 * std::f64::consts::PI * r / INTERCHANGE_SPACING_M).max(6.0)
    };
    let target = n * (1.0 - CUL_DE_SAC_SHARE - STUB_SHARE) - ring_est;
    let (tdc, tdr) = ((m + 1) as f64, (m + 2) as f64);
    let d = (3 * m + 1) as f64;
    // (tdc + s)(tdr + s) = target - d² + tdc·tdr, with s = 2·outer.
    let x = (target - d * d + tdc * tdr).max(0.0);
    let s = (-(tdc + tdr)
        + ((tdc + tdr).powi(2) - 4.0 * (tdc * tdr - x))
            .max(0.0)
            .sqrt())
        / 2.0;
    let o0 = (s / 2.0).round() as usize;
    let mut best = (usize::MAX, 4, 4);
    for oc in o0.saturating_sub(2).max(4)..=o0.max(4) + 2 {
        for or in [oc, oc + 1] {
            let err = lattice_count(m, oc, or).abs_diff(target.max(0.0) as usize);
            if err < best.0 {
                best = (err, oc, or);
            }
        }
    }
    (m, best.1, best.2)
}

pub(super) fn to_latlon(x: f64, y: f64) -> LatLon {
    let m_per_deg_lon = M_PER_DEG * CITY_CENTER.lat.to_radians().cos();
    LatLon::new(
        CITY_CENTER.lat + y / M_PER_DEG,
        CITY_CENTER.lon + x / m_per_deg_lon,
    )
}

/// One block of the lattice, from its west (or south) end `a` to `b`.
#[derive(Clone, Copy)]
pub(super) struct Block {
    pub(super) a: u32,
    pub(super) b: u32,
    pub(super) horizontal: bool,
    /// Street index on the axis it runs along (row for horizontal blocks).
    pub(super) street: usize,
    /// Cell of `a`.
    pub(super) ai: usize,
    pub(super) aj: usize,
    /// Cell of `b`.
    pub(super) bi: usize,
    pub(super) bj: usize,
    /// This vertical block would cross the river.
    pub(super) over_river: bool,
}

pub(super) struct Lattice {
    pub(super) cols: Axis,
    pub(super) rows: Axis,
    /// Node id of each cell `j * cols + i`, or [`NONE`].
    pub(super) cell: Vec<u32>,
}

impl Lattice {
    pub(super) fn at(&self, i: usize, j: usize) -> u32 {
        self.cell[j * self.cols.len() + i]
    }

    pub(super) fn downtown_cell(&self, i: usize, j: usize) -> bool {
        self.cols.in_downtown(i) && self.rows.in_downtown(j)
    }

    /// Calls `f` for every block: consecutive existing cells along each row,
    /// then along each column.
    pub(super) fn for_each_block(&self, mut f: impl FnMut(Block)) {
        let (nc, nr) = (self.cols.len(), self.rows.len());
        for j in 0..nr {
            let mut prev: Option<usize> = None;
            for i in 0..nc {
                let id = self.at(i, j);
                if id == NONE {
                    continue;
                }
                if let Some(pi) = prev {
                    f(Block {
                        a: self.at(pi, j),
                        b: id,
                        horizontal: true,
                        street: j,
                        ai: pi,
                        aj: j,
                        bi: i,
                        bj: j,
                        over_river: false,
                    });
                }
                prev = Some(i);
            }
        }
        let river = self.rows.river;
        for i in 0..nc {
            let mut prev: Option<usize> = None;
            for j in 0..nr {
                let id = self.at(i, j);
                if id == NONE {
                    continue;
                }
                if let Some(pj) = prev {
                    f(Block {
                        a: self.at(i, pj),
                        b: id,
                        horizontal: false,
                        street: i,
                        ai: i,
                        aj: pj,
                        bi: i,
                        bj: j,
                        over_river: river == Some(pj),
                    });
                }
                prev = Some(j);
            }
        }
    }

    pub(super) fn axis_of(&self, blk: &Block) -> &Axis {
        if blk.horizontal {
            &self.rows
        } else {
            &self.cols
        }
    }

    /// Outer two-way residential block: may be missing or bent.
    pub(super) fn is_plain_outer(&self, blk: &Block) -> bool {
        let ax = self.axis_of(blk);
        !blk.over_river
            && ax.class[blk.street] == RoadClass::Residential
            && ax.oneway[blk.street] == 0
            && !self.downtown_cell(blk.ai, blk.aj)
            && !self.downtown_cell(blk.bi, blk.bj)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    #[test]
    fn plan_count_matches_lattice() {
        // The analytic count must match the cells the generator creates.
        for n in [0usize, 10, 2_000, 50_000] {
            let (m, oc, or) = plan(n);
            let mut rng = ChaCha8Rng::seed_from_u64(1);
            let cols = Axis::new(m, oc, false, &mut rng);
            let rows = Axis::new(m, or, true, &mut rng);
            let mut cells = 0;
            for j in 0..rows.len() {
                for i in 0..cols.len() {
                    if (cols.in_downtown(i) && rows.in_downtown(j))
                        || (cols.through[i] && rows.through[j])
                    {
                        cells += 1;
                    }
                }
            }
            assert_eq!(cells, lattice_count(m, oc, or), "n = {n}");
        }
    }
}
