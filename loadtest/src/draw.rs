//! Drawing the request pools, the edges for admin traffic and the bounding
//! box from a served artifact's road graph (loaded with the `hodos`
//! library); `scale` shrinks the pools for the smoke.

use crate::suite::{Drawn, Workloads};
use crate::workload::{self, Kind, Sampler};
use anyhow::Context;
use std::path::Path;
use std::sync::Arc;

/// The pools and edges of a road graph (pool sizes divided by `scale`).
pub fn draw(g: &hodos::engine::graph::RoadGraph, seed: u64, scale: usize) -> Drawn {
    let mut s = Sampler::new(g, seed);
    let (lo, hi) = g.bbox();
    Drawn {
        w: Workloads {
            eta: s.trips(Kind::Eta, 20_000 / scale),
            route: s.trips(Kind::Route, 5_000 / scale),
            m1x50: s.matrices(1, 50, 2_000 / scale),
            m20x20: s.matrices(20, 20, 1_000 / scale),
        },
        edges: Arc::new(workload::edges_of(g)),
        lo,
        hi,
        nodes: g.num_nodes(),
    }
}

/// The pools and edges of the artifact at `path`.
pub fn draw_from(path: &Path, seed: u64) -> anyhow::Result<Drawn> {
    let art = hodos::engine::artifact::Artifact::load(path)
        .with_context(|| format!("loading {}", path.display()))?;
    Ok(draw(&art.graph, seed, 1))
}
