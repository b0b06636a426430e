//! Resident memory of a loaded region with one customized metric: loads the
//! artifact of USA-road-d.NY (or a 300,000-node synthetic city), customizes
//! free-flow, and prints VmRSS / VmHWM from /proc/self/status (Linux).
//! `cargo bench --bench memory`. Not a criterion bench: memory is a level,
//! not a time.

mod common;

use hodos::engine::artifact::Artifact;
use hodos::engine::build::{build_from_graph, Quiet};
use hodos::engine::region::Region;

fn status_kb(key: &str) -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    s.lines()
        .find(|l| l.starts_with(key))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|v| v.parse().ok())
}

fn main() {
    if std::env::args().any(|a| a == "--list") {
        return; // `cargo bench -- --list` support
    }
    // Build in the parent and measure in a child process, so the build's
    // own peak does not count.
    let Ok(path) = std::env::var("HODOS_MEMORY_CHILD") else {
        let (name, raw) = common::bench_graph();
        let dir = tempfile::tempdir().expect("tempdir");
        let path = dir.path().join("mem.hodos");
        let art = build_from_graph(name.clone(), raw, 0.0, &mut Quiet).expect("build");
        art.save(&path).expect("save");
        drop(art);
        let status = std::process::Command::new(std::env::current_exe().expect("exe"))
            .env("HODOS_MEMORY_CHILD", &path)
            .env("HODOS_MEMORY_NAME", &name)
            .status()
            .expect("child");
        std::process::exit(status.code().unwrap_or(1));
    };
    let name = std::env::var("HODOS_MEMORY_NAME").unwrap_or_default();
    let before = status_kb("VmRSS:").unwrap_or(0);
    let region = Region::from_artifact(Artifact::load(std::path::Path::new(&path)).expect("load"));
    let metric = region.free_flow();
    let one = status_kb("VmRSS:").unwrap_or(0);
    let second = region.metric(
        hodos::engine::metric::free_flow(&region.graph)
            .iter()
            .map(|w| w + w / 3)
            .collect(),
    );
    let two = status_kb("VmRSS:").unwrap_or(0);
    let hwm = status_kb("VmHWM:").unwrap_or(0);
    let mb = |kb: u64| kb as f64 / 1024.0;
    println!(
        "memory {name}: resident {:.1} MB with one metric, {:.1} MB with two (process baseline {:.1} MB, peak {:.1} MB); one metric holds {:.1} MB",
        mb(one),
        mb(two),
        mb(before),
        mb(hwm),
        metric.customized.heap_bytes() as f64 / 1e6
    );
    std::hint::black_box((&region, &second));
}
