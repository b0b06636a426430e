//! `hodos info`: an artifact described (its build summary, extent, a
//! coverage box ready for the configuration, when and by which hodos it
//! was built); the summary is also what `build` and `demo --once` print.

use hodos::engine::artifact::Artifact;
use std::path::Path;

pub fn run(file: &Path) -> anyhow::Result<()> {
    let art = Artifact::load(file)?;
    print_summary(&art);
    let (lo, hi) = art.graph.bbox();
    println!(
        "extent        lat {:.6} to {:.6}, lon {:.6} to {:.6}",
        lo.lat, hi.lat, lo.lon, hi.lon
    );
    // Ready to paste into a [[region]] of the configuration, padded by
    // 0.01 degrees so points just off the outermost roads still snap.
    let pad = 0.01;
    println!(
        "coverage      coverage = {{ bbox = [{:.4}, {:.4}, {:.4}, {:.4}] }}",
        lo.lat - pad,
        lo.lon - pad,
        hi.lat + pad,
        hi.lon + pad
    );
    let built = i64::try_from(art.meta.built_at_unix)
        .ok()
        .and_then(|s| chrono::DateTime::from_timestamp(s, 0))
        .map(|t| t.to_rfc3339_opts(chrono::SecondsFormat::Secs, true))
        .unwrap_or_else(|| format!("{} (unix seconds)", art.meta.built_at_unix));
    println!("built at      {built}, hodos {}", art.meta.hodos_version);
    Ok(())
}

/// The build's facts: sizes, what the largest-component filter dropped,
/// the hierarchy, phase times and the calibration bands.
pub fn print_summary(art: &Artifact) {
    let m = &art.meta;
    println!("source        {}", m.source);
    println!("nodes         {}", m.nodes);
    println!("edges         {}", m.edges);
    println!(
        "dropped       {} nodes, {} edges outside the largest strongly connected component ({} components)",
        m.dropped.dropped_nodes, m.dropped.dropped_edges, m.dropped.components
    );
    println!("arcs          {} ({} shortcuts)", m.arcs, m.shortcuts);
    println!("separator     {} nodes at the top level", m.top_separator);
    println!("tree depth    {}", m.elimination_tree_depth);
    let phases: Vec<String> = m
        .phase_seconds
        .iter()
        .map(|(p, s)| format!("{p} {s:.2}s"))
        .collect();
    println!("times         {}", phases.join(", "));
    println!(
        "calibration   {} pairs; circuity, free-flow km/h by great-circle band:",
        art.calibration.pairs
    );
    for b in &art.calibration.bands {
        let hi = if b.hi_km.is_finite() {
            format!("{}", b.hi_km)
        } else {
            "∞".into()
        };
        println!(
            "  {:>4}–{:<4} km  circuity {:.3}  speed {:6.1}  (n={})",
            b.lo_km, hi, b.circuity, b.speed_kmh, b.count
        );
    }
}
