//! Segment naming: how a speed-table row names the segments it sets.
//!
//! A *segment* is a directed edge of the artifact's graph, and its id is the
//! edge id. A row ([`SegmentKey`]) names segments in one of two ways:
//!
//! - `segment`: the id itself, one segment, looked up directly.
//! - `tail` + `head`: the external ids of its end nodes
//!   ([`RoadGraph::node_ext`]). Several segments may share both ends
//!   (parallel roads, two ways between the same intersections); the row
//!   applies to all of them, or, when it also gives `way`, to those of them
//!   on that way ([`RoadGraph::edge_way`]).
//!
//! A row must give `segment` or both `tail` and `head`. When it gives
//! `segment` together with `way`, `tail` or `head`, each must agree with
//! that segment, else the row is refused as
//! [`ErrorKind::SegmentMismatch`]: a table whose ids and names disagree
//! was most likely made for another build of the map. [`EdgeIndex::resolve`]
//! applies these rules for both tables.
//!
//! Built once per graph and held for the life of a region, so it is laid out
//! for size (about 24 bytes per edge, 4 of them the way check, 12 per node and
//! 8 per distinct way; a hash map of pairs
//! was twice that): the distinct external node ids, sorted, are the
//! *groups*; edges are stored grouped by their tail's group and, within it,
//! sorted by their head's group (a CSR over external ids). An
//! open-addressing hash table maps an external id to its group in one or
//! two cache misses, where a binary search over ~10⁵ ids is about twenty: a
//! million-row table spends most of its parse time in lookups. Two nodes
//! with the same external id share one group, so their edges answer to the
//! same name.

use super::report::ErrorKind;
use hodos_engine::graph::{RoadGraph, NONE};

/// Lookup from external end ids to edge ids.
#[derive(Debug, Clone, Default)]
pub struct EdgeIndex {
    /// Distinct external node ids, ascending; a position is a group.
    exts: Vec<u64>,
    /// Hash table (linear probing, load ≤ 2/3): group of an external id, or
    /// [`NONE`]; the length is a power of two.
    table: Vec<u32>,
    /// `out[first[g]..first[g + 1]]`: edges whose tail is in group `g`,
    /// ordered by head group, then edge id.
    first: Vec<u32>,
    out: Vec<u32>,
    /// Head group of each `out` entry (what lookups compare).
    out_head: Vec<u32>,
    /// Position of each edge in `out`, for the reverse direction (saving
    /// live data by name rather than by id).
    pos_of_edge: Vec<u32>,
    /// Distinct way ids, ascending, and each edge's position in it: a row's
    /// `way` is checked against its segments with one comparison, for 4
    /// bytes per edge instead of a copy of the graph's 8-byte way ids.
    ways: Vec<u64>,
    way_of_edge: Vec<u32>,
}

/// How one row names its segments; `None` = the column is absent or the
/// cell is empty.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct SegmentKey {
    /// Segment (edge) id in the artifact.
    pub segment: Option<u64>,
    /// Way id ([`RoadGraph::edge_way`]): checks a segment, narrows ends.
    pub way: Option<u64>,
    /// External id of the tail node.
    pub tail: Option<u64>,
    /// External id of the head node.
    pub head: Option<u64>,
}

impl SegmentKey {
    /// The key of a row naming a segment by id alone.
    pub fn segment(segment: u64) -> Self {
        SegmentKey {
            segment: Some(segment),
            ..Default::default()
        }
    }

    /// The key of a row naming segments by their end nodes alone.
    pub fn ends(tail: u64, head: u64) -> Self {
        SegmentKey {
            tail: Some(tail),
            head: Some(head),
            ..Default::default()
        }
    }

    /// True when the key can name a segment: `segment`, or `tail` and `head`.
    pub fn is_complete(&self) -> bool {
        self.segment.is_some() || (self.tail.is_some() && self.head.is_some())
    }
}

/// The rule text of an incomplete key, shared by both tables' reports.
pub(crate) const INCOMPLETE_KEY: &str = "a row names `segment`, or both `tail` and `head`";

/// Why a key names no segment. Kept as data so a report builds messages
/// only for the rows it shows.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Refusal {
    /// Neither `segment` nor both `tail` and `head`.
    Incomplete,
    /// `segment` is not below the number of segments.
    NoSuchSegment { segment: u64, segments: usize },
    /// No segment has these ends (on this way, when given).
    NoSegmentWithEnds {
        tail: u64,
        head: u64,
        way: Option<u64>,
    },
    /// `segment` and a name (`what` = `tail`, `head` or `way`) disagree.
    Mismatch {
        segment: u64,
        what: &'static str,
        given: u64,
        actual: u64,
    },
}

