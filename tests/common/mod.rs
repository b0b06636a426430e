//! Shared helpers for integration tests: reference Dijkstra (petgraph), data
//! location, a deterministic pair sampler.
#![allow(dead_code)]

use hodos::engine::graph::RoadGraph;
use petgraph::graph::{DiGraph, NodeIndex};
use std::path::PathBuf;

/// Location of the shared open datasets (`HODOS_DATA_DIR`, set by .ci/run),
/// or `../shared/data` next to the repository. `None` when absent.
pub fn data_dir() -> Option<PathBuf> {
    if let Ok(d) = std::env::var("HODOS_DATA_DIR") {
        let p = PathBuf::from(d);
        if p.is_dir() {
            return Some(p);
        }
    }
    let p = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../shared/data");
    p.is_dir().then_some(p)
}

/// The DIMACS NY files, or a printed skip reason.
pub fn dimacs_ny() -> Option<(PathBuf, PathBuf, PathBuf)> {
    let Some(d) = data_dir() else {
        eprintln!("SKIPPED: HODOS_DATA_DIR is unset and ../shared/data does not exist; DIMACS checks need USA-road-d.NY");
        return None;
    };
    let d = d.join("dimacs");
    let f = (
        d.join("USA-road-d.NY.gr.gz"),
        d.join("USA-road-d.NY.co.gz"),
        d.join("USA-road-t.NY.gr.gz"),
    );
    if !(f.0.exists() && f.1.exists() && f.2.exists()) {
        eprintln!("SKIPPED: {} lacks the USA-road-*.NY files", d.display());
        return None;
    }
    Some(f)
}

/// The OSM fixtures copied into tests/data.
pub fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data")
        .join(name)
}

/// petgraph graph with one weighted arc per road edge.
pub fn petgraph_of(g: &RoadGraph, weights: &[u32]) -> DiGraph<(), u32> {
    let mut pg = DiGraph::with_capacity(g.num_nodes(), g.num_edges());
    for _ in 0..g.num_nodes() {
        pg.add_node(());
    }
    for ((&t, &h), &w) in g.edge_tail.iter().zip(&g.edge_head).zip(weights) {
        pg.add_edge(NodeIndex::new(t as usize), NodeIndex::new(h as usize), w);
    }
    pg
}

/// Reference one-to-all distances from `s` with petgraph's Dijkstra.
pub fn reference_dists(pg: &DiGraph<(), u32>, s: u32) -> Vec<Option<u64>> {
    let m = petgraph::algo::dijkstra(pg, NodeIndex::new(s as usize), None, |e| {
        u64::from(*e.weight())
    });
    let mut out = vec![None; pg.node_count()];
    for (k, v) in m {
        out[k.index()] = Some(v);
    }
    out
}

/// Small deterministic generator (SplitMix64) so test pairs are stable.
pub struct Pairs(u64);

impl Pairs {
    pub fn new(seed: u64) -> Self {
        Self(seed)
    }
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E3779B97F4A7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58476D1CE4E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D049BB133111EB);
        z ^ (z >> 31)
    }
    pub fn below(&mut self, n: usize) -> u32 {
        (self.next_u64() % n as u64) as u32
    }
}

use hodos::engine::cch::CchQuery;
use hodos::engine::region::{Metric, Region};

/// Checks `pairs` node-to-node queries (sources × targets) against petgraph's
/// Dijkstra on the same graph and metric: equal travel times, exactly.
/// Returns the number of pairs compared.
pub fn assert_exact(
    region: &Region,
    metric: &Metric,
    sources: usize,
    targets_per_source: usize,
    seed: u64,
    label: &str,
) -> usize {
    let g = &region.graph;
    let pg = petgraph_of(g, &metric.weights);
    let mut q = CchQuery::new(&region.cch);
    let mut rng = Pairs::new(seed);
    let mut compared = 0;
    for _ in 0..sources {
        let s = rng.below(g.num_nodes());
        let reference = reference_dists(&pg, s);
        for _ in 0..targets_per_source {
            let t = rng.below(g.num_nodes());
            let got = q
                .node_to_node(&region.cch, &metric.customized, s, t)
                .map(|r| u64::from(r.time));
            assert_eq!(got, reference[t as usize], "{label}: {s} -> {t}");
            compared += 1;
        }
    }
    compared
}

/// Random per-edge speeds in 5..=120 km/h (a second metric unlike free-flow).
pub fn random_speeds(g: &RoadGraph, seed: u64) -> Vec<f32> {
    let mut rng = Pairs::new(seed);
    (0..g.num_edges())
        .map(|_| 5.0 + rng.below(116) as f32)
        .collect()
}

/// A small service fixture: a synthetic-city artifact and a configuration
/// with one region around it, in a temporary directory.
pub mod service {
    use hodos::config::Config;
    use hodos::engine::build::{build, Quiet, Source};
    use hodos::engine::geo::LatLon;
    use std::path::{Path, PathBuf};
    use std::sync::OnceLock;

    pub const TOKEN: &str = "test-token-0123456789";

    pub struct City {
        pub dir: tempfile::TempDir,
        pub artifact: PathBuf,
        pub lo: LatLon,
        pub hi: LatLon,
        /// (from_node, to_node) of a few edges, for tables.
        pub edges: Vec<(u64, u64)>,
    }

    /// Built once per test binary.
    pub fn city() -> &'static City {
        static C: OnceLock<City> = OnceLock::new();
        C.get_or_init(|| {
            let dir = tempfile::tempdir().unwrap();
            let art = build(
                &Source::Synthetic {
                    nodes: 3_000,
                    seed: 9,
                },
                &mut Quiet,
            )
            .unwrap();
            let artifact = dir.path().join("city.hodos");
            art.save(&artifact).unwrap();
            let (lo, hi) = art.graph.bbox();
            let g = &art.graph;
            let edges = (0..g.num_edges())
                .map(|e| {
                    (
                        g.node_ext[g.edge_tail[e] as usize],
                        g.node_ext[g.edge_head[e] as usize],
                    )
                })
                .collect();
            City {
                dir,
                artifact,
                lo,
                hi,
                edges,
            }
        })
    }

    /// A point at fractions (fy, fx) of the city's bounding box.
    pub fn at(fy: f64, fx: f64) -> LatLon {
        let c = city();
        LatLon::new(
            c.lo.lat + (c.hi.lat - c.lo.lat) * fy,
            c.lo.lon + (c.hi.lon - c.lo.lon) * fx,
        )
    }

    /// Configuration text for one region on `artifact` with its own state
    /// directory; `extra` is appended to the top-level tables.
    pub fn config_text(artifact: &Path, state: &Path, extra_query: &str) -> String {
        let c = city();
        format!(
            r#"
# Tests share two cores with other tests in the same binary; a customizer
# at idle priority could wait behind them for seconds (the priority itself
# is tested in src/customizer.rs).
[server]
customize_priority = "normal"
[admin]
token = "{TOKEN}"
[query]
max_matrix_cells = 40000
{extra_query}
[live]
ttl_s = 600
half_life_s = 120
recustomize_ms = 50
[[region]]
name = "testcity"
artifact = "{}"
state_dir = "{}"
coverage = {{ bbox = [{}, {}, {}, {}] }}
"#,
            artifact.display(),
            state.display(),
            c.lo.lat - 0.05,
            c.lo.lon - 0.05,
            c.hi.lat + 0.05,
            c.hi.lon + 0.05
        )
    }

    pub fn config(state: &Path, extra_query: &str) -> Config {
        let c = Config::parse(&config_text(&city().artifact, state, extra_query)).unwrap();
        c.validate().unwrap();
        c
    }
}
