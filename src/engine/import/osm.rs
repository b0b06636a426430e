//! OpenStreetMap PBF import: the drivable roads of an extract → [`RoadGraph`].
//!
//! Two passes over the file, both with the `osmpbf` reader:
//!
//! 1. **Ways.** Each way goes through the car rules of [`super::osm_tags`]
//!    (class, access, direction, speed). Kept ways store their node
//!    references (as dense indices) and every referenced node is counted.
//! 2. **Nodes.** Coordinates are read for the referenced nodes only (plain
//!    `Node` and `DenseNode` alike).
//!
//! Then the graph is built: a node becomes a graph node when it ends a way or
//! is referenced more than once (by two ways, or twice by one); the stretch of
//! a way between consecutive graph nodes becomes one edge whose interior
//! points are its shape. A one-way way gives one directed edge per stretch, a
//! two-way way two mirrored edges (which [`GraphBuilder::finish`] pairs as
//! twins).
//!
//! Clipped extracts reference nodes that lie outside the extract. Such a node
//! splits its way: the segments touching it are dropped and its present
//! neighbours become graph nodes (dead ends at the border). These are counted
//! in [`OsmImportStats`], never an error.
//!
//! The largest strongly connected component is *not* taken here; the caller
//! decides (see [`RoadGraph::keep_largest_scc`]).
//!
//! Bad input is an [`ImportError`] naming the file; the reader is also run
//! under `catch_unwind`, because `osmpbf` does unchecked delta arithmetic that
//! can overflow (and so panic in builds with overflow checks) on crafted
//! input. That guard needs the default `panic = "unwind"` strategy.

use super::osm_tags::{car_way, Direction, TagView};
use super::ImportError;
use crate::geo::LatLon;
use crate::graph::{EdgeSpec, GraphBuilder, RoadClass, RoadGraph, NONE};
use osmpbf::{BlobDecode, BlobReader, HeaderBlock, PrimitiveBlock};
use std::collections::HashMap;
use std::fs::File;
use std::hash::{BuildHasherDefault, Hasher};
use std::io::{BufReader, Read};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::Path;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Arc;

/// Reads the drivable road graph of an OpenStreetMap PBF extract.
pub fn read_pbf(path: &Path) -> Result<RoadGraph, ImportError> {
    read_pbf_with_progress(path, &mut |_| {}).map(|(g, _)| g)
}

/// [`read_pbf`] with a progress callback and import statistics.
///
/// `progress` is called after every file block with the number of bytes
/// processed so far, summed over both passes: the total is twice the file's
/// length (the node pass may finish early, in which case the last call jumps
/// to the total).
pub fn read_pbf_with_progress(
    path: &Path,
    progress: &mut dyn FnMut(u64),
) -> Result<(RoadGraph, OsmImportStats), ImportError> {
    let meta = std::fs::metadata(path).map_err(|e| ImportError::io(path, e))?;
    if !meta.is_file() {
        return Err(ImportError::io(
            path,
            std::io::Error::new(std::io::ErrorKind::InvalidInput, "not a regular file"),
        ));
    }
    let len = meta.len();
    if len == 0 {
        return Err(ImportError::invalid(
            path,
            "the file is empty; expected an OpenStreetMap PBF extract",
        ));
    }
    let mut asm = OsmAssembler::new();
    scan(path, Pass::Ways, &mut asm, 0, progress)?;
    // Without a kept way there is nothing to look up; skip the node pass.
    if !asm.ways.is_empty() {
        scan(path, Pass::Nodes, &mut asm, len, progress)?;
    }
    progress(2 * len);
    asm.finish(path)
}

/// What an import kept and what it had to leave out.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct OsmImportStats {
    /// Ways in the file (all kinds, not only roads).
    pub ways_seen: u64,
    /// Ways that passed the car rules (drivable, accessible, ≥ 2 nodes).
    pub ways_kept: u64,
    /// Distinct nodes referenced by kept ways.
    pub nodes_referenced: u64,
    /// Referenced nodes absent from the extract (or with invalid
    /// coordinates): the border of a clipped extract.
    pub nodes_missing: u64,
    /// Kept ways that lost at least one segment to a missing node.
    pub ways_clipped: u64,
    /// Graph size as built (before any strongly-connected-component step).
    pub graph_nodes: u64,
    pub graph_edges: u64,
}

