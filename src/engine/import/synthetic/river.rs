//! The river Quell: its meandering centre line between the embankment
//! streets, and the three streets that bridge it.

use super::lattice::{to_latlon, Axis};
use super::RIVER_GAP;
use crate::geo::LatLon;
use rand::Rng;
use rand_chacha::ChaCha8Rng;

/// Three street-bridge columns with their names: the arterial through street
/// nearest the centre, and one arterial each halfway between the ring and the
/// west / east edge of the city.
pub(super) fn choose_bridge_columns(cols: &Axis, ring_a: f64) -> Vec<(usize, &'static str)> {
    let (west_edge, east_edge) = (cols.pos[0], cols.pos[cols.len() - 1]);
    let targets = [
        ((west_edge - ring_a) / 2.0, "Weir Bridge"),
        (0.0, "Saltgate Bridge"),
        ((east_edge + ring_a) / 2.0, "Heronford Bridge"),
    ];
    let mut chosen: Vec<(usize, &'static str)> = Vec::with_capacity(3);
    for (x, name) in targets {
        let pick = |want_arterial: bool| {
            (0..cols.len())
                .filter(|&k| cols.through[k] && (!want_arterial || cols.is_arterial(k)))
                .filter(|&k| chosen.iter().all(|c| c.0 != k))
                .min_by(|&p, &q| (cols.pos[p] - x).abs().total_cmp(&(cols.pos[q] - x).abs()))
        };
        if let Some(k) = pick(true).or_else(|| pick(false)) {
            chosen.push((k, name));
        }
    }
    chosen
}

/// The river's centre line: two superposed meanders kept well inside the gap
/// between the embankment streets (at most 18% of the gap from its middle,
/// while embankment nodes sit at half the gap minus the jitter).
pub(super) fn river_line(rows: &Axis, x0: f64, x1: f64, rng: &mut ChaCha8Rng) -> Vec<LatLon> {
    let gap = match rows.river {
        Some(k) => rows.pos[k + 1] - rows.pos[k],
        None => RIVER_GAP.0,
    };
    let tau = 2.0 * std::f64::consts::PI;
    let (a1, l1, p1) = (
        0.12 * gap,
        rng.random_range(1500.0..3000.0),
        rng.random_range(0.0..tau),
    );
    let (a2, l2, p2) = (
        0.06 * gap,
        rng.random_range(600.0..900.0),
        rng.random_range(0.0..tau),
    );
    let step = 50.0;
    let n = ((x1 - x0) / step).ceil() as usize + 1;
    (0..n)
        .map(|s| {
            let x = x0 + s as f64 * step;
            let y = a1 * (tau * x / l1 + p1).sin() + a2 * (tau * x / l2 + p2).sin();
            to_latlon(x, y)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::import::synthetic::{CITY_CENTER, JITTER_M, M_PER_DEG};
    use rand::SeedableRng;

    #[test]
    fn river_stays_inside_its_gap() {
        let mut rng = ChaCha8Rng::seed_from_u64(9);
        let rows = Axis::new(5, 4, true, &mut rng);
        let k = rows.river.unwrap();
        let half_gap = (rows.pos[k + 1] - rows.pos[k]) / 2.0;
        let line = river_line(&rows, -5000.0, 5000.0, &mut rng);
        for p in line {
            let y = (p.lat - CITY_CENTER.lat) * M_PER_DEG;
            assert!(
                y.abs() < half_gap - 2.0 * JITTER_M,
                "y = {y}, half gap {half_gap}"
            );
        }
    }
}
