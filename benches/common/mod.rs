//! The graph every benchmark runs on: USA-road-d.NY from `$HODOS_DATA_DIR`
//! (default ../shared/data, see `hodos_testkit::data`), or a 300,000-node
//! synthetic city when the data is absent (said on stderr).

use hodos::engine::graph::RoadGraph;
use hodos_testkit::DimacsNy;

/// `(name, graph before the SCC filter)`.
pub fn bench_graph() -> (String, RoadGraph) {
    let ny = DimacsNy::locate();
    let (gr, co) = (&ny.distance_gr, &ny.coordinates);
    if gr.exists() && co.exists() {
        (
            "USA-road-d.NY".into(),
            hodos::engine::import::dimacs::read(gr, co).expect("read NY"),
        )
    } else {
        eprintln!(
            "NOTE: DIMACS NY not found under {}; benchmarking a 300,000-node synthetic city",
            hodos_testkit::data_dir().display()
        );
        (
            "synthetic-300k".into(),
            hodos::engine::import::synthetic::generate(300_000, 1),
        )
    }
}
