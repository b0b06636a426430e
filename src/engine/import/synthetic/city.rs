//! The whole city put together: lattice nodes with jitter, missing
//! blocks, the ring motorway and its interchanges, cul-de-sacs and
//! one-way stubs, then every piece added to a [`GraphBuilder`] in a fixed
//! order, and the bridges and river described for the demo.

use super::lattice::{plan, to_latlon, Axis, Lattice};
use super::river::{choose_bridge_columns, river_line};
use super::{
    speed_kmh, BridgeInfo, CityInfo, BEND_P, CITY_CENTER, CITY_NAME, CUL_DE_SAC_SHARE,
    INTERCHANGE_SPACING_M, JITTER_M, MISSING_LINK_P, RAMP_OFFSET_M, RING_MARGIN_M,
    RING_SHAPE_STEP_M, STUB_SHARE,
};
use crate::geo::LatLon;
use crate::graph::{EdgeSpec, GraphBuilder, RoadClass, RoadGraph, NONE};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Removed-block flags per west/south end node.
const GONE_EAST: u8 = 1;
const GONE_NORTH: u8 = 2;

/// Generates the city and describes its bridges and river.
pub fn generate_with_info(nodes: usize, seed: u64) -> (RoadGraph, CityInfo) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let (m, oc, or) = plan(nodes);
    let cols = Axis::new(m, oc, false, &mut rng);
    let rows = Axis::new(m, or, true, &mut rng);
    let (nc, nr) = (cols.len(), rows.len());
    let kr = rows.river.unwrap_or(0);

    // ---- lattice nodes ----
    let mut xs: Vec<f64> = Vec::with_capacity(nodes + nodes / 50 + 64);
    let mut ys: Vec<f64> = Vec::with_capacity(nodes + nodes / 50 + 64);
    let mut cell = vec![NONE; nc * nr];
    for j in 0..nr {
        for i in 0..nc {
            let exists = (cols.in_downtown(i) && rows.in_downtown(j))
                || (cols.through[i] && rows.through[j]);
            if exists {
                cell[j * nc + i] = xs.len() as u32;
                xs.push(cols.pos[i] + rng.random_range(-JITTER_M..JITTER_M));
                ys.push(rows.pos[j] + rng.random_range(-JITTER_M..JITTER_M));
            }
        }
    }
    let lat = Lattice { cols, rows, cell };
    let lattice_nodes = xs.len();

    // ---- bridges: which columns cross the river ----
    let ring_a = lat.cols.pos[lat.cols.dt.0]
        .abs()
        .max(lat.cols.pos[lat.cols.dt.1 - 1].abs())
        + RING_MARGIN_M;
    let ring_b = lat.rows.pos[lat.rows.dt.0]
        .abs()
        .max(lat.rows.pos[lat.rows.dt.1 - 1].abs())
        + RING_MARGIN_M;
    let street_bridges = choose_bridge_columns(&lat.cols, ring_a);
    let is_bridge_col = |i: usize| street_bridges.iter().any(|&(c, _)| c == i);

    // ---- missing links ----
    let mut degree = vec![0u8; lattice_nodes];
    lat.for_each_block(|blk| {
        if !blk.over_river || is_bridge_col(blk.street) {
            degree[blk.a as usize] = degree[blk.a as usize].saturating_add(1);
            degree[blk.b as usize] = degree[blk.b as usize].saturating_add(1);
        }
    });
    let mut gone = vec![0u8; lattice_nodes];
    lat.for_each_block(|blk| {
        if lat.is_plain_outer(&blk) && rng.random_bool(MISSING_LINK_P) {
            let (a, b) = (blk.a as usize, blk.b as usize);
            if degree[a] >= 3 && degree[b] >= 3 {
                degree[a] -= 1;
                degree[b] -= 1;
                gone[a] |= if blk.horizontal {
                    GONE_EAST
                } else {
                    GONE_NORTH
                };
            }
        }
    });
    drop(degree);

    // ---- ring motorway nodes and their ramp targets ----
    let perimeter = {
        let (a, b) = (ring_a, ring_b);
        std::f64::consts::PI * (3.0 * (a + b) - ((3.0 * a + b) * (a + 3.0 * b)).sqrt())
    };
    let k = 2 * ((perimeter / (2.0 * INTERCHANGE_SPACING_M)).round() as usize).max(3);
    let ring_first = xs.len() as u32;
    let angle = |i: usize| 2.0 * std::f64::consts::PI * (i as f64 + 0.5) / k as f64;
    let mut ramp_to: Vec<u32> = Vec::with_capacity(k);
    for i in 0..k {
        let (x, y) = (ring_a * angle(i).cos(), ring_b * angle(i).sin());
        xs.push(x);
        ys.push(y);
        ramp_to.push(nearest_arterial_node(&lat, &xs, &ys, x, y, kr));
    }

    // ---- cul-de-sacs and one-way stubs ----
    let spurs = (nodes as f64 * CUL_DE_SAC_SHARE).round() as usize;
    let stubs = ((nodes as f64 * STUB_SHARE).round() as usize).max(1);
    let mut used = vec![false; lattice_nodes];
    // (base node, end node, two-way)
    let mut hangers: Vec<(u32, u32, bool)> = Vec::with_capacity(spurs + stubs);
    let mut attempts = 0usize;
    while hangers.len() < spurs + stubs && attempts < 50 * (spurs + stubs) {
        attempts += 1;
        let i = rng.random_range(0..nc - 1);
        let j = rng.random_range(0..nr - 1);
        let base = lat.at(i, j);
        if base == NONE || used[base as usize] || lat.downtown_cell(i, j) || j == kr {
            continue;
        }
        used[base as usize] = true;
        let two_way = hangers.len() < spurs;
        let len = if two_way {
            rng.random_range(50.0..90.0)
        } else {
            rng.random_range(40.0..70.0)
        };
        let dir: f64 = rng.random_range(30.0f64..60.0).to_radians();
        let end = xs.len() as u32;
        xs.push(xs[base as usize] + len * dir.cos());
        ys.push(ys[base as usize] + len * dir.sin());
        hangers.push((base, end, two_way));
    }
    drop(used);

    // ---- build ----
    let mut b = GraphBuilder::with_capacity(xs.len(), 4 * xs.len());
    for (n, (&x, &y)) in xs.iter().zip(&ys).enumerate() {
        b.add_node(to_latlon(x, y), n as u64 + 1);
    }
    let mut way: u64 = 0;
    let mut next_way = || {
        way += 1;
        way
    };
    let mut shape: Vec<LatLon> = Vec::new();
    let mut rev: Vec<LatLon> = Vec::new();
    // Adds a piece in one or both directions; returns the ids of the added edges.
    let add_piece = |b: &mut GraphBuilder,
                     tail: u32,
                     head: u32,
                     class: RoadClass,
                     way_id: u64,
                     dir: i8,
                     shape: &[LatLon],
                     rev: &mut Vec<LatLon>|
     -> [u32; 2] {
        let mut ids = [NONE; 2];
        let spec = |t, h, s| EdgeSpec {
            tail: t,
            head: h,
            length_m: None,
            speed_kmh: speed_kmh(class),
            way_id,
            class,
            shape: s,
        };
        if dir >= 0 {
            let id = b.num_edges() as u32;
            if b.add_edge(spec(tail, head, shape)) {
                ids[0] = id;
            }
        }
        if dir <= 0 {
            rev.clear();
            rev.extend(shape.iter().rev());
            let id = b.num_edges() as u32;
            if b.add_edge(spec(head, tail, &rev[..])) {
                ids[1] = id;
            }
        }
        ids
    };

    // Lattice blocks.
    let mut bridge_edges: Vec<(usize, [u32; 2], u32, u32)> = Vec::new();
    lat.for_each_block(|blk| {
        if blk.over_river && !is_bridge_col(blk.street) {
            return;
        }
        let flag = if blk.horizontal {
            GONE_EAST
        } else {
            GONE_NORTH
        };
        if gone[blk.a as usize] & flag != 0 {
            return;
        }
        let ax = lat.axis_of(&blk);
        let class = ax.class[blk.street];
        shape.clear();
        if lat.is_plain_outer(&blk) && rng.random_bool(BEND_P) {
            let (a, bb) = (blk.a as usize, blk.b as usize);
            let (mx, my) = ((xs[a] + xs[bb]) / 2.0, (ys[a] + ys[bb]) / 2.0);
            let off = rng.random_range(-10.0..10.0);
            let (px, py) = if blk.horizontal {
                (mx, my + off)
            } else {
                (mx + off, my)
            };
            shape.push(to_latlon(px, py));
        }
        let w = next_way();
        let ids = add_piece(
            &mut b,
            blk.a,
            blk.b,
            class,
            w,
            ax.oneway[blk.street],
            &shape,
            &mut rev,
        );
        if blk.over_river {
            bridge_edges.push((blk.street, ids, blk.a, blk.b));
        }
    });

    // Ring motorway.
    let mut ring_bridges: Vec<(f64, [u32; 2], u32, u32)> = Vec::new();
    for i in 0..k {
        let (t0, mut t1) = (angle(i), angle((i + 1) % k));
        if t1 < t0 {
            t1 += 2.0 * std::f64::consts::PI;
        }
        let arc = perimeter / k as f64;
        let steps = ((arc / RING_SHAPE_STEP_M).ceil() as usize).max(2);
        shape.clear();
        for s in 1..steps {
            let t = t0 + (t1 - t0) * s as f64 / steps as f64;
            shape.push(to_latlon(ring_a * t.cos(), ring_b * t.sin()));
        }
        let (u, v) = (ring_first + i as u32, ring_first + ((i + 1) % k) as u32);
        let w = next_way();
        let ids = add_piece(&mut b, u, v, RoadClass::Motorway, w, 0, &shape, &mut rev);
        let (yu, yv) = (ys[u as usize], ys[v as usize]);
        if (yu > 0.0) != (yv > 0.0) {
            let (south, north) = if yu < 0.0 { (u, v) } else { (v, u) };
            let mid_x = (xs[u as usize] + xs[v as usize]) / 2.0;
            ring_bridges.push((mid_x, ids, south, north));
        }
    }
    // Ramps: one-way on- and off-ramp per interchange, bent to either side.
    for (i, &g) in ramp_to.iter().enumerate() {
        if g == NONE {
            continue;
        }
        let r = ring_first + i as u32;
        let (gx, gy, rx, ry) = (
            xs[g as usize],
            ys[g as usize],
            xs[r as usize],
            ys[r as usize],
        );
        let (dx, dy) = (rx - gx, ry - gy);
        let len = (dx * dx + dy * dy).sqrt();
        let (px, py) = if len < 1.0 {
            (1.0, 0.0)
        } else {
            (-dy / len, dx / len)
        };
        let (mx, my) = ((gx + rx) / 2.0, (gy + ry) / 2.0);
        for (tail, head, side) in [(g, r, 1.0), (r, g, -1.0)] {
            shape.clear();
            shape.push(to_latlon(
                mx + side * RAMP_OFFSET_M * px,
                my + side * RAMP_OFFSET_M * py,
            ));
            let w = next_way();
            add_piece(
                &mut b,
                tail,
                head,
                RoadClass::MotorwayLink,
                w,
                1,
                &shape,
                &mut rev,
            );
        }
    }
    // Cul-de-sacs (two-way, slightly bent) and one-way dead-end stubs.
    for &(base, end, two_way) in &hangers {
        shape.clear();
        let class = if two_way {
            let (bx, by, ex, ey) = (
                xs[base as usize],
                ys[base as usize],
                xs[end as usize],
                ys[end as usize],
            );
            let off = rng.random_range(-8.0..8.0);
            let (dx, dy) = (ex - bx, ey - by);
            let len = (dx * dx + dy * dy).sqrt();
            shape.push(to_latlon(
                (bx + ex) / 2.0 - off * dy / len,
                (by + ey) / 2.0 + off * dx / len,
            ));
            RoadClass::Residential
        } else {
            RoadClass::Service
        };
        let w = next_way();
        add_piece(
            &mut b,
            base,
            end,
            class,
            w,
            if two_way { 0 } else { 1 },
            &shape,
            &mut rev,
        );
    }
    let graph = b.finish();

    // ---- info ----
    let ext = |n: u32| u64::from(n) + 1;
    let mut bridges: Vec<(f64, BridgeInfo)> = Vec::new();
    for &(col, name) in &street_bridges {
        if let Some(&(_, ids, a, bnode)) = bridge_edges.iter().find(|e| e.0 == col) {
            bridges.push((
                lat.cols.pos[col],
                BridgeInfo {
                    name: name.to_string(),
                    edges: ids.iter().copied().filter(|&e| e != NONE).collect(),
                    from_node_ext: ext(a),
                    to_node_ext: ext(bnode),
                },
            ));
        }
    }
    for &(x, ids, south, north) in &ring_bridges {
        let name = if x < 0.0 {
            "West Ring Viaduct"
        } else {
            "East Ring Viaduct"
        };
        bridges.push((
            x,
            BridgeInfo {
                name: name.to_string(),
                edges: ids.iter().copied().filter(|&e| e != NONE).collect(),
                from_node_ext: ext(south),
                to_node_ext: ext(north),
            },
        ));
    }
    bridges.sort_by(|a, b| a.0.total_cmp(&b.0));
    let river = river_line(
        &lat.rows,
        lat.cols.pos[0] - 500.0,
        lat.cols.pos[nc - 1] + 500.0,
        &mut rng,
    );
    let info = CityInfo {
        name: CITY_NAME,
        center: CITY_CENTER,
        bridges: bridges.into_iter().map(|(_, b)| b).collect(),
        river,
    };
    (graph, info)
}

