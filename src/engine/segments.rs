//! Every directed road segment of a graph, written out so a speed table
//! can name it: its hodos segment id (the edge index a table's `segment`
//! column takes), the source's way id and end node ids (`way`, `tail`,
//! `head`), length, road class, default speed and geometry. As CSV with a
//! header, or as a GeoJSON FeatureCollection (RFC 7946: `[lon, lat]`
//! positions, one LineString Feature per segment) that opens in a desktop
//! GIS. Both are streamed to any writer: nothing the size of the output is
//! held in memory.

use crate::graph::RoadGraph;
use std::io::{self, Write};

/// The CSV header, in column order.
pub const CSV_HEADER: &str = "segment,way,tail,head,length_m,class,kmh";

/// Way id 0 means "none" in a graph (DIMACS sources have no ways).
fn way(g: &RoadGraph, e: usize) -> Option<u64> {
    Some(g.edge_way[e]).filter(|&w| w != 0)
}

/// Writes every segment as CSV; returns the number of rows.
pub fn write_csv(g: &RoadGraph, mut w: impl Write) -> io::Result<u64> {
    writeln!(w, "{CSV_HEADER}")?;
    for e in 0..g.num_edges() {
        writeln!(
            w,
            "{e},{},{},{},{:.3},{},{}",
            way(g, e).map(|v| v.to_string()).unwrap_or_default(),
            g.node_ext[g.edge_tail[e] as usize],
            g.node_ext[g.edge_head[e] as usize],
            g.edge_len_m[e],
            g.edge_class[e].name(),
            g.edge_speed_kmh[e]
        )?;
    }
    w.flush()?;
    Ok(g.num_edges() as u64)
}

/// Writes every segment as a GeoJSON FeatureCollection; returns the
/// number of features.
pub fn write_geojson(g: &RoadGraph, mut w: impl Write) -> io::Result<u64> {
    write!(w, r#"{{"type":"FeatureCollection","features":["#)?;
    let mut line = Vec::new();
    for e in 0..g.num_edges() {
        if e > 0 {
            write!(w, ",")?;
        }
        line.clear();
        g.edge_polyline_into(e as u32, &mut line);
        write!(
            w,
            r#"{{"type":"Feature","geometry":{{"type":"LineString","coordinates":["#
        )?;
        for (i, p) in line.iter().enumerate() {
            if i > 0 {
                write!(w, ",")?;
            }
            write!(w, "[{:.7},{:.7}]", p.lon, p.lat)?;
        }
        let way = way(g, e)
            .map(|v| v.to_string())
            .unwrap_or_else(|| "null".into());
        writeln!(
            w,
            r#"]}},"properties":{{"segment":{e},"way":{way},"tail":{},"head":{},"length_m":{:.3},"class":"{}","kmh":{}}}}}"#,
            g.node_ext[g.edge_tail[e] as usize],
            g.node_ext[g.edge_head[e] as usize],
            g.edge_len_m[e],
            g.edge_class[e].name(),
            g.edge_speed_kmh[e]
        )?;
    }
    write!(w, "]}}")?;
    w.flush()?;
    Ok(g.num_edges() as u64)
}