impl Refusal {
    /// The report kind of this refusal.
    pub fn kind(&self) -> ErrorKind {
        match self {
            Refusal::Incomplete => ErrorKind::MalformedRow,
            Refusal::NoSuchSegment { .. } | Refusal::NoSegmentWithEnds { .. } => {
                ErrorKind::UnknownEdge
            }
            Refusal::Mismatch { .. } => ErrorKind::SegmentMismatch,
        }
    }

    /// The report message.
    pub fn message(&self) -> String {
        match *self {
            Refusal::Incomplete => INCOMPLETE_KEY.to_string(),
            Refusal::NoSuchSegment { segment, segments } => {
                format!("no segment {segment}: the map has segments 0..{segments}")
            }
            Refusal::NoSegmentWithEnds {
                tail,
                head,
                way: None,
            } => format!("no segment from node {tail} to node {head}"),
            Refusal::NoSegmentWithEnds {
                tail,
                head,
                way: Some(w),
            } => format!("no segment from node {tail} to node {head} on way {w}"),
            Refusal::Mismatch {
                segment,
                what,
                given,
                actual,
            } => format!("segment {segment} has {what} {actual}, the row gives {what} {given}"),
        }
    }
}

/// The segments one key names: ascending ids, all with the same ends.
#[derive(Debug, Clone, Copy)]
pub struct Named<'a> {
    edges: &'a [u32],
    /// Keep only the edges on this way (position in `ways`); `None`: all.
    way: Option<u32>,
    way_of_edge: &'a [u32],
}

impl<'a> Named<'a> {
    /// The segment ids.
    pub fn iter(&self) -> impl Iterator<Item = u32> + 'a {
        let (way, way_of_edge) = (self.way, self.way_of_edge);
        self.edges
            .iter()
            .copied()
            .filter(move |&e| way.is_none_or(|w| way_of_edge[e as usize] == w))
    }
}

/// Mixes an external id into a table position (multiply-xorshift with the
/// 64-bit golden-ratio constant and the MurmurHash3 finaliser constant).
/// Keys come from the graph, not from uploads, so no keyed hash is needed.
#[inline]
fn hash(key: u64) -> u64 {
    let h = key.wrapping_mul(0x9E37_79B9_7F4A_7C15);
    let h = (h ^ (h >> 32)).wrapping_mul(0xC4CE_B9FE_1A85_EC53);
    h ^ (h >> 29)
}

impl EdgeIndex {
    pub fn new(g: &RoadGraph) -> Self {
        let m = g.num_edges();
        let mut exts = g.node_ext.clone();
        exts.sort_unstable();
        exts.dedup();
        exts.shrink_to_fit();
        let size = (exts.len() + exts.len() / 2).next_power_of_two().max(2);
        let mut table = vec![NONE; size];
        let mask = size - 1;
        for (grp, &x) in exts.iter().enumerate() {
            let mut i = hash(x) as usize & mask;
            while table[i] != NONE {
                i = (i + 1) & mask;
            }
            table[i] = grp as u32;
        }
        let mut idx = EdgeIndex {
            exts,
            table,
            ..Default::default()
        };
        let group_of_node: Vec<u32> = g
            .node_ext
            .iter()
            .map(|&x| idx.group(x).expect("every node id is in the table"))
            .collect();
        let mut t: Vec<(u32, u32, u32)> = (0..m)
            .map(|e| {
                (
                    group_of_node[g.edge_tail[e] as usize],
                    group_of_node[g.edge_head[e] as usize],
                    e as u32,
                )
            })
            .collect();
        drop(group_of_node);
        t.sort_unstable();
        let groups = idx.exts.len();
        let mut first = vec![0u32; groups + 1];
        for &(tg, _, _) in &t {
            first[tg as usize + 1] += 1;
        }
        for i in 0..groups {
            first[i + 1] += first[i];
        }
        let mut pos_of_edge = vec![0u32; m];
        for (p, &(_, _, e)) in t.iter().enumerate() {
            pos_of_edge[e as usize] = p as u32;
        }
        idx.out = t.iter().map(|&(_, _, e)| e).collect();
        idx.out_head = t.iter().map(|&(_, h, _)| h).collect();
        idx.first = first;
        idx.pos_of_edge = pos_of_edge;
        let mut ways = g.edge_way.clone();
        ways.sort_unstable();
        ways.dedup();
        ways.shrink_to_fit();
        idx.way_of_edge = g
            .edge_way
            .iter()
            .map(|w| ways.binary_search(w).expect("every way id is listed") as u32)
            .collect();
        idx.ways = ways;
        idx
    }