/// Which elements a pass over the file looks at.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Pass {
    Ways,
    Nodes,
}

/// Features a reader must understand to read a file (OpenStreetMap wiki,
/// PBF Format, "required_features"); a file that requires anything else is
/// rejected rather than misread.
const KNOWN_REQUIRED_FEATURES: &[&str] = &["OsmSchema-V0.6", "DenseNodes"];

/// One pass over the file's blocks.
fn scan(
    path: &Path,
    pass: Pass,
    asm: &mut OsmAssembler,
    progress_base: u64,
    progress: &mut dyn FnMut(u64),
) -> Result<(), ImportError> {
    let file = File::open(path).map_err(|e| ImportError::io(path, e))?;
    let consumed = Arc::new(AtomicU64::new(0));
    let mut blobs = BlobReader::new(CountingReader {
        inner: BufReader::with_capacity(1 << 16, file),
        consumed: Arc::clone(&consumed),
    });
    let mut index = 0usize;
    loop {
        let next = guarded(path, || blobs.next())?;
        let Some(blob) = next else { break };
        let blob = blob.map_err(|e| pbf_error(path, e))?;
        let decoded = guarded(path, || blob.decode())?.map_err(|e| pbf_error(path, e))?;
        match decoded {
            BlobDecode::OsmHeader(header) => {
                if index != 0 {
                    return Err(ImportError::invalid(
                        path,
                        format!("block {index} is a second OSMHeader block"),
                    ));
                }
                if pass == Pass::Ways {
                    check_header(path, &header)?;
                }
            }
            BlobDecode::OsmData(block) => {
                if index == 0 {
                    return Err(ImportError::invalid(
                        path,
                        "the first block is not an OSMHeader block; not an OpenStreetMap PBF file",
                    ));
                }
                guarded(path, || match pass {
                    Pass::Ways => asm.read_ways(&block),
                    Pass::Nodes => asm.read_nodes(&block),
                })?;
            }
            // The format allows block types a reader does not know; skip
            // them, but a file must still start with its header.
            BlobDecode::Unknown(kind) => {
                if index == 0 {
                    return Err(ImportError::invalid(
                        path,
                        format!("the first block has type {kind:?}, expected OSMHeader; not an OpenStreetMap PBF file"),
                    ));
                }
            }
        }
        index += 1;
        progress(progress_base + consumed.load(Ordering::Relaxed));
        if pass == Pass::Nodes && asm.all_nodes_found() {
            break;
        }
    }
    if index == 0 {
        return Err(ImportError::invalid(
            path,
            "no complete block in the file; not an OpenStreetMap PBF file",
        ));
    }
    Ok(())
}

fn check_header(path: &Path, header: &HeaderBlock) -> Result<(), ImportError> {
    if let Some(f) = header
        .required_features()
        .iter()
        .find(|f| !KNOWN_REQUIRED_FEATURES.contains(&f.as_str()))
    {
        return Err(ImportError::invalid(
            path,
            format!("the file requires the unsupported PBF feature {f:?}"),
        ));
    }
    Ok(())
}

fn pbf_error(path: &Path, e: osmpbf::Error) -> ImportError {
    let msg = format!("not a readable OpenStreetMap PBF file: {e}");
    match e.into_kind() {
        osmpbf::ErrorKind::Io(io) => ImportError::io(path, io),
        _ => ImportError::invalid(path, msg),
    }
}

/// Runs `f`, turning a panic inside the PBF reader into an error.
fn guarded<T>(path: &Path, f: impl FnOnce() -> T) -> Result<T, ImportError> {
    catch_unwind(AssertUnwindSafe(f)).map_err(|payload| {
        let msg = payload
            .downcast_ref::<&str>()
            .map(|s| s.to_string())
            .or_else(|| payload.downcast_ref::<String>().cloned())
            .unwrap_or_else(|| "unknown panic".to_string());
        ImportError::invalid(
            path,
            format!("the PBF decoder failed on malformed data: {msg}"),
        )
    })
}

