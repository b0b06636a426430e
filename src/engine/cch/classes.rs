//! Edge classes: which share of a path's time lies on which kind of edge.
//!
//! A caller may label every road edge with a class `0..CLASSES` (the engine
//! gives the labels no meaning; a service might mark where each edge's speed
//! came from). After customization, [`arc_class_times`] computes, per
//! hierarchy arc and direction, the milliseconds of the arc's path that lie
//! on edges of each class: an arc standing for a road edge carries that
//! edge's weight in the edge's class; a shortcut through middle node `w`
//! carries the sum of its two triangle arcs `(w, x)` and `(w, y)`. Both have
//! lower end `w`, below the shortcut's lower end `x`, so one pass over the
//! arcs in id order (grouped by ascending lower end) sees sub-arcs first.
//! The class times of an arc add up exactly to its weight, so a query that
//! sums them along its arcs (plus the partial first and last edges) gets
//! class times that add up exactly to its answer.
//!
//! Memory: `2 × CLASSES × 4` bytes per arc (24 with three classes), only in
//! metrics built with classes.

use super::arc::{MAX_EDGE_WEIGHT, VIA_EDGE, VIA_NONE};
use super::Cch;

/// Number of edge classes the engine tracks.
pub const CLASSES: usize = 3;

/// Milliseconds per edge class.
pub type ClassTimes = [u32; CLASSES];

/// Adds `b` into `a` (saturating).
#[inline(always)]
pub fn add(a: &mut ClassTimes, b: &ClassTimes) {
    for (x, y) in a.iter_mut().zip(b) {
        *x = x.saturating_add(*y);
    }
}

/// Class times with `ms` in class `class` (an out-of-range class counts as
/// the last one).
#[inline(always)]
pub fn single(class: u8, ms: u32) -> ClassTimes {
    let mut t = [0; CLASSES];
    t[(class as usize).min(CLASSES - 1)] = ms;
    t
}

/// Class times of every arc in both directions, from the `via` arrays of a
/// customization with `weights` and per-edge `classes`.
pub(crate) fn arc_class_times(
    cch: &Cch,
    (up_via, down_via): (&[u32], &[u32]),
    weights: &[u32],
    classes: &[u8],
    (up, down): (&mut Vec<ClassTimes>, &mut Vec<ClassTimes>),
) {
    let m = cch.num_arcs();
    up.clear();
    up.resize(m, [0; CLASSES]);
    down.clear();
    down.resize(m, [0; CLASSES]);
    for x in 0..cch.num_nodes() as u32 {
        for a in cch.arcs(x) {
            let y = cch.head[a];
            up[a] = via_times(cch, up_via[a], (x, y), true, weights, classes, up, down);
            down[a] = via_times(cch, down_via[a], (x, y), false, weights, classes, up, down);
        }
    }
}

/// Class times of arc `x`–`y` in one direction reached through `via`.
#[allow(clippy::too_many_arguments)]
#[inline]
fn via_times(
    cch: &Cch,
    via: u32,
    (x, y): (u32, u32),
    is_up: bool,
    weights: &[u32],
    classes: &[u8],
    up: &[ClassTimes],
    down: &[ClassTimes],
) -> ClassTimes {
    if via == VIA_NONE {
        return [0; CLASSES];
    }
    if via & VIA_EDGE != 0 {
        let e = (via & !VIA_EDGE) as usize;
        return single(classes[e], weights[e].min(MAX_EDGE_WEIGHT));
    }
    let (Some(awx), Some(awy)) = (cch.find_arc(via, x), cch.find_arc(via, y)) else {
        debug_assert!(false, "a triangle's arcs exist");
        return [0; CLASSES];
    };
    // x→y = x→w (down of w–x) + w→y (up of w–y); y→x = y→w + w→x.
    let (awx, awy) = (awx as usize, awy as usize);
    let mut t = if is_up { down[awx] } else { down[awy] };
    add(&mut t, if is_up { &up[awy] } else { &up[awx] });
    t
}
