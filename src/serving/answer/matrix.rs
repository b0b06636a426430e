//! A matrix: the gate once for the whole request (one region holds every
//! point), then bucket many-to-many on the blocking pool within the budget;
//! rows not done in time, off-network points and unreachable cells come
//! from the heuristic tier and are marked per cell.

use super::gate::{gate, Granted};
use super::scratch::{with_scratch, ScratchCache};
use super::{Catalog, CellAnswer, MatrixAnswer};
use crate::engine::calibration::Calibration;
use crate::engine::cch::matrix::ManyToMany;
use crate::engine::geo::LatLon;
use crate::engine::region::matrix::{matrix, Cell, MatrixLimits, PointMatrix};
use crate::serving::tier::{FallbackReason, Tier};
use chrono::{DateTime, Utc};
use std::cell::RefCell;
use std::sync::Arc;
use std::time::Instant;

thread_local! {
    /// Many-to-many scratch and output per blocking thread, keyed by the
    /// region it is sized for.
    static MATRIX_SCRATCH: RefCell<ScratchCache<(ManyToMany, PointMatrix)>> =
        const { RefCell::new(ScratchCache::new(2)) };
}

/// A heuristic-tier cell for `reason`.
fn heuristic_cell(cal: &Calibration, a: LatLon, b: LatLon, reason: FallbackReason) -> CellAnswer {
    let (meters, secs) = cal.estimate(a, b);
    CellAnswer {
        eta_s: secs,
        meters,
        tier: Tier::Heuristic,
        reason: Some(reason),
    }
}

fn heuristic_cells(
    cal: &Calibration,
    from: &[LatLon],
    to: &[LatLon],
    reason: FallbackReason,
) -> Vec<CellAnswer> {
    let mut cells = Vec::with_capacity(from.len() * to.len());
    for &a in from {
        for &b in to {
            cells.push(heuristic_cell(cal, a, b, reason));
        }
    }
    cells
}

/// Answers a matrix: bucket many-to-many within the budget; rows not done
/// in time, off-network points and unreachable cells come from the
/// heuristic tier and are marked.
pub async fn matrix_trip(
    cat: &Catalog,
    from: Vec<LatLon>,
    to: Vec<LatLon>,
    depart: Option<DateTime<Utc>>,
    budget_ms: Option<u64>,
    admitted: bool,
) -> MatrixAnswer {
    let (rows, cols) = (from.len(), to.len());
    let deadline = Instant::now() + cat.budget(budget_ms);
    let all_heuristic = |cal: &Calibration, reason, snapshot| MatrixAnswer {
        rows,
        cols,
        cells: heuristic_cells(cal, &from, &to, reason),
        snapshot,
    };
    // A matrix belongs to one region: all points inside its coverage.
    let handle = cat
        .regions
        .iter()
        .find(|r| from.iter().chain(&to).all(|p| r.cfg.coverage.contains(*p)));
    let g = match gate(cat, handle, depart, deadline, admitted).await {
        Ok(g) => g,
        Err(f) => return f.answer(cat, all_heuristic),
    };
    // `_in_flight` stays in `g`, counted until the answer is built.
    let Granted {
        snap,
        chosen,
        tag,
        permit,
        ..
    } = g;
    let max_snap = cat.cfg.query.max_snap_m;
    let snap2 = snap.clone();
    let (from2, to2) = (from.clone(), to.clone());
    let metric = chosen.metric.clone();
    let computed = tokio::task::spawn_blocking(move || {
        let region = &snap2.region;
        with_scratch(
            &MATRIX_SCRATCH,
            Arc::as_ptr(region) as usize,
            |_| true,
            || (ManyToMany::new(&region.cch), PointMatrix::default()),
            |(m2m, out)| {
                matrix(
                    region,
                    metric.get(),
                    m2m,
                    &from2,
                    &to2,
                    MatrixLimits {
                        max_snap_m: max_snap,
                        deadline: Some(deadline),
                    },
                    out,
                )
                .map(|_| out.cells.clone())
            },
        )
    })
    .await;
    drop(permit);
    let cal = &snap.region.calibration;
    let cells = match computed {
        Ok(Ok(cells)) => cells,
        _ => return all_heuristic(cal, FallbackReason::BudgetExceeded, tag),
    };
    let mut out = Vec::with_capacity(rows * cols);
    for (i, c) in cells.iter().enumerate() {
        let (a, b) = (from[i / cols], to[i % cols]);
        out.push(match *c {
            Cell::Eta { time_s, meters } => CellAnswer {
                eta_s: time_s,
                meters,
                tier: chosen.tier,
                reason: chosen.reason,
            },
            Cell::Unreachable => heuristic_cell(cal, a, b, FallbackReason::Unreachable),
            Cell::Unavailable => heuristic_cell(cal, a, b, FallbackReason::OffNetwork),
            Cell::NotComputed => heuristic_cell(cal, a, b, FallbackReason::BudgetExceeded),
        });
    }
    MatrixAnswer {
        rows,
        cols,
        cells: out,
        snapshot: tag,
    }
}