/// Counts the bytes the blob reader consumes, for progress reports.
struct CountingReader<R> {
    inner: R,
    consumed: Arc<AtomicU64>,
}

impl<R: Read> Read for CountingReader<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.consumed.fetch_add(n as u64, Ordering::Relaxed);
        Ok(n)
    }
}

/// Hasher for OSM ids: a multiplicative hash folded so that both the high
/// bits (hashbrown's tag) and the low bits (its bucket index) depend on the
/// whole id. SipHash's flooding resistance buys nothing for ids read from a
/// file the caller chose, and costs a lot over millions of lookups.
#[derive(Default)]
struct IdHasher(u64);

impl Hasher for IdHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.write_u64(u64::from(b) ^ self.0.rotate_left(8));
        }
    }
    fn write_u64(&mut self, v: u64) {
        let x = v.wrapping_mul(0x9E37_79B9_7F4A_7C15);
        self.0 = x ^ (x >> 29);
    }
    fn write_i64(&mut self, v: i64) {
        self.write_u64(v as u64);
    }
}

type IdMap<V> = HashMap<i64, V, BuildHasherDefault<IdHasher>>;

/// A kept way: its rule verdict and its node references.
#[derive(Debug, Clone, Copy)]
struct WayRec {
    id: i64,
    class: RoadClass,
    direction: Direction,
    speed_forward_kmh: f32,
    speed_backward_kmh: f32,
    /// `refs[first..first + len]` are the way's nodes (dense indices).
    first: u32,
    len: u32,
}

/// Placeholder coordinate of a node not (yet) seen in the file.
const MISSING: LatLon = LatLon::new(f64::NAN, f64::NAN);

/// Builds a graph from OSM elements, independent of the file format.
///
/// [`read_pbf`] feeds it from a PBF file; tests (and other sources of OSM
/// elements) can feed it directly. Contract: all ways first
/// ([`add_way`](Self::add_way)), then nodes ([`add_node`](Self::add_node)),
/// then [`finish`](Self::finish). A node given before the way that needs it
/// is ignored, exactly as a node missing from the extract.
///
/// OSM ids become `way_id` / `node_ext` by `as u64`; the negative ids of
/// not-yet-uploaded editor data would wrap, which keeps them distinct.
#[derive(Debug, Default)]
pub struct OsmAssembler {
    /// OSM node id → dense index into the per-node arrays below.
    index: IdMap<u32>,
    /// Per dense node: OSM id (becomes `node_ext`).
    node_id: Vec<i64>,
    /// Per dense node: references from kept ways, saturating at 2; way
    /// endpoints are set to 2. A value of 2 means "graph node".
    uses: Vec<u8>,
    /// Per dense node: coordinates, [`MISSING`] until seen.
    pos: Vec<LatLon>,
    /// Dense nodes with coordinates so far (to stop the node pass early).
    found: usize,
    ways: Vec<WayRec>,
    refs: Vec<u32>,
    ways_seen: u64,
}

impl OsmAssembler {
    pub fn new() -> Self {
        Self::default()
    }

