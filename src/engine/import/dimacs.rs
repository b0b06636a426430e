//! 9th DIMACS Implementation Challenge road graphs: `.gr` arcs plus `.co`
//! node coordinates → [`RoadGraph`].
//!
//! # Format
//!
//! - `.gr`: `c ...` comment lines, one header `p sp N M`, then `M` arc lines
//!   `a U V W` with 1-based node ids `U`, `V` in `1..=N` and a non-negative
//!   integer weight `W`.
//! - `.co`: `c ...` comment lines, one header `p aux sp co N`, then `N` lines
//!   `v ID LON LAT`, longitude first, both integers in microdegrees.
//!
//! Either file may be plain text or gzip; gzip is recognised by its magic
//! bytes `1f 8b`, never by the file name. Blank lines are tolerated; every
//! other deviation (unknown line type, wrong field count, non-integer field,
//! id out of range, coordinate out of range, duplicate or missing `v` ids,
//! missing or repeated `p` header, arc count different from the header) is an
//! [`ImportError`] that names the file and, where one exists, the line.
//!
//! # Mapping to the road graph
//!
//! - Node `i` (0-based) is DIMACS id `i + 1`; its external id is the DIMACS id.
//! - Edge length: the distance graphs (`USA-road-d.*`) carry decimetres
//!   (measured on the NY graph: weight / haversine metres has median 9.994, see
//!   `shared/data/dimacs/SOURCES.md`, "Units, as measured here"), so
//!   `length_m = W / 10`.
//! - Speed: DIMACS has no road classes, so every edge gets
//!   [`DEFAULT_SPEED_KMH`] and [`RoadClass::Unknown`].
//! - Way id: DIMACS has no way ids either. [`GraphBuilder::finish`] pairs two
//!   opposite arcs as twins only when their way ids match, so both arcs of a
//!   road get the same id derived from the unordered DIMACS id pair:
//!   `min << 32 | max` (see [`way_id_for`]).
//! - Self-loop arcs (`a U U W`) are dropped by the builder (they never lie on a
//!   shortest path); [`read_arc_weights`] still returns them, in file order.

use super::ImportError;
use crate::geo::LatLon;
use crate::graph::{EdgeSpec, GraphBuilder, RoadClass, RoadGraph};
use flate2::read::MultiGzDecoder;
use std::fs::File;
use std::io::{BufRead, BufReader};
use std::path::Path;

/// Free-flow speed given to every DIMACS edge, in km/h. The challenge files
/// carry no road classes; 40 km/h is this project's own choice of a plausible
/// urban average so that the default metric is a travel time, not a distance.
pub const DEFAULT_SPEED_KMH: f32 = 40.0;

/// Distance-graph weight units per metre (the `-d` graphs are in decimetres).
pub const WEIGHT_UNITS_PER_METRE: f64 = 10.0;

/// Largest node count accepted: node ids are `u32` and [`crate::graph::NONE`]
/// is reserved.
const MAX_NODES: u64 = u32::MAX as u64 - 1;

/// At most this many arcs / nodes are reserved up front from a header, so a
/// bogus header cannot make the reader allocate far more than the file holds.
const MAX_RESERVE: usize = 1 << 20;

/// The way id shared by both arcs of the road between DIMACS ids `a` and `b`
/// (1-based): the unordered pair packed as `min << 32 | max`.
pub fn way_id_for(a: u32, b: u32) -> u64 {
    let (lo, hi) = if a <= b { (a, b) } else { (b, a) };
    (u64::from(lo) << 32) | u64::from(hi)
}

