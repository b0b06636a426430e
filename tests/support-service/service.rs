//! A small service fixture: a synthetic-city artifact and a configuration
//! with one region around it, in a temporary directory.

use hodos::config::Config;
use hodos::engine::build::{build, Quiet, Source};
use hodos::engine::geo::LatLon;
use hodos_test_support::region_table;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

pub const TOKEN: &str = "test-token-0123456789";

pub struct City {
    pub dir: tempfile::TempDir,
    pub artifact: PathBuf,
    pub lo: LatLon,
    pub hi: LatLon,
    /// (tail, head) external node ids of a few segments, for tables.
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
# is tested in src/serving/customizer.rs).
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
{}"#,
        region_table("testcity", artifact, state, c.lo, c.hi, 0.05)
    )
}

pub fn config(state: &Path, extra_query: &str) -> Config {
    let c = Config::parse(&config_text(&city().artifact, state, extra_query)).unwrap();
    c.validate().unwrap();
    c
}
