//! A matrix: the gate once for the whole request (one region holds every
//! point), then bucket many-to-many on the blocking pool within the budget;
//! rows not done in time, off-network points and unreachable cells come
//! from the heuristic tier and are marked per cell. Every graph cell has its
//! own sources, hence its own tier and reason.

use super::gate::{gate, Chosen, Granted, MetricRef};
use super::scratch::{with_scratch, ScratchCache};
use super::{Catalog, CellAnswer, Estimator, MatrixAnswer, MatrixQuery};
use crate::admission::Admit;
use crate::snapshot::{RegionReader, Snapshot};
use crate::tier::{FallbackReason, Sources, Tier};
use chrono::{DateTime, Utc};
use hodos_engine::cch::classes::ClassTimes;
use hodos_engine::cch::matrix::ManyToMany;
use hodos_engine::geo::LatLon;
use hodos_engine::region::matrix::{matrix, Cell, MatrixLimits, PointMatrix};
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
fn heuristic_cell(est: Estimator<'_>, a: LatLon, b: LatLon, reason: FallbackReason) -> CellAnswer {
    let (meters, secs) = est.estimate(a, b);
    CellAnswer {
        eta_s: secs,
        meters,
        tier: Tier::Heuristic,
        reason: Some(reason),
        region: None,
        sources: None,
        correction: None,
    }
}

fn heuristic_cells(
    est: Estimator<'_>,
    from: &[LatLon],
    to: &[LatLon],
    reason: FallbackReason,
) -> Vec<CellAnswer> {
    let mut cells = Vec::with_capacity(from.len() * to.len());
    for &a in from {
        for &b in to {
            cells.push(heuristic_cell(est, a, b, reason));
        }
    }
    cells
}

/// Answers a matrix: bucket many-to-many within the budget; rows not done
/// in time, off-network points and unreachable cells come from the
/// heuristic tier and are marked.
///
/// Cell by cell, like trips: a cell belongs to the first region whose
/// coverage holds both its ends. When one region holds every point the
/// whole matrix is one many-to-many there; otherwise each region answers
/// the rows × columns it holds, and a cell whose ends share no region is
/// an `outside_regions` estimate, so one stray point degrades only its own
/// row or column. The answer's snapshot is that of the region answering
/// the most cells.
pub async fn matrix_trip(cat: &Catalog, q: MatrixQuery, admit: Admit<'_>) -> MatrixAnswer {
    let MatrixQuery {
        from,
        to,
        depart,
        budget_ms,
    } = q;
    let deadline = Instant::now() + cat.budget(budget_ms);
    let covers = |r: &RegionReader, p: &LatLon| r.cfg.coverage.contains(*p);
    let whole = cat
        .regions
        .iter()
        .find(|r| from.iter().chain(&to).all(|p| covers(r, p)));
    if whole.is_some() || cat.regions.is_empty() {
        return region_matrix(cat, whole, &from, &to, depart, deadline, admit).await;
    }
    let (rows, cols) = (from.len(), to.len());
    let mut cells: Vec<Option<CellAnswer>> = vec![None; rows * cols];
    let (mut snapshot, mut most) = (None, 0);
    for handle in &cat.regions {
        let held_rows: Vec<usize> = (0..rows).filter(|&i| covers(handle, &from[i])).collect();
        let held_cols: Vec<usize> = (0..cols).filter(|&j| covers(handle, &to[j])).collect();
        let unowned = |i: usize, j: usize| cells[i * cols + j].is_none();
        let owned = held_rows
            .iter()
            .map(|&i| held_cols.iter().filter(|&&j| unowned(i, j)).count())
            .sum::<usize>();
        if owned == 0 {
            continue;
        }
        let sub_from: Vec<LatLon> = held_rows.iter().map(|&i| from[i]).collect();
        let sub_to: Vec<LatLon> = held_cols.iter().map(|&j| to[j]).collect();
        let sub = region_matrix(
            cat,
            Some(handle),
            &sub_from,
            &sub_to,
            depart,
            deadline,
            admit,
        )
        .await;
        for (a, &i) in held_rows.iter().enumerate() {
            for (b, &j) in held_cols.iter().enumerate() {
                let cell = &mut cells[i * cols + j];
                if cell.is_none() {
                    *cell = Some(sub.cells[a * held_cols.len() + b]);
                }
            }
        }
        if owned > most {
            (snapshot, most) = (sub.snapshot, owned);
        }
    }
    let cells = cells
        .into_iter()
        .enumerate()
        .map(|(k, c)| {
            c.unwrap_or_else(|| {
                let (a, b) = (from[k / cols], to[k % cols]);
                heuristic_cell(
                    Estimator::free_flow(&cat.outside),
                    a,
                    b,
                    FallbackReason::OutsideRegions,
                )
            })
        })
        .collect();
    MatrixAnswer {
        rows,
        cols,
        cells,
        snapshot,
        hour_of_week: None,
    }
}