/// Reads a `.gr` + `.co` pair into a road graph (see the module docs for the
/// mapping). Each file may be plain or gzip.
pub fn read(gr: &Path, co: &Path) -> Result<RoadGraph, ImportError> {
    let arcs = parse_gr(gr)?;
    let coords = parse_co(co)?;
    if coords.len() as u64 != u64::from(arcs.nodes) {
        return Err(ImportError::invalid(
            co,
            format!(
                "has {} nodes but {} announces {}",
                coords.len(),
                gr.display(),
                arcs.nodes
            ),
        ));
    }
    let mut b = GraphBuilder::with_capacity(coords.len(), arcs.arcs.len());
    for (i, &(lon, lat)) in coords.iter().enumerate() {
        // Division by 1e6 (not multiplication by 1e-6) gives the double nearest
        // to the decimal value, the same as parsing "-73.530767".
        let pos = LatLon::new(f64::from(lat) / 1e6, f64::from(lon) / 1e6);
        b.add_node(pos, i as u64 + 1);
    }
    for &(u, v, w) in &arcs.arcs {
        b.add_edge(EdgeSpec {
            tail: u,
            head: v,
            length_m: Some(f64::from(w) / WEIGHT_UNITS_PER_METRE),
            speed_kmh: DEFAULT_SPEED_KMH,
            way_id: way_id_for(u + 1, v + 1),
            class: RoadClass::Unknown,
            shape: &[],
        });
    }
    Ok(b.finish())
}

/// The raw arcs of a `.gr` file as `(tail, head, weight)` with 0-based node
/// ids, in file order (self-loops included). Used to load a second metric
/// (e.g. the travel-time graph) over the same arcs.
pub fn read_arc_weights(gr: &Path) -> Result<Vec<(u32, u32, u32)>, ImportError> {
    Ok(parse_gr(gr)?.arcs)
}

/// A parsed `.gr` file.
struct GrFile {
    /// `N` from the header; bounds every node id.
    nodes: u32,
    /// 0-based `(tail, head, weight)` in file order.
    arcs: Vec<(u32, u32, u32)>,
}

fn parse_gr(path: &Path) -> Result<GrFile, ImportError> {
    let mut lines = Lines::open(path)?;
    // (N, M, header line)
    let mut header: Option<(u32, u64, usize)> = None;
    let mut arcs: Vec<(u32, u32, u32)> = Vec::new();
    while lines.advance()? {
        let ln = lines.line;
        let line = lines.buf.as_slice();
        if is_comment(line) {
            continue;
        }
        let mut tok: [&[u8]; MAX_TOKENS] = [&[]; MAX_TOKENS];
        let n = split(line, &mut tok);
        if n == 0 {
            continue;
        }
        match tok[0] {
            b"a" => {
                let Some((nodes, m, _)) = header else {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        "arc line before the `p sp NODES ARCS` header",
                    ));
                };
                if n != 4 {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        format!("arc line needs 4 fields `a TAIL HEAD WEIGHT`, found {n}"),
                    ));
                }
                if arcs.len() as u64 >= m {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        format!("more arc lines than the {m} the header announces"),
                    ));
                }
                let u = node_id(path, ln, tok[1], "tail", nodes)?;
                let v = node_id(path, ln, tok[2], "head", nodes)?;
                let w = int_field(path, ln, tok[3], "arc weight")?;
                if w < 0 {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        format!("arc weight {w} is negative"),
                    ));
                }
                if w > i64::from(u32::MAX) {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        format!("arc weight {w} exceeds {}", u32::MAX),
                    ));
                }
                arcs.push((u, v, w as u32));
            }
            b"p" => {
                if let Some((_, _, first)) = header {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        format!("second `p` header line (the first is line {first})"),
                    ));
                }
                if n != 4 || tok[1] != b"sp" {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        "header must read `p sp NODES ARCS`",
                    ));
                }
                let nodes = count_field(path, ln, tok[2], "node count", false)?;
                if nodes > MAX_NODES {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        format!("node count {nodes} exceeds the supported {MAX_NODES}"),
                    ));
                }
                let m = count_field(path, ln, tok[3], "arc count", true)?;
                arcs.reserve((m as usize).min(MAX_RESERVE));
                header = Some((nodes as u32, m, ln));
            }
            other => {
                return Err(ImportError::syntax(
                    path,
                    ln,
                    format!(
                        "unknown line type {:?}; a .gr file has only `c`, `p` and `a` lines",
                        String::from_utf8_lossy(other)
                    ),
                ))
            }
        }
    }
    let Some((nodes, m, hl)) = header else {
        return Err(ImportError::invalid(
            path,
            "no `p sp NODES ARCS` header line",
        ));
    };
    if (arcs.len() as u64) != m {
        return Err(ImportError::syntax(
            path,
            hl,
            format!("header announces {m} arcs but the file has {}", arcs.len()),
        ));
    }
    Ok(GrFile { nodes, arcs })
}