/// The nearest lattice node on an arterial street on the same bank as the
/// ring point `(x, y)`, searched in a window of nearby streets; falls back to
/// any street, then to [`NONE`].
fn nearest_arterial_node(lat: &Lattice, xs: &[f64], ys: &[f64], x: f64, y: f64, kr: usize) -> u32 {
    let north = y > 0.0;
    let (ci, rj) = (lat.cols.nearest(x), lat.rows.nearest(y));
    for (window, arterial_only) in [(8usize, true), (16, false)] {
        let mut best = (f64::INFINITY, NONE);
        let i_range = ci.saturating_sub(window)..(ci + window + 1).min(lat.cols.len());
        for i in i_range {
            let j_range = rj.saturating_sub(window)..(rj + window + 1).min(lat.rows.len());
            for j in j_range {
                let id = lat.at(i, j);
                if id == NONE || (j > kr) != north {
                    continue;
                }
                if arterial_only && !lat.cols.is_arterial(i) && !lat.rows.is_arterial(j) {
                    continue;
                }
                let (dx, dy) = (xs[id as usize] - x, ys[id as usize] - y);
                let d2 = dx * dx + dy * dy;
                if d2 < best.0 {
                    best = (d2, id);
                }
            }
        }
        if best.1 != NONE {
            return best.1;
        }
    }
    NONE
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tiny_requests_do_not_panic() {
        for n in [0usize, 1, 10, 300] {
            let (g, info) = generate_with_info(n, 3);
            assert!(g.num_nodes() > 0 && g.num_edges() > 0);
            assert_eq!(info.bridges.len(), 5, "n = {n}");
        }
    }
}
