//! The graph every benchmark runs on: USA-road-d.NY from `$HODOS_DATA_DIR`
//! (default ../shared/data), or a 300,000-node synthetic city when the data
//! is absent (said on stderr).

use hodos::engine::graph::RoadGraph;
use std::path::PathBuf;

/// `(name, graph before the SCC filter)`.
pub fn bench_graph() -> (String, RoadGraph) {
    let data = std::env::var("HODOS_DATA_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|_| PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../shared/data"));
    let (gr, co) = (
        data.join("dimacs/USA-road-d.NY.gr.gz"),
        data.join("dimacs/USA-road-d.NY.co.gz"),
    );
    if gr.exists() && co.exists() {
        (
            "USA-road-d.NY".into(),
            hodos::engine::import::dimacs::read(&gr, &co).expect("read NY"),
        )
    } else {
        eprintln!(
            "NOTE: DIMACS NY not found under {}; benchmarking a 300,000-node synthetic city",
            data.display()
        );
        (
            "synthetic-300k".into(),
            hodos::engine::import::synthetic::generate(300_000, 1),
        )
    }
}
