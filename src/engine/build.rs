//! The build pipeline behind `hodos build`: source → graph → largest strongly
//! connected component → nested-dissection order → contraction → free-flow
//! customization → calibration → [`Artifact`].
//!
//! Progress is reported through the [`Progress`] trait so the library prints
//! nothing; the binary draws progress bars.

use crate::artifact::{Artifact, Metadata};
use crate::calibration::{calibrate, Calibration};
use crate::cch::{Cch, CustomizedMetric};
use crate::geo::LocalProjection;
use crate::graph::RoadGraph;
use crate::import::{self, ImportError};
use crate::order::{nested_dissection, NodeOrder, UndirectedGraph};
use crate::snap::SnapIndex;
use std::path::PathBuf;
use std::time::Instant;

/// What to build from.
#[derive(Debug, Clone, PartialEq)]
pub enum Source {
    Osm(PathBuf),
    Dimacs { gr: PathBuf, co: PathBuf },
    Synthetic { nodes: usize, seed: u64 },
}

impl Source {
    pub fn describe(&self) -> String {
        let name = |p: &PathBuf| {
            p.file_name()
                .map(|f| f.to_string_lossy().into_owned())
                .unwrap_or_default()
        };
        match self {
            Source::Osm(p) => format!("osm:{}", name(p)),
            Source::Dimacs { gr, co } => format!("dimacs:{}+{}", name(gr), name(co)),
            Source::Synthetic { nodes, seed } => format!("synthetic:{nodes}:seed={seed}"),
        }
    }

    /// Reads the source into a road graph (before the SCC filter).
    pub fn import(&self) -> Result<RoadGraph, ImportError> {
        match self {
            Source::Osm(p) => import::osm::read_pbf(p),
            Source::Dimacs { gr, co } => import::dimacs::read(gr, co),
            Source::Synthetic { nodes, seed } => Ok(import::synthetic::generate(*nodes, *seed)),
        }
    }
}

/// Receives progress from long phases.
pub trait Progress {
    /// A phase begins; `total` units if known.
    fn start(&mut self, phase: &str, total: Option<u64>);
    /// Units done so far in the current phase.
    fn advance(&mut self, done: u64);
    /// The current phase ended.
    fn finish(&mut self);
}

/// Progress that goes nowhere (tests, library use).
pub struct Quiet;

impl Progress for Quiet {
    fn start(&mut self, _: &str, _: Option<u64>) {}
    fn advance(&mut self, _: u64) {}
    fn finish(&mut self) {}
}

/// Why a build failed.
#[derive(Debug, thiserror::Error)]
pub enum BuildError {
    #[error(transparent)]
    Import(#[from] ImportError),
    #[error("{0}: the largest strongly connected component has fewer than 2 nodes")]
    TooSmall(String),
}

/// Runs the whole pipeline.
pub fn build(source: &Source, progress: &mut dyn Progress) -> Result<Artifact, BuildError> {
    let clock = Instant::now();
    progress.start("import", None);
    let raw = source.import()?;
    progress.finish();
    let import_s = clock.elapsed().as_secs_f64();
    build_from_graph(source.describe(), raw, import_s, progress)
}

/// Runs the pipeline on an already imported graph. `import_s` is recorded as
/// the import phase's time.
pub fn build_from_graph(
    source: String,
    raw: RoadGraph,
    import_s: f64,
    progress: &mut dyn Progress,
) -> Result<Artifact, BuildError> {
    let mut phases = vec![("import".to_string(), import_s)];
    let mut clock = Instant::now();
    let mut lap = |name: &str, phases: &mut Vec<(String, f64)>| {
        phases.push((name.to_string(), clock.elapsed().as_secs_f64()));
        clock = Instant::now();
    };

    progress.start("strongly connected components", None);
    let (graph, dropped) = raw.keep_largest_scc();
    progress.finish();
    lap("scc", &mut phases);
    if graph.num_nodes() < 2 {
        return Err(BuildError::TooSmall(source));
    }
    let n = graph.num_nodes();

    progress.start("order (inertial flow)", Some(n as u64));
    let order = order_of(&graph, &mut |d| progress.advance(d as u64));
    progress.finish();
    lap("order", &mut phases);

    progress.start("contraction", None);
    let top_separator = order.top_separator;
    let cch = Cch::build(&graph, order.rank);
    progress.finish();
    lap("contraction", &mut phases);

    progress.start("calibration", None);
    let weights = crate::metric::free_flow(&graph);
    let metric = CustomizedMetric::new(&cch, &weights, &graph.edge_len_m);
    let snap = SnapIndex::new(&graph);
    let calibration = calibrate(&graph, &cch, &metric, &snap, 0x00CA_11B2);
    progress.finish();
    lap("calibration", &mut phases);

    let meta = Metadata {
        source,
        built_at_unix: std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map(|d| d.as_secs())
            .unwrap_or(0),
        hodos_version: env!("CARGO_PKG_VERSION").to_string(),
        nodes: n,
        edges: graph.num_edges(),
        dropped,
        arcs: cch.num_arcs(),
        shortcuts: cch.num_shortcuts(),
        top_separator,
        elimination_tree_depth: cch.elimination_tree_depth(),
        phase_seconds: phases,
    };
    Ok(Artifact {
        meta,
        graph,
        cch,
        calibration,
    })
}

/// The nested-dissection order of `graph` (inertial flow on its local
/// projection).
fn order_of(graph: &RoadGraph, progress: &mut dyn FnMut(usize)) -> NodeOrder {
    let ug = UndirectedGraph::from_edges(
        graph.num_nodes(),
        graph
            .edge_tail
            .iter()
            .copied()
            .zip(graph.edge_head.iter().copied()),
    );
    let (lo, hi) = graph.bbox();
    let proj = LocalProjection::new((lo.lat + hi.lat) / 2.0);
    let xy: Vec<[f64; 2]> = (0..graph.num_nodes() as u32)
        .map(|v| proj.project(graph.node_pos(v)))
        .collect();
    nested_dissection(&ug, &xy, progress)
}

/// An artifact over `graph` exactly as given: no strongly connected filter
/// and no calibration run (`calibration` is kept). For graphs the pipeline
/// would trim, such as [`crate::import::synthetic::islands`] in
/// tests of unreachable pairs.
pub fn assemble(source: String, graph: RoadGraph, calibration: Calibration) -> Artifact {
    let order = order_of(&graph, &mut |_| {});
    let top_separator = order.top_separator;
    let cch = Cch::build(&graph, order.rank);
    let meta = Metadata {
        source,
        built_at_unix: 0,
        hodos_version: env!("CARGO_PKG_VERSION").to_string(),
        nodes: graph.num_nodes(),
        edges: graph.num_edges(),
        dropped: Default::default(),
        arcs: cch.num_arcs(),
        shortcuts: cch.num_shortcuts(),
        top_separator,
        elimination_tree_depth: cch.elimination_tree_depth(),
        phase_seconds: vec![],
    };
    Artifact {
        meta,
        graph,
        cch,
        calibration,
    }
}
