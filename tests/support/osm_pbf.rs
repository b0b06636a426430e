//! A hand-written OpenStreetMap PBF encoder for tiny fixtures: only what
//! the tests need, field numbers from the format's fileformat.proto /
//! osmformat.proto (OpenStreetMap wiki "PBF Format"). osmpbf can only read,
//! so the importer's tests write their damaged and road-less files with
//! this and read each back with osmpbf to prove it well-formed.

fn varint(out: &mut Vec<u8>, mut v: u64) {
    while v >= 0x80 {
        out.push((v as u8) | 0x80);
        v >>= 7;
    }
    out.push(v as u8);
}
fn zigzag(v: i64) -> u64 {
    ((v << 1) ^ (v >> 63)) as u64
}
fn key(out: &mut Vec<u8>, field: u32, wire: u8) {
    varint(out, (u64::from(field) << 3) | u64::from(wire));
}
fn bytes(out: &mut Vec<u8>, field: u32, b: &[u8]) {
    key(out, field, 2);
    varint(out, b.len() as u64);
    out.extend_from_slice(b);
}
fn uint(out: &mut Vec<u8>, field: u32, v: u64) {
    key(out, field, 0);
    varint(out, v);
}
fn packed(out: &mut Vec<u8>, field: u32, vals: impl IntoIterator<Item = u64>) {
    let mut b = Vec::new();
    for v in vals {
        varint(&mut b, v);
    }
    bytes(out, field, &b);
}
/// Delta coding of a column (the format's "DELTA coded" fields).
fn deltas(vals: &[i64]) -> Vec<u64> {
    let mut prev = 0i64;
    vals.iter()
        .map(|&v| {
            let d = v.wrapping_sub(prev);
            prev = v;
            zigzag(d)
        })
        .collect()
}

pub struct Way<'a> {
    pub id: i64,
    pub tags: &'a [(&'a str, &'a str)],
    pub refs: &'a [i64],
}

/// Node coordinates in the default granularity (100 nanodegrees).
pub fn coord(deg: f64) -> i64 {
    (deg * 1e7).round() as i64
}

/// One file block: length-prefixed BlobHeader (type = 1, datasize = 3)
/// then a Blob with uncompressed `raw` (1) data and `raw_size` (2).
fn file_block(out: &mut Vec<u8>, kind: &str, payload: &[u8]) {
    let mut blob = Vec::new();
    bytes(&mut blob, 1, payload);
    uint(&mut blob, 2, payload.len() as u64);
    let mut header = Vec::new();
    bytes(&mut header, 1, kind.as_bytes());
    uint(&mut header, 3, blob.len() as u64);
    out.extend_from_slice(&(header.len() as u32).to_be_bytes());
    out.extend_from_slice(&header);
    out.extend_from_slice(&blob);
}

/// HeaderBlock with `required_features` (4).
pub fn header(out: &mut Vec<u8>, features: &[&str]) {
    let mut h = Vec::new();
    for f in features {
        bytes(&mut h, 4, f.as_bytes());
    }
    file_block(out, "OSMHeader", &h);
}

/// One PrimitiveBlock (stringtable = 1, primitivegroup = 2) holding a
/// group of plain Nodes (1), a group of DenseNodes (2) and a group of
/// Ways (3).
pub fn data(out: &mut Vec<u8>, plain: &[(i64, i64, i64)], dense: &[(i64, i64, i64)], ways: &[Way]) {
    let mut strings: Vec<String> = vec![String::new()];
    let mut sid = |s: &str| -> u64 {
        if let Some(i) = strings.iter().position(|x| x == s) {
            return i as u64;
        }
        strings.push(s.to_string());
        (strings.len() - 1) as u64
    };
    let mut groups = Vec::new();
    if !plain.is_empty() {
        let mut g = Vec::new();
        for &(id, lat, lon) in plain {
            // Node: id = 1 (sint64), lat = 8, lon = 9 (sint64).
            let mut n = Vec::new();
            uint(&mut n, 1, zigzag(id));
            uint(&mut n, 8, zigzag(lat));
            uint(&mut n, 9, zigzag(lon));
            bytes(&mut g, 1, &n);
        }
        groups.push(g);
    }
    if !dense.is_empty() {
        // DenseNodes: id = 1, lat = 8, lon = 9, all packed delta sint64.
        let ids: Vec<i64> = dense.iter().map(|n| n.0).collect();
        let lats: Vec<i64> = dense.iter().map(|n| n.1).collect();
        let lons: Vec<i64> = dense.iter().map(|n| n.2).collect();
        let mut d = Vec::new();
        packed(&mut d, 1, deltas(&ids));
        packed(&mut d, 8, deltas(&lats));
        packed(&mut d, 9, deltas(&lons));
        let mut g = Vec::new();
        bytes(&mut g, 2, &d);
        groups.push(g);
    }
    if !ways.is_empty() {
        let mut g = Vec::new();
        for w in ways {
            // Way: id = 1 (int64), keys = 2, vals = 3 (packed uint32
            // string ids), refs = 8 (packed delta sint64).
            let mut m = Vec::new();
            uint(&mut m, 1, w.id as u64);
            let keys: Vec<u64> = w.tags.iter().map(|t| sid(t.0)).collect();
            let vals: Vec<u64> = w.tags.iter().map(|t| sid(t.1)).collect();
            packed(&mut m, 2, keys);
            packed(&mut m, 3, vals);
            packed(&mut m, 8, deltas(w.refs));
            bytes(&mut g, 3, &m);
        }
        groups.push(g);
    }
    let mut table = Vec::new();
    for s in &strings {
        bytes(&mut table, 1, s.as_bytes());
    }
    let mut block = Vec::new();
    bytes(&mut block, 1, &table);
    for g in &groups {
        bytes(&mut block, 2, g);
    }
    file_block(out, "OSMData", &block);
}

/// The required features of a fixture: the schema and dense nodes.
pub const FEATURES: &[&str] = &["OsmSchema-V0.6", "DenseNodes"];

/// Four nodes on a small square near (43.73, 7.42); ids 1..4, plain nodes.
pub fn square_nodes() -> Vec<(i64, i64, i64)> {
    let c = coord;
    vec![
        (1, c(43.7300), c(7.4200)),
        (2, c(43.7300), c(7.4210)),
        (3, c(43.7310), c(7.4210)),
        (4, c(43.7310), c(7.4200)),
    ]
}

/// An extract with ways but no drivable road, on [`square_nodes`]: footway
/// (way 10), track (11, excluded by choice), a private residential street
/// (12) and a building outline (13).
pub fn without_roads() -> Vec<u8> {
    let mut f = Vec::new();
    header(&mut f, FEATURES);
    data(
        &mut f,
        &square_nodes(),
        &[],
        &[
            Way {
                id: 10,
                tags: &[("highway", "footway")],
                refs: &[1, 2],
            },
            Way {
                id: 11,
                tags: &[("highway", "track")],
                refs: &[2, 3],
            },
            Way {
                id: 12,
                tags: &[("highway", "residential"), ("access", "private")],
                refs: &[3, 4],
            },
            Way {
                id: 13,
                tags: &[("building", "yes")],
                refs: &[1, 2, 3, 4, 1],
            },
        ],
    );
    f
}
