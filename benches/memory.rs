//! Resident memory of a loaded region with one customized metric: loads the
//! artifact of USA-road-d.NY (or a 300,000-node synthetic city), customizes
//! free-flow, and prints VmRSS / VmHWM from /proc/self/status (Linux).
//! `cargo bench --bench memory`. Not a criterion bench: memory is a level,
//! not a time.

use hodos::artifact::Artifact;
use hodos::build::{build_from_graph, Quiet};
use hodos::region::Region;
use std::path::PathBuf;

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
    let data = std::env::var("HODOS_DATA_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|_| PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../shared/data"));
    let (gr, co) = (
        data.join("dimacs/USA-road-d.NY.gr.gz"),
        data.join("dimacs/USA-road-d.NY.co.gz"),
    );
    let dir = tempfile::tempdir().expect("tempdir");
    let path = dir.path().join("mem.hodos");
    let name = if gr.exists() && co.exists() {
        "USA-road-d.NY"
    } else {
        "synthetic-300k"
    };
    // Build in a child process so the build's own peak does not count.
    if std::env::var("HODOS_MEMORY_CHILD").is_err() {
        let raw = if name == "USA-road-d.NY" {
            hodos::import::dimacs::read(&gr, &co).expect("NY")
        } else {
            hodos::import::synthetic::generate(300_000, 1)
        };
        let art = build_from_graph(name.into(), raw, 0.0, &mut Quiet).expect("build");
        art.save(&path).expect("save");
        drop(art);
        let status = std::process::Command::new(std::env::current_exe().expect("exe"))
            .env("HODOS_MEMORY_CHILD", &path)
            .status()
            .expect("child");
        std::process::exit(status.code().unwrap_or(1));
    }
    let path = PathBuf::from(std::env::var("HODOS_MEMORY_CHILD").expect("path"));
    let before = status_kb("VmRSS:").unwrap_or(0);
    let region = Region::from_artifact(Artifact::load(&path).expect("load"));
    let metric = region.free_flow();
    let rss = status_kb("VmRSS:").unwrap_or(0);
    let hwm = status_kb("VmHWM:").unwrap_or(0);
    println!(
        "memory {name}: resident {:.1} MB after load + 1 metric (baseline {:.1} MB, peak {:.1} MB); metric {:.1} MB",
        rss as f64 / 1024.0,
        before as f64 / 1024.0,
        hwm as f64 / 1024.0,
        metric.customized.heap_bytes() as f64 / 1e6
    );
    std::hint::black_box(&region);
}
