//! The numbers behind every plot of the report, computed once and written
//! both into `report.json` and, drawn, into `report.html`.
//!
//! - **error density**: histogram of the log ratio ln(estimate ÷ actual),
//!   [`LOG_RATIO_BINS`] bins of [`LOG_RATIO_STEP`] from
//!   [`LOG_RATIO_MIN`]; values beyond either end count in the end bin.
//!   Density = count ÷ (n × bin width), so each curve integrates to 1.
//!   0 means exact, −0.69 half the actual time (twice too fast).
//! - **estimate vs actual**: a 2-D histogram of (log10 estimate, log10
//!   actual) seconds over [`GRID`]² square cells between the 0.5 % and
//!   99.5 % quantiles of both (cells beyond hold the clipped ends).
//! - **calibration by decile** ([`crate::measure::calibration_deciles`]).
//! - **by hour of week**: median ratio and MAPE per hour 0..167.
//! - **interval coverage** per tier and per distance band, when intervals
//!   exist.

use crate::measure::{
    calibration_deciles, pairs, quantile, summarize, Decile, Estimate, Grouping, Pair,
};
use crate::outcome::TripOutcome;
use serde::Serialize;

pub const LOG_RATIO_MIN: f64 = -3.0;
pub const LOG_RATIO_STEP: f64 = 0.1;
pub const LOG_RATIO_BINS: usize = 60;
/// Cells per axis of the estimate-vs-actual histogram.
pub const GRID: usize = 40;

/// A density curve of one group.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Density {
    pub key: String,
    pub n: usize,
    /// Left edge of each bin (ln ratio).
    pub bin_lo: Vec<f64>,
    pub density: Vec<f64>,
}

/// Density curves of one grouping.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Densities {
    pub grouping: Grouping,
    pub curves: Vec<Density>,
}

/// The 2-D histogram of log10 estimate against log10 actual.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Grid2d {
    /// Range of both axes, log10 seconds.
    pub lo: f64,
    pub hi: f64,
    pub cells: usize,
    /// `counts[row][col]`: row = actual cell, col = estimate cell.
    pub counts: Vec<Vec<u32>>,
}

/// One hour of the week.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HourPoint {
    pub hour: u8,
    pub n: usize,
    pub median_ratio: f64,
    pub mape: f64,
}

/// Coverage of one group.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CoverageBar {
    pub grouping: Grouping,
    pub key: String,
    pub with_interval: usize,
    pub coverage: f64,
}

/// Every figure of one estimate.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Figures {
    pub estimate: Estimate,
    pub density: Vec<Densities>,
    pub grid: Grid2d,
    pub calibration: Vec<Decile>,
    pub by_hour: Vec<HourPoint>,
    /// Empty when no answer carried an interval.
    pub coverage: Vec<CoverageBar>,
}

fn density(key: String, ratios: &[f64]) -> Density {
    let mut counts = vec![0u64; LOG_RATIO_BINS];
    for &r in ratios {
        let x = r.ln();
        let i = ((x - LOG_RATIO_MIN) / LOG_RATIO_STEP).floor();
        let i = if i.is_nan() {
            0
        } else {
            (i.max(0.0) as usize).min(LOG_RATIO_BINS - 1)
        };
        counts[i] += 1;
    }
    let n = ratios.len();
    let scale = 1.0 / (n.max(1) as f64 * LOG_RATIO_STEP);
    Density {
        key,
        n,
        bin_lo: (0..LOG_RATIO_BINS)
            .map(|i| LOG_RATIO_MIN + i as f64 * LOG_RATIO_STEP)
            .collect(),
        density: counts.iter().map(|&c| c as f64 * scale).collect(),
    }
}

fn densities(outcomes: &[TripOutcome], e: Estimate, g: Grouping) -> Densities {
    let mut by: std::collections::BTreeMap<(u32, String), Vec<f64>> = Default::default();
    for o in outcomes {
        by.entry(g.key(o)).or_default().push(e.of(o) / o.actual_s);
    }
    Densities {
        grouping: g,
        curves: by
            .into_iter()
            .map(|((_, key), r)| density(key, &r))
            .collect(),
    }
}