/// Parses a `.co` file into `(lon, lat)` microdegrees indexed by 0-based node.
fn parse_co(path: &Path) -> Result<Vec<(i32, i32)>, ImportError> {
    let mut lines = Lines::open(path)?;
    // (N, header line)
    let mut header: Option<(u32, usize)> = None;
    // (id, lon, lat, line) in file order; memory stays bounded by the file
    // itself even when the header announces a huge N.
    let mut entries: Vec<(u32, i32, i32, u32)> = Vec::new();
    while lines.advance()? {
        let ln = lines.line;
        let line = lines.buf.as_slice();
        if is_comment(line) {
            continue;
        }
        let mut tok: [&[u8]; MAX_TOKENS] = [&[]; MAX_TOKENS];
        let n = split(line, &mut tok);
        if n == 0 {
            continue;
        }
        match tok[0] {
            b"v" => {
                let Some((nodes, _)) = header else {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        "`v` line before the `p aux sp co NODES` header",
                    ));
                };
                if n != 4 {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        format!("coordinate line needs 4 fields `v ID LON LAT`, found {n}"),
                    ));
                }
                if entries.len() as u64 >= u64::from(nodes) {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        format!("more `v` lines than the {nodes} the header announces"),
                    ));
                }
                let id = node_id(path, ln, tok[1], "node", nodes)?;
                let lon = int_field(path, ln, tok[2], "longitude")?;
                let lat = int_field(path, ln, tok[3], "latitude")?;
                if !(-180_000_000..=180_000_000).contains(&lon) {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        format!("longitude {lon} µ° is outside -180..180 degrees"),
                    ));
                }
                if !(-90_000_000..=90_000_000).contains(&lat) {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        format!("latitude {lat} µ° is outside -90..90 degrees"),
                    ));
                }
                entries.push((id, lon as i32, lat as i32, ln.min(u32::MAX as usize) as u32));
            }
            b"p" => {
                if let Some((_, first)) = header {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        format!("second `p` header line (the first is line {first})"),
                    ));
                }
                if n != 5 || tok[1] != b"aux" || tok[2] != b"sp" || tok[3] != b"co" {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        "header must read `p aux sp co NODES`",
                    ));
                }
                let nodes = count_field(path, ln, tok[4], "node count", false)?;
                if nodes > MAX_NODES {
                    return Err(ImportError::syntax(
                        path,
                        ln,
                        format!("node count {nodes} exceeds the supported {MAX_NODES}"),
                    ));
                }
                entries.reserve((nodes as usize).min(MAX_RESERVE));
                header = Some((nodes as u32, ln));
            }
            other => {
                return Err(ImportError::syntax(
                    path,
                    ln,
                    format!(
                        "unknown line type {:?}; a .co file has only `c`, `p` and `v` lines",
                        String::from_utf8_lossy(other)
                    ),
                ))
            }
        }
    }
    let Some((nodes, hl)) = header else {
        return Err(ImportError::invalid(
            path,
            "no `p aux sp co NODES` header line",
        ));
    };
    let nodes = nodes as usize;
    if entries.len() == nodes {
        // Every id is in 1..=N and there are N lines: either a permutation or
        // some id repeats. Scatter, reporting the first repeat in file order.
        const UNSET: i32 = i32::MIN; // never a valid latitude
        let mut out = vec![(0i32, UNSET); nodes];
        for &(id, lon, lat, ln) in &entries {
            let slot = &mut out[id as usize];
            if slot.1 != UNSET {
                let first = entries.iter().find(|e| e.0 == id).map_or(0, |e| e.3);
                return Err(ImportError::syntax(
                    path,
                    ln as usize,
                    format!("duplicate `v` id {} (first at line {first})", id + 1),
                ));
            }
            *slot = (lon, lat);
        }
        return Ok(out);
    }
    // Fewer lines than announced: find a repeated id (reported at its second
    // occurrence) or else the first id without a line.
    let mut sorted: Vec<(u32, u32)> = entries.iter().map(|e| (e.0, e.3)).collect();
    sorted.sort_unstable();
    if let Some(w) = sorted
        .windows(2)
        .filter(|w| w[0].0 == w[1].0)
        .min_by_key(|w| w[1].1)
    {
        return Err(ImportError::syntax(
            path,
            w[1].1 as usize,
            format!("duplicate `v` id {} (first at line {})", w[0].0 + 1, w[0].1),
        ));
    }
    let missing = sorted
        .iter()
        .enumerate()
        .find(|&(i, e)| e.0 as usize != i)
        .map_or(sorted.len(), |(i, _)| i);
    Err(ImportError::syntax(
        path,
        hl,
        format!(
            "header announces {nodes} nodes but only {} `v` lines follow (id {} is missing)",
            entries.len(),
            missing + 1
        ),
    ))
}

