//! Two separate grids: the smallest road graph with unreachable pairs
//! (for tests of what answers when no route exists).

use crate::geo::LatLon;
use crate::graph::{EdgeSpec, GraphBuilder, RoadClass, RoadGraph};

/// Two `side × side` grids of two-way residential streets 0.002° apart,
/// with no road between them: the smallest graph with unreachable pairs.
/// The first grid's south-west corner is `origin`, the second lies
/// `gap_deg` further east. Node `i·side + j` (row `i`, column `j`) of
/// island `k` has id `k·side² + i·side + j` and external id one more.
/// (`hodos build` keeps only the largest strongly connected component, so
/// an artifact over this graph is put together with
/// [`crate::build::assemble`].)
pub fn islands(side: u32, origin: LatLon, gap_deg: f64) -> RoadGraph {
    let mut b = GraphBuilder::default();
    let mut way = 0;
    for island in 0..2u32 {
        let base = b.num_nodes() as u32;
        let lon0 = origin.lon + f64::from(island) * gap_deg;
        for i in 0..side {
            for j in 0..side {
                let p = LatLon::new(
                    origin.lat + 0.002 * f64::from(i),
                    lon0 + 0.002 * f64::from(j),
                );
                b.add_node(p, u64::from(base + i * side + j + 1));
            }
        }
        for i in 0..side {
            for j in 0..side {
                let v = base + i * side + j;
                let right = (j + 1 < side).then_some(v + 1);
                let up = (i + 1 < side).then_some(v + side);
                for w in [right, up].into_iter().flatten() {
                    way += 1;
                    for (tail, head) in [(v, w), (w, v)] {
                        b.add_edge(EdgeSpec {
                            tail,
                            head,
                            length_m: None,
                            speed_kmh: 30.0,
                            way_id: way,
                            class: RoadClass::Residential,
                            shape: &[],
                        });
                    }
                }
            }
        }
    }
    b.finish()
}