    /// The segments a row names, by the rules in the module docs.
    pub fn resolve(&self, key: &SegmentKey) -> Result<Named<'_>, Refusal> {
        let mut named = Named {
            edges: &[],
            way: None,
            way_of_edge: &self.way_of_edge,
        };
        if let Some(segment) = key.segment {
            let e = match u32::try_from(segment) {
                Ok(e) if (e as usize) < self.out.len() => e,
                _ => {
                    return Err(Refusal::NoSuchSegment {
                        segment,
                        segments: self.out.len(),
                    })
                }
            };
            let p = self.pos_of_edge[e as usize] as usize;
            if key.tail.is_some() || key.head.is_some() {
                let (tail, head) = self.ends(e).expect("id checked above");
                for (what, given, actual) in [("tail", key.tail, tail), ("head", key.head, head)] {
                    match given {
                        Some(given) if given != actual => {
                            return Err(Refusal::Mismatch {
                                segment,
                                what,
                                given,
                                actual,
                            })
                        }
                        _ => {}
                    }
                }
            }
            if let Some(given) = key.way {
                let actual = self.ways[self.way_of_edge[e as usize] as usize];
                if given != actual {
                    return Err(Refusal::Mismatch {
                        segment,
                        what: "way",
                        given,
                        actual,
                    });
                }
            }
            named.edges = &self.out[p..p + 1];
            return Ok(named);
        }
        let (Some(tail), Some(head)) = (key.tail, key.head) else {
            return Err(Refusal::Incomplete);
        };
        let none = Refusal::NoSegmentWithEnds {
            tail,
            head,
            way: key.way,
        };
        named.edges = self.edges(tail, head);
        if let Some(w) = key.way {
            let w = self.ways.binary_search(&w).map_err(|_| none)? as u32;
            if !named
                .edges
                .iter()
                .any(|&e| self.way_of_edge[e as usize] == w)
            {
                return Err(none);
            }
            // All edges on this way: no filter needed.
            if named
                .edges
                .iter()
                .any(|&e| self.way_of_edge[e as usize] != w)
            {
                named.way = Some(w);
            }
        }
        if named.edges.is_empty() {
            return Err(none);
        }
        Ok(named)
    }

    /// The way id of a segment; `None` for an id out of range.
    pub fn way(&self, edge: u32) -> Option<u64> {
        let w = *self.way_of_edge.get(edge as usize)?;
        Some(self.ways[w as usize])
    }

    /// The group of an external node id.
    #[inline]
    fn group(&self, ext: u64) -> Option<u32> {
        if self.table.is_empty() {
            return None;
        }
        let mask = self.table.len() - 1;
        let mut i = hash(ext) as usize & mask;
        loop {
            let grp = self.table[i];
            if grp == NONE {
                return None;
            }
            if self.exts[grp as usize] == ext {
                return Some(grp);
            }
            i = (i + 1) & mask;
        }
    }

    /// Edges of the graph this index was built from.
    pub fn num_edges(&self) -> usize {
        self.out.len()
    }

    /// Edges from external node `from` to external node `to`, ascending;
    /// empty if the graph has none.
    pub fn edges(&self, from: u64, to: u64) -> &[u32] {
        let (Some(tg), Some(hg)) = (self.group(from), self.group(to)) else {
            return &[];
        };
        let (lo, hi) = (
            self.first[tg as usize] as usize,
            self.first[tg as usize + 1] as usize,
        );
        let heads = &self.out_head[lo..hi];
        let a = heads.partition_point(|&h| h < hg);
        let b = a + heads[a..].partition_point(|&h| h == hg);
        &self.out[lo + a..lo + b]
    }

    /// External `(from, to)` node ids of an edge; `None` for an id out of
    /// range.
    pub fn ends(&self, edge: u32) -> Option<(u64, u64)> {
        let p = *self.pos_of_edge.get(edge as usize)?;
        // The tail group is the one whose range holds position p.
        let tg = self.first.partition_point(|&f| f <= p) - 1;
        Some((self.exts[tg], self.exts[self.out_head[p as usize] as usize]))
    }

    /// Every distinct end pair with its edges, in ascending pair order.
    pub fn groups(&self) -> impl Iterator<Item = ((u64, u64), &[u32])> + '_ {
        let mut tg = 0usize;
        let mut i = 0usize;
        std::iter::from_fn(move || {
            if i >= self.out.len() {
                return None;
            }
            while self.first[tg + 1] as usize <= i {
                tg += 1;
            }
            let end = self.first[tg + 1] as usize;
            let hg = self.out_head[i];
            let n = self.out_head[i..end].partition_point(|&h| h == hg);
            let out = ((self.exts[tg], self.exts[hg as usize]), &self.out[i..i + n]);
            i += n;
            Some(out)
        })
    }
}