    /// Offers one way. Returns whether it was kept (drivable by the car
    /// rules, with at least two distinct consecutive nodes).
    pub fn add_way<'t>(
        &mut self,
        id: i64,
        tags: impl IntoIterator<Item = (&'t str, &'t str)>,
        node_refs: impl IntoIterator<Item = i64>,
    ) -> bool {
        self.ways_seen += 1;
        let tags = TagView::from_pairs(tags);
        let Some(rule) = car_way(&tags) else {
            return false;
        };
        let first = self.refs.len();
        for r in node_refs {
            let next = self.node_id.len() as u32;
            let i = *self.index.entry(r).or_insert(next);
            if i == next {
                self.node_id.push(r);
                self.uses.push(0);
                self.pos.push(MISSING);
            }
            // A node repeated back to back is a zero-length segment.
            if self.refs.len() > first && self.refs[self.refs.len() - 1] == i {
                continue;
            }
            self.refs.push(i);
        }
        let len = self.refs.len() - first;
        if len < 2 {
            self.refs.truncate(first);
            return false;
        }
        for &i in &self.refs[first..] {
            let u = &mut self.uses[i as usize];
            *u = u.saturating_add(1).min(2);
        }
        self.uses[self.refs[first] as usize] = 2;
        self.uses[self.refs[first + len - 1] as usize] = 2;
        self.ways.push(WayRec {
            id,
            class: rule.class,
            direction: rule.direction,
            speed_forward_kmh: rule.speed_forward_kmh,
            speed_backward_kmh: rule.speed_backward_kmh,
            first: first as u32,
            len: len as u32,
        });
        true
    }

    /// Whether a kept way references this node.
    pub fn wants_node(&self, id: i64) -> bool {
        self.index.contains_key(&id)
    }

    /// Gives a node's coordinates (ignored unless a kept way references it;
    /// invalid coordinates count as missing).
    pub fn add_node(&mut self, id: i64, pos: LatLon) {
        if let Some(&i) = self.index.get(&id) {
            let slot = &mut self.pos[i as usize];
            if pos.is_valid() {
                if slot.lat.is_nan() {
                    self.found += 1;
                }
                *slot = pos;
            }
        }
    }

    /// True once every referenced node has coordinates.
    pub fn all_nodes_found(&self) -> bool {
        !self.node_id.is_empty() && self.found == self.node_id.len()
    }

    fn read_ways(&mut self, block: &PrimitiveBlock) {
        for group in block.groups() {
            for way in group.ways() {
                self.add_way(way.id(), way.tags(), way.refs());
            }
        }
    }

    fn read_nodes(&mut self, block: &PrimitiveBlock) {
        if self.node_id.is_empty() {
            return;
        }
        for group in block.groups() {
            for n in group.nodes() {
                self.add_node(n.id(), LatLon::new(n.lat(), n.lon()));
            }
            for n in group.dense_nodes() {
                self.add_node(n.id(), LatLon::new(n.lat(), n.lon()));
            }
        }
    }

    /// Builds the graph. `path` names the source in errors:
    /// [`ImportError::NoRoads`] when no way was kept or none of them has a
    /// segment with both ends present.
    pub fn finish(self, path: &Path) -> Result<(RoadGraph, OsmImportStats), ImportError> {
        let no_roads = || ImportError::NoRoads {
            path: path.to_path_buf(),
        };
        if self.ways.is_empty() {
            return Err(no_roads());
        }
        let present = |i: u32| !self.pos[i as usize].lat.is_nan();
        let referenced = self.node_id.len();
        let graph_like = self.uses.iter().filter(|&&u| u >= 2).count();
        let mut b = Emitter {
            builder: GraphBuilder::with_capacity(graph_like, 2 * self.refs.len()),
            graph_id: vec![NONE; referenced],
            node_id: &self.node_id,
            pos: &self.pos,
            shape: Vec::new(),
            reversed: Vec::new(),
        };
        let mut ways_clipped = 0u64;
        // Dense indices of the interior points of the current stretch.
        let mut interior: Vec<u32> = Vec::new();
        for w in &self.ways {
            let r = &self.refs[w.first as usize..(w.first + w.len) as usize];
            let mut tail: Option<u32> = None;
            let mut clipped = false;
            interior.clear();
            for (k, &n) in r.iter().enumerate() {
                if !present(n) {
                    // Drop the stretch in progress: it touches a node the
                    // extract does not have.
                    clipped = true;
                    tail = None;
                    interior.clear();
                    continue;
                }
                let border =
                    (k > 0 && !present(r[k - 1])) || (k + 1 < r.len() && !present(r[k + 1]));
                let boundary = self.uses[n as usize] >= 2 || border;
                match tail {
                    None => {
                        // Only reached at a way's start or just after a
                        // missing node, both of which are boundaries.
                        if boundary {
                            tail = Some(n);
                        }
                        interior.clear();
                    }
                    Some(t) if boundary => {
                        b.stretch(w, t, &interior, n);
                        tail = Some(n);
                        interior.clear();
                    }
                    Some(_) => interior.push(n),
                }
            }
            ways_clipped += u64::from(clipped);
        }
        let nodes_missing = (0..referenced as u32).filter(|&i| !present(i)).count() as u64;
        let graph = b.builder.finish();
        if graph.num_edges() == 0 {
            return Err(no_roads());
        }
        let stats = OsmImportStats {
            ways_seen: self.ways_seen,
            ways_kept: self.ways.len() as u64,
            nodes_referenced: referenced as u64,
            nodes_missing,
            ways_clipped,
            graph_nodes: graph.num_nodes() as u64,
            graph_edges: graph.num_edges() as u64,
        };
        Ok((graph, stats))
    }
}