/// Line-by-line reader over a plain or gzip file that counts lines.
struct Lines<'p> {
    path: &'p Path,
    reader: Box<dyn BufRead>,
    /// The current line without its line terminator; reused across lines.
    buf: Vec<u8>,
    /// 1-based number of the current line, for error messages.
    line: usize,
}

impl<'p> Lines<'p> {
    fn open(path: &'p Path) -> Result<Self, ImportError> {
        let file = File::open(path).map_err(|e| ImportError::io(path, e))?;
        let mut raw = BufReader::with_capacity(1 << 16, file);
        let head = raw.fill_buf().map_err(|e| ImportError::io(path, e))?;
        let reader: Box<dyn BufRead> = if head.starts_with(&[0x1f, 0x8b]) {
            Box::new(BufReader::with_capacity(1 << 16, MultiGzDecoder::new(raw)))
        } else {
            Box::new(raw)
        };
        Ok(Self {
            path,
            reader,
            buf: Vec::with_capacity(128),
            line: 0,
        })
    }

    /// Reads the next line into `buf`; `false` at end of file.
    fn advance(&mut self) -> Result<bool, ImportError> {
        self.buf.clear();
        let n = self
            .reader
            .read_until(b'\n', &mut self.buf)
            .map_err(|e| ImportError::io(self.path, e))?;
        if n == 0 {
            return Ok(false);
        }
        self.line += 1;
        if self.buf.last() == Some(&b'\n') {
            self.buf.pop();
        }
        if self.buf.last() == Some(&b'\r') {
            self.buf.pop();
        }
        Ok(true)
    }
}

/// Token slots per line: the longest valid line has 5 fields; one more slot
/// lets [`split`] tell "too many" apart.
const MAX_TOKENS: usize = 6;

/// `c` alone or followed by a blank, possibly after leading blanks.
fn is_comment(line: &[u8]) -> bool {
    let start = line
        .iter()
        .position(|&b| !is_blank(b))
        .unwrap_or(line.len());
    let rest = &line[start..];
    rest.first() == Some(&b'c') && rest.get(1).is_none_or(|&b| is_blank(b))
}

fn is_blank(b: u8) -> bool {
    b == b' ' || b == b'\t'
}

