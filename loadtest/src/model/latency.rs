//! Latency shapes of a run, in milliseconds: fixed percentiles of a
//! histogram, per-window percentiles over scheduled time (the timeline), and
//! latency by percentile in "nines" (the curve the percentile plot draws).
//!
//! The curve's x axis is x = −log10(1 − q), so p90 is 1, p99 is 2 and p99.9
//! is 3, which spreads the tail out where it matters.

use hdrhistogram::Histogram;
use serde::Serialize;
use std::collections::BTreeMap;

/// Latency percentiles in milliseconds.
#[derive(Debug, Clone, Copy, Serialize, Default)]
pub struct Percentiles {
    pub p50: f64,
    pub p90: f64,
    pub p99: f64,
    pub p999: f64,
    pub max: f64,
    pub mean: f64,
}

impl Percentiles {
    pub fn of(h: &Histogram<u64>) -> Percentiles {
        if h.is_empty() {
            return Percentiles::default();
        }
        let ms = |us: u64| us as f64 / 1000.0;
        Percentiles {
            p50: ms(h.value_at_quantile(0.50)),
            p90: ms(h.value_at_quantile(0.90)),
            p99: ms(h.value_at_quantile(0.99)),
            p999: ms(h.value_at_quantile(0.999)),
            max: ms(h.max()),
            mean: h.mean() / 1000.0,
        }
    }
}

/// One window of the latency timeline.
#[derive(Debug, Clone, Serialize)]
pub struct Window {
    /// Window start, seconds after the run's start (scheduled time).
    pub t_s: f64,
    pub n: u64,
    pub p50_ms: f64,
    pub p99_ms: f64,
    pub max_ms: f64,
}

/// Percentiles per `window_ms` of scheduled time.
pub fn timeline(samples: &[(u32, u32)], window_ms: u32) -> Vec<Window> {
    let mut by: BTreeMap<u32, Vec<u32>> = BTreeMap::new();
    for &(t, l) in samples {
        by.entry(t / window_ms).or_default().push(l);
    }
    by.into_iter()
        .map(|(w, mut v)| {
            v.sort_unstable();
            let q = |p: f64| {
                v[((v.len() as f64 * p).ceil() as usize).clamp(1, v.len()) - 1] as f64 / 1000.0
            };
            Window {
                t_s: (w * window_ms) as f64 / 1000.0,
                n: v.len() as u64,
                p50_ms: q(0.5),
                p99_ms: q(0.99),
                max_ms: *v.last().expect("non-empty window") as f64 / 1000.0,
            }
        })
        .collect()
}

/// Latency (ms) at x = 0, 0.05, ... 4 nines of one histogram.
pub fn curve(h: &Histogram<u64>) -> Vec<(f64, f64)> {
    if h.is_empty() {
        return Vec::new();
    }
    (0..=80)
        .map(|i| {
            let x = i as f64 * 0.05;
            let q = 1.0 - 10f64.powf(-x);
            (x, h.value_at_quantile(q).max(1) as f64 / 1000.0)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::tally::histogram;

    #[test]
    fn percentiles_from_hdr() {
        // 1..=1000 µs: the p99 of a uniform sample is its 990th value
        // (nearest-rank definition, as HdrHistogram computes it).
        let mut h = histogram();
        for v in 1..=1000u64 {
            h.record(v).unwrap();
        }
        let p = Percentiles::of(&h);
        assert!((p.p99 - 0.990).abs() < 0.002, "{p:?}");
        assert!((p.p50 - 0.500).abs() < 0.002, "{p:?}");
        assert!((p.max - 1.0).abs() < 0.002);
    }
}
