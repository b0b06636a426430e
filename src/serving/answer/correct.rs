//! Step 7: a region's correction model applied to a finished answer, a
//! trip or each cell of a matrix. Answers outside every region, and
//! regions without a model, keep their uncorrected time.

use super::{Answer, MatrixAnswer};
use crate::correction::{correct, CorrectionModel, Query};
use crate::snapshot::RegionReader;
use hodos_engine::geo::LatLon;
use std::sync::Arc;

/// Corrects `a` (from `from` to `to`) with `handle`'s model, if it has one.
pub(super) fn trip(handle: Option<&Arc<RegionReader>>, from: LatLon, to: LatLon, a: &mut Answer) {
    let Some(h) = handle else { return };
    let guard = h.correction.guard();
    let Some(model) = guard.as_ref() else { return };
    let c = correct(model, &a.query(from, to));
    a.eta_s = c.eta_s;
    a.correction = Some(c);
}

/// Matrices with more cells are corrected on the blocking pool: a model
/// costs about a microsecond per cell, and a request worker must not be
/// held for milliseconds.
const INLINE_CELLS: usize = 256;

/// Corrects every cell of `m` (rows `from`, columns `to`).
pub(super) async fn matrix(
    handle: Option<&Arc<RegionReader>>,
    from: &[LatLon],
    to: &[LatLon],
    mut m: MatrixAnswer,
) -> MatrixAnswer {
    let Some(model) = handle.and_then(|h| h.correction.current()) else {
        return m;
    };
    if m.cells.len() <= INLINE_CELLS {
        cells(&model, from, to, &mut m);
        return m;
    }
    let (from, to) = (from.to_vec(), to.to_vec());
    tokio::task::spawn_blocking(move || {
        cells(&model, &from, &to, &mut m);
        m
    })
    .await
    .expect("correcting cells does not panic (the model was checked on load)")
}

fn cells(model: &CorrectionModel, from: &[LatLon], to: &[LatLon], m: &mut MatrixAnswer) {
    let cols = to.len();
    for (k, cell) in m.cells.iter_mut().enumerate() {
        let c = correct(
            model,
            &Query {
                from: from[k / cols],
                to: to[k % cols],
                graph_s: cell.eta_s,
                graph_m: cell.meters,
                hour_of_week: m.hour_of_week,
                tier: cell.tier,
                sources: cell.sources,
            },
        );
        cell.eta_s = c.eta_s;
        cell.correction = Some(c);
    }
}