/// One region's matrix over points it holds (`None`: outside every
/// region): the gate, then the graph within the deadline, then the
/// region's correction per cell.
async fn region_matrix(
    cat: &Catalog,
    handle: Option<&Arc<RegionReader>>,
    from: &[LatLon],
    to: &[LatLon],
    depart: Option<DateTime<Utc>>,
    deadline: Instant,
    admit: Admit<'_>,
) -> MatrixAnswer {
    let m = region_matrix_inner(cat, handle, from, to, depart, deadline, admit).await;
    let mut m = super::correct::matrix(handle, from, to, m).await;
    if let Some(idx) = handle.and_then(|h| cat.index_of(h)) {
        for c in &mut m.cells {
            c.region = Some(idx);
        }
    }
    m
}

/// [`region_matrix`] before its cells are marked with the region.
async fn region_matrix_inner(
    cat: &Catalog,
    handle: Option<&Arc<RegionReader>>,
    from: &[LatLon],
    to: &[LatLon],
    depart: Option<DateTime<Utc>>,
    deadline: Instant,
    admit: Admit<'_>,
) -> MatrixAnswer {
    let (rows, cols) = (from.len(), to.len());
    let all_heuristic = |est: Estimator<'_>, reason, snapshot| MatrixAnswer {
        rows,
        cols,
        cells: heuristic_cells(est, from, to, reason),
        snapshot,
        hour_of_week: est.hour,
    };
    let g = match gate(cat, handle, depart, deadline, admit).await {
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
    let limits = MatrixLimits {
        max_snap_m: cat.cfg.query.max_snap_m,
        deadline: Some(deadline),
    };
    let computed = compute(&snap, chosen.metric.clone(), from, to, limits).await;
    drop(permit);
    let cal = Estimator::for_hour(&snap, chosen.hour);
    let Some(graph) = computed else {
        return all_heuristic(cal, FallbackReason::BudgetExceeded, tag);
    };
    let out = answers(&graph, from, to, &chosen, cal);
    MatrixAnswer {
        rows,
        cols,
        cells: out,
        snapshot: tag,
        hour_of_week: Some(chosen.hour),
    }
}

/// A matrix's graph cells, their class times (empty without classes) and
/// each origin's road class (for zero-time cells).
struct GraphCells {
    cells: Vec<Cell>,
    classes: Vec<ClassTimes>,
    row_class: Vec<u8>,
}

/// The graph part of a matrix, on the blocking pool (a large matrix is
/// milliseconds of CPU): this thread's scratch for the region, one
/// coordinate matrix. `None` when the task or the matrix failed.
async fn compute(
    snap: &Arc<Snapshot>,
    metric: Arc<MetricRef>,
    from: &[LatLon],
    to: &[LatLon],
    limits: MatrixLimits,
) -> Option<GraphCells> {
    let snap = snap.clone();
    let (from, to) = (from.to_vec(), to.to_vec());
    let computed = tokio::task::spawn_blocking(move || {
        let region = &snap.region;
        with_scratch(
            &MATRIX_SCRATCH,
            Arc::as_ptr(region) as usize,
            |_| true,
            || (ManyToMany::new(&region.cch), PointMatrix::default()),
            |(m2m, out)| {
                let metric = metric.get();
                matrix(region, metric, m2m, &from, &to, limits, out).map(|_| GraphCells {
                    cells: out.cells.clone(),
                    classes: out.classes.clone(),
                    row_class: (out.from.iter())
                        .map(|s| s.as_ref().map_or(0, |s| metric.class_of(s.edge)))
                        .collect(),
                })
            },
        )
    })
    .await;
    match computed {
        Ok(Ok(cells)) => Some(cells),
        _ => None,
    }
}

/// Each cell's answer: the graph's with the tier of its own sources, or an
/// estimate from `cal` marked with why the graph gave none.
fn answers(
    graph: &GraphCells,
    from: &[LatLon],
    to: &[LatLon],
    chosen: &Chosen,
    cal: Estimator<'_>,
) -> Vec<CellAnswer> {
    let cols = to.len();
    let mut out = Vec::with_capacity(graph.cells.len());
    for (i, c) in graph.cells.iter().enumerate() {
        let (a, b) = (from[i / cols], to[i % cols]);
        out.push(match *c {
            Cell::Eta { time_s, meters } => {
                let ms = graph.classes.get(i).copied().unwrap_or_default();
                let sources = Sources::from_class_ms(&ms, graph.row_class[i / cols]);
                let (tier, reason, _) = chosen.label(&sources);
                CellAnswer {
                    eta_s: time_s,
                    meters,
                    tier,
                    reason,
                    sources: Some(sources),
                    region: None,
                    correction: None,
                }
            }
            Cell::Unreachable => heuristic_cell(cal, a, b, FallbackReason::Unreachable),
            Cell::Unavailable => heuristic_cell(cal, a, b, FallbackReason::OffNetwork),
            Cell::NotComputed => heuristic_cell(cal, a, b, FallbackReason::BudgetExceeded),
        });
    }
    out
}
