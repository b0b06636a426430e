//! `hodos segments`: every directed road segment of an artifact (the ids
//! a speed table names) written as CSV or GeoJSON.

use anyhow::Context;
use hodos::engine::artifact::Artifact;
use hodos::engine::segments::{write_csv, write_geojson};
use std::path::Path;

pub fn run(file: &Path, out: &Path, format: Option<&str>) -> anyhow::Result<()> {
    let ext = out
        .extension()
        .and_then(|e| e.to_str())
        .unwrap_or("")
        .to_ascii_lowercase();
    let geojson = match format {
        Some("geojson") => true,
        Some("csv") => false,
        Some(other) => anyhow::bail!("--format {other:?}: expected csv or geojson"),
        None => ext == "geojson" || ext == "json",
    };
    let art = Artifact::load(file)?;
    let f = std::fs::File::create(out).with_context(|| format!("creating {}", out.display()))?;
    let w = std::io::BufWriter::with_capacity(1 << 20, f);
    let n = if geojson {
        write_geojson(&art.graph, w)
    } else {
        write_csv(&art.graph, w)
    }
    .with_context(|| format!("writing {}", out.display()))?;
    println!(
        "wrote {n} segments to {} ({})",
        out.display(),
        if geojson { "GeoJSON" } else { "CSV" }
    );
    Ok(())
}
