//! The encoding of a hierarchy arc's weight and origin, shared by the
//! customization that writes them and everything that reads them (queries,
//! per-class times, matrices): the "no path" weight, the largest edge
//! weight, and the `via` markers of an arc's middle.

/// Weight of an arc with no path (one-way pair, or a pure fill-in arc that
/// no triangle improves). Sums of two stay below `u32::MAX`.
pub const INFINITY: u32 = u32::MAX / 2;

/// Largest accepted edge weight; larger ones are clamped to it.
pub const MAX_EDGE_WEIGHT: u32 = INFINITY / 4;

/// `via` value meaning "this weight is a road edge", OR-ed with the edge id.
pub(crate) const VIA_EDGE: u32 = 1 << 31;
/// `via` value meaning "no path".
pub(crate) const VIA_NONE: u32 = u32::MAX;