/// Turns stretches of ways into builder edges.
struct Emitter<'a> {
    builder: GraphBuilder,
    /// Dense node → graph node, assigned on first use.
    graph_id: Vec<u32>,
    node_id: &'a [i64],
    pos: &'a [LatLon],
    /// Reused shape buffers (tail→head and reversed).
    shape: Vec<LatLon>,
    reversed: Vec<LatLon>,
}

impl Emitter<'_> {
    fn graph_node(&mut self, dense: u32) -> u32 {
        let g = &mut self.graph_id[dense as usize];
        if *g == NONE {
            *g = self.builder.add_node(
                self.pos[dense as usize],
                self.node_id[dense as usize] as u64,
            );
        }
        *g
    }

    /// Emits the stretch `tail → interior… → head` of way `w`.
    fn stretch(&mut self, w: &WayRec, tail: u32, interior: &[u32], head: u32) {
        if tail == head {
            // A closed loop with a single graph node (a turning circle drawn
            // as a ring, an isolated roundabout) would be a self-loop, which
            // the builder drops; split it at its middle point instead so the
            // road stays in the graph.
            if interior.is_empty() {
                return;
            }
            let m = interior.len() / 2;
            self.stretch(w, tail, &interior[..m], interior[m]);
            self.stretch(w, interior[m], &interior[m + 1..], head);
            return;
        }
        let t = self.graph_node(tail);
        let h = self.graph_node(head);
        self.shape.clear();
        self.shape
            .extend(interior.iter().map(|&i| self.pos[i as usize]));
        let way_id = w.id as u64;
        if w.direction != Direction::Backward {
            self.builder.add_edge(EdgeSpec {
                tail: t,
                head: h,
                length_m: None,
                speed_kmh: w.speed_forward_kmh,
                way_id,
                class: w.class,
                shape: &self.shape,
            });
        }
        if w.direction != Direction::Forward {
            self.reversed.clear();
            self.reversed.extend(self.shape.iter().rev().copied());
            self.builder.add_edge(EdgeSpec {
                tail: h,
                head: t,
                length_m: None,
                speed_kmh: w.speed_backward_kmh,
                way_id,
                class: w.class,
                shape: &self.reversed,
            });
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const RES: &[(&str, &str)] = &[("highway", "residential")];
    const ONEWAY: &[(&str, &str)] = &[("highway", "residential"), ("oneway", "yes")];
    const BACK: &[(&str, &str)] = &[("highway", "residential"), ("oneway", "-1")];

    fn p(i: i64) -> LatLon {
        LatLon::new(60.0 + i as f64 * 1e-3, 25.0 + (i % 3) as f64 * 1e-3)
    }

    /// A literal way: id, tags, node refs.
    type LitWay<'a> = (i64, &'a [(&'a str, &'a str)], &'a [i64]);

    fn build(ways: &[LitWay<'_>], nodes: &[i64]) -> (RoadGraph, OsmImportStats) {
        let mut a = OsmAssembler::new();
        for &(id, tags, refs) in ways {
            a.add_way(id, tags.iter().copied(), refs.iter().copied());
        }
        for &n in nodes {
            a.add_node(n, p(n));
        }
        a.finish(Path::new("literal")).unwrap()
    }

    fn ext_edges(g: &RoadGraph) -> Vec<(u64, u64, u64, usize)> {
        let mut v: Vec<_> = (0..g.num_edges())
            .map(|e| {
                (
                    g.edge_way[e],
                    g.node_ext[g.edge_tail[e] as usize],
                    g.node_ext[g.edge_head[e] as usize],
                    g.edge_interior(e as u32).len(),
                )
            })
            .collect();
        v.sort();
        v
    }

    #[test]
    fn crossing_ways_split_at_the_shared_node() {
        // Way 1: 1-2-3-4-5, way 2: 6-3-7. Node 3 is shared.
        let (g, s) = build(
            &[(1, ONEWAY, &[1, 2, 3, 4, 5]), (2, RES, &[6, 3, 7])],
            &[1, 2, 3, 4, 5, 6, 7],
        );
        assert_eq!(
            ext_edges(&g),
            vec![
                (1, 1, 3, 1),
                (1, 3, 5, 1),
                (2, 3, 6, 0),
                (2, 3, 7, 0),
                (2, 6, 3, 0),
                (2, 7, 3, 0),
            ]
        );
        assert_eq!(g.num_nodes(), 5);
        assert_eq!(s.ways_kept, 2);
        assert_eq!(s.nodes_missing, 0);
        // Two-way edges are twins, one-way edges are not.
        for e in 0..g.num_edges() {
            assert_eq!(g.edge_twin[e] != NONE, g.edge_way[e] == 2);
        }
    }

    #[test]
    fn backward_way_reverses_shape() {
        let (g, _) = build(&[(9, BACK, &[1, 2, 3])], &[1, 2, 3]);
        assert_eq!(ext_edges(&g), vec![(9, 3, 1, 1)]);
        assert_eq!(g.edge_polyline(0), vec![p(3), p(2), p(1)]);
    }

    #[test]
    fn missing_node_drops_touching_segments() {
        // Node 3 is not in the extract: segments 2-3 and 3-4 go, 2 and 4
        // become dead ends.
        let (g, s) = build(&[(1, RES, &[1, 2, 3, 4, 5])], &[1, 2, 4, 5]);
        assert_eq!(
            ext_edges(&g),
            vec![(1, 1, 2, 0), (1, 2, 1, 0), (1, 4, 5, 0), (1, 5, 4, 0)]
        );
        assert_eq!((s.nodes_missing, s.ways_clipped), (1, 1));
    }

    #[test]
    fn closed_loop_is_split_not_dropped() {
        // A ring 1-2-3-4-1 attached to the rest only at node 1.
        let (g, _) = build(
            &[(1, ONEWAY, &[1, 2, 3, 4, 1]), (2, RES, &[1, 5])],
            &[1, 2, 3, 4, 5],
        );
        let ring: Vec<_> = ext_edges(&g).into_iter().filter(|e| e.0 == 1).collect();
        assert_eq!(ring, vec![(1, 1, 3, 1), (1, 3, 1, 1)]);
    }

    #[test]
    fn duplicate_consecutive_refs_and_short_ways() {
        let (g, s) = build(
            &[(1, RES, &[1, 1, 2, 2]), (2, RES, &[3, 3]), (3, RES, &[4])],
            &[1, 2, 3, 4],
        );
        assert_eq!(ext_edges(&g), vec![(1, 1, 2, 0), (1, 2, 1, 0)]);
        assert_eq!(s.ways_kept, 1);
    }

    #[test]
    fn no_roads_when_nothing_drivable() {
        let mut a = OsmAssembler::new();
        assert!(!a.add_way(1, [("highway", "footway")], [1, 2]));
        assert!(!a.add_way(2, [("highway", "track")], [2, 3]));
        a.add_node(1, p(1));
        let err = a.finish(Path::new("paths-only.osm.pbf")).unwrap_err();
        assert!(matches!(err, ImportError::NoRoads { .. }));
        assert!(err.to_string().contains("paths-only.osm.pbf"));
    }

    #[test]
    fn no_roads_when_all_nodes_missing() {
        let mut a = OsmAssembler::new();
        assert!(a.add_way(1, RES.iter().copied(), [1, 2]));
        a.add_node(1, LatLon::new(f64::NAN, 0.0));
        let err = a.finish(Path::new("x.pbf")).unwrap_err();
        assert!(matches!(err, ImportError::NoRoads { .. }));
    }

    #[test]
    fn id_hasher_spreads_strided_ids() {
        use std::hash::BuildHasher;
        let h = BuildHasherDefault::<IdHasher>::default();
        let mut low: std::collections::HashSet<u64> = Default::default();
        for i in 0..1024i64 {
            low.insert(h.hash_one(i << 20) & 1023);
        }
        assert!(low.len() > 500, "{}", low.len());
    }
}