/// Splits on spaces and tabs into `out`; returns the total token count (which
/// may exceed `out.len()`; extra tokens are counted but not stored).
fn split<'a>(line: &'a [u8], out: &mut [&'a [u8]; MAX_TOKENS]) -> usize {
    let mut n = 0;
    let mut i = 0;
    while i < line.len() {
        while i < line.len() && is_blank(line[i]) {
            i += 1;
        }
        if i == line.len() {
            break;
        }
        let start = i;
        while i < line.len() && !is_blank(line[i]) {
            i += 1;
        }
        if n < MAX_TOKENS {
            out[n] = &line[start..i];
        }
        n += 1;
    }
    n
}

/// A decimal integer with optional leading `-` (no `+`, no spaces).
fn parse_int(tok: &[u8]) -> Option<i64> {
    let (neg, digits) = match tok.first() {
        Some(b'-') => (true, &tok[1..]),
        _ => (false, tok),
    };
    if digits.is_empty() {
        return None;
    }
    let mut v: i64 = 0;
    for &d in digits {
        if !d.is_ascii_digit() {
            return None;
        }
        v = v.checked_mul(10)?.checked_add(i64::from(d - b'0'))?;
    }
    Some(if neg { -v } else { v })
}

fn int_field(path: &Path, ln: usize, tok: &[u8], what: &str) -> Result<i64, ImportError> {
    parse_int(tok).ok_or_else(|| {
        ImportError::syntax(
            path,
            ln,
            format!(
                "{what} {:?} is not an integer",
                String::from_utf8_lossy(tok)
            ),
        )
    })
}

/// A header count: an integer ≥ 1 (or ≥ 0 when `zero_ok`).
fn count_field(
    path: &Path,
    ln: usize,
    tok: &[u8],
    what: &str,
    zero_ok: bool,
) -> Result<u64, ImportError> {
    let v = int_field(path, ln, tok, what)?;
    if v < 0 {
        return Err(ImportError::syntax(
            path,
            ln,
            format!("{what} {v} is negative"),
        ));
    }
    if v == 0 && !zero_ok {
        return Err(ImportError::syntax(path, ln, format!("{what} is zero")));
    }
    Ok(v as u64)
}

/// A 1-based node id in `1..=nodes`, returned 0-based.
fn node_id(path: &Path, ln: usize, tok: &[u8], what: &str, nodes: u32) -> Result<u32, ImportError> {
    let v = int_field(path, ln, tok, &format!("{what} id"))?;
    if v < 1 || v > i64::from(nodes) {
        return Err(ImportError::syntax(
            path,
            ln,
            format!("{what} id {v} is outside 1..={nodes}"),
        ));
    }
    Ok((v - 1) as u32)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn integers() {
        assert_eq!(parse_int(b"0"), Some(0));
        assert_eq!(parse_int(b"-73530767"), Some(-73_530_767));
        assert_eq!(parse_int(b"-"), None);
        assert_eq!(parse_int(b"+1"), None);
        assert_eq!(parse_int(b"1.5"), None);
        assert_eq!(parse_int(b"99999999999999999999"), None);
    }

    #[test]
    fn tokens_and_comments() {
        let mut t: [&[u8]; MAX_TOKENS] = [&[]; MAX_TOKENS];
        assert_eq!(split(b"  a 1\t2  3 ", &mut t), 4);
        assert_eq!(&t[..4], &[&b"a"[..], b"1", b"2", b"3"]);
        assert_eq!(split(b"1 2 3 4 5 6 7 8", &mut t), 8);
        assert!(is_comment(b"c"));
        assert!(is_comment(b"c 9th DIMACS"));
        assert!(!is_comment(b"co 1"));
    }

    #[test]
    fn way_ids_are_symmetric() {
        assert_eq!(way_id_for(3, 7), way_id_for(7, 3));
        assert_eq!(way_id_for(3, 7), (3u64 << 32) | 7);
        assert_ne!(way_id_for(3, 7), way_id_for(3, 8));
    }
}