fn grid(p: &[Pair]) -> Grid2d {
    let mut all: Vec<f64> = p
        .iter()
        .flat_map(|x| [x.estimate_s.max(1.0).log10(), x.actual_s.max(1.0).log10()])
        .collect();
    all.sort_by(f64::total_cmp);
    let (mut lo, mut hi) = if all.is_empty() {
        (1.0, 4.0)
    } else {
        (
            crate::measure::quantile_sorted(&all, 0.005),
            crate::measure::quantile_sorted(&all, 0.995),
        )
    };
    // Round out to tenths of a decade; at least one decade wide.
    lo = (lo * 10.0).floor() / 10.0;
    hi = ((hi * 10.0).ceil() / 10.0).max(lo + 1.0);
    let w = (hi - lo) / GRID as f64;
    let cell = |v: f64| (((v.max(1.0).log10() - lo) / w).floor().max(0.0) as usize).min(GRID - 1);
    let mut counts = vec![vec![0u32; GRID]; GRID];
    for x in p {
        counts[cell(x.actual_s)][cell(x.estimate_s)] += 1;
    }
    Grid2d {
        lo,
        hi,
        cells: GRID,
        counts,
    }
}

fn by_hour(outcomes: &[TripOutcome], e: Estimate) -> Vec<HourPoint> {
    let mut hours: Vec<Vec<Pair>> = vec![Vec::new(); 168];
    for o in outcomes {
        if let Some(h) = hours.get_mut(usize::from(o.hour_of_week)) {
            h.push(Pair {
                estimate_s: e.of(o),
                actual_s: o.actual_s,
                interval_s: None,
            });
        }
    }
    hours
        .iter()
        .enumerate()
        .filter_map(|(h, p)| {
            summarize(p).map(|s| HourPoint {
                hour: h as u8,
                n: s.n,
                median_ratio: s.median_ratio,
                mape: s.mape,
            })
        })
        .collect()
}

fn coverage(outcomes: &[TripOutcome]) -> Vec<CoverageBar> {
    let mut out = Vec::new();
    for g in [Grouping::Tier, Grouping::DistanceBand] {
        let mut by: std::collections::BTreeMap<(u32, String), (usize, usize)> = Default::default();
        for o in outcomes {
            if let Some((lo, hi)) = o.interval_s {
                let c = by.entry(g.key(o)).or_default();
                c.0 += 1;
                c.1 += usize::from(lo <= o.actual_s && o.actual_s <= hi);
            }
        }
        for ((_, key), (n, k)) in by {
            out.push(CoverageBar {
                grouping: g,
                key,
                with_interval: n,
                coverage: k as f64 / n as f64,
            });
        }
    }
    out
}

/// Every figure of `estimate` over `outcomes`.
pub fn figures(outcomes: &[TripOutcome], estimate: Estimate) -> Figures {
    let p = pairs(outcomes, estimate);
    Figures {
        estimate,
        density: [Grouping::Tier, Grouping::DistanceBand]
            .iter()
            .map(|&g| densities(outcomes, estimate, g))
            .collect(),
        grid: grid(&p),
        calibration: calibration_deciles(&p),
        by_hour: by_hour(outcomes, estimate),
        // The intervals lie around the served (corrected) ETA.
        coverage: match estimate {
            Estimate::Served => coverage(outcomes),
            Estimate::Graph => Vec::new(),
        },
    }
}

/// The median of `v` (type 7), for captions.
pub fn median(v: &[f64]) -> f64 {
    quantile(v, 0.5)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A density integrates to 1 (sum × bin width), and a ratio of 1
    /// (ln 0) falls in the bin starting at 0.
    #[test]
    fn densities_integrate_to_one() {
        let d = density("x".into(), &[1.0, 1.0, 0.5, 2.0, 1e-9, 1e9]);
        let total: f64 = d.density.iter().sum::<f64>() * LOG_RATIO_STEP;
        assert!((total - 1.0).abs() < 1e-12, "{total}");
        let zero = d.bin_lo.iter().position(|&x| x.abs() < 1e-9).unwrap();
        assert!((d.density[zero] - 2.0 / 6.0 / LOG_RATIO_STEP).abs() < 1e-12);
        // The clipped ends.
        assert!(d.density[0] > 0.0 && d.density[LOG_RATIO_BINS - 1] > 0.0);
    }
}
