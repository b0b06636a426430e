//! The running count of one connection (or a merge of several): latency
//! histogram from scheduled time, generator queueing, errors by kind, and
//! answers by tier and fallback reason, parsed from every 200 body (per cell
//! for matrices). The engine records into it; the summary reads it.
//!
//! Latencies live in HdrHistogram (microseconds, 3 significant digits, up
//! to ten minutes), so percentiles are exact to 0.1% whatever the spread.

use crate::workload::Kind;
use hdrhistogram::Histogram;
use serde::Deserialize;
use std::collections::BTreeMap;
use std::time::{Duration, Instant};

/// Largest latency the histograms hold, µs (ten minutes).
const MAX_US: u64 = 600_000_000;
/// An empty latency histogram (µs, 3 significant digits, up to ten minutes).
pub(crate) fn histogram() -> Histogram<u64> {
    Histogram::new_with_bounds(1, MAX_US, 3).expect("static bounds")
}

/// What one connection (or a merge of several) counted.
#[derive(Debug)]
pub struct Tally {
    pub kind: Kind,
    /// Latency of good answers from their scheduled time, µs.
    pub hist: Histogram<u64>,
    /// Time from scheduled release to a connection picking the ticket up,
    /// µs: queueing inside the generator when the pool is busy.
    pub wait: Histogram<u64>,
    pub ok: u64,
    pub errors: BTreeMap<String, u64>,
    /// (tier, fallback reason) → count; per response, or per cell for
    /// matrices.
    answers: Vec<(String, Option<String>, u64)>,
    /// (scheduled ms since start, latency µs) of every good answer, for the
    /// timeline.
    pub samples: Vec<(u32, u32)>,
    pub last_done: Option<Instant>,
    pub reconnects: u64,
}

#[derive(Deserialize)]
struct OneAnswer<'a> {
    eta_s: f64,
    #[serde(borrow)]
    tier: &'a str,
    #[serde(borrow)]
    fallback_reason: Option<&'a str>,
}

#[derive(Deserialize)]
struct Geometry<'a> {
    #[serde(rename = "type", borrow)]
    kind: &'a str,
    coordinates: Vec<[f64; 2]>,
}

#[derive(Deserialize)]
struct RouteAnswer<'a> {
    eta_s: f64,
    #[serde(borrow)]
    tier: &'a str,
    #[serde(borrow)]
    fallback_reason: Option<&'a str>,
    #[serde(borrow)]
    geometry: Geometry<'a>,
}

#[derive(Deserialize)]
struct MatrixAnswer<'a> {
    eta_s: Vec<Vec<f64>>,
    #[serde(borrow)]
    tier: Vec<Vec<&'a str>>,
    #[serde(borrow)]
    fallback_reason: Vec<Vec<Option<&'a str>>>,
}

/// Why a 200 answer did not count as good.
#[derive(Debug)]
pub struct BadBody;

impl Tally {
    pub fn new(kind: Kind) -> Tally {
        Tally {
            kind,
            hist: histogram(),
            wait: histogram(),
            ok: 0,
            errors: BTreeMap::new(),
            answers: Vec::new(),
            samples: Vec::new(),
            last_done: None,
            reconnects: 0,
        }
    }

    pub fn error(&mut self, kind: &str) {
        *self.errors.entry(kind.to_string()).or_default() += 1;
    }

    pub fn record_wait(&mut self, d: Duration) {
        self.wait.saturating_record((d.as_micros() as u64).max(1));
    }

    /// A good answer scheduled `offset` after the start, `latency` after its
    /// scheduled time.
    pub fn ok_at(&mut self, offset: Duration, latency: Duration) {
        let us = (latency.as_micros() as u64).max(1);
        self.hist.saturating_record(us);
        self.ok += 1;
        self.samples
            .push((offset.as_millis() as u32, us.min(u32::MAX as u64) as u32));
    }

    fn count(&mut self, tier: &str, reason: Option<&str>, n: u64) {
        for e in self.answers.iter_mut() {
            if e.0 == tier && e.1.as_deref() == reason {
                e.2 += n;
                return;
            }
        }
        self.answers
            .push((tier.to_string(), reason.map(str::to_string), n));
    }

    /// Parses a 200 body of this tally's kind and counts its tiers.
    pub fn answer(&mut self, body: &[u8]) -> Result<(), BadBody> {
        let good_eta = |x: f64| x.is_finite() && x >= 0.0;
        match self.kind {
            Kind::Eta => {
                let a: OneAnswer = serde_json::from_slice(body).map_err(|_| BadBody)?;
                if !good_eta(a.eta_s) || a.tier.is_empty() {
                    return Err(BadBody);
                }
                self.count(a.tier, a.fallback_reason, 1);
            }
            Kind::Route => {
                let a: RouteAnswer = serde_json::from_slice(body).map_err(|_| BadBody)?;
                if !good_eta(a.eta_s)
                    || a.geometry.kind != "LineString"
                    || a.geometry.coordinates.len() < 2
                {
                    return Err(BadBody);
                }
                self.count(a.tier, a.fallback_reason, 1);
            }
            Kind::Matrix { rows, cols } => {
                let a: MatrixAnswer = serde_json::from_slice(body).map_err(|_| BadBody)?;
                fn shape<T>(m: &[Vec<T>], rows: usize, cols: usize) -> bool {
                    m.len() == rows && m.iter().all(|r| r.len() == cols)
                }
                if !shape(&a.eta_s, rows, cols)
                    || !shape(&a.tier, rows, cols)
                    || !shape(&a.fallback_reason, rows, cols)
                    || !a.eta_s.iter().flatten().all(|x| good_eta(*x))
                {
                    return Err(BadBody);
                }
                for (trow, rrow) in a.tier.iter().zip(&a.fallback_reason) {
                    for (t, r) in trow.iter().zip(rrow) {
                        self.count(t, *r, 1);
                    }
                }
            }
        }
        Ok(())
    }

    pub fn merge(&mut self, o: Tally) {
        let _ = self.hist.add(&o.hist);
        let _ = self.wait.add(&o.wait);
        self.ok += o.ok;
        for (k, v) in o.errors {
            *self.errors.entry(k).or_default() += v;
        }
        for (t, r, n) in o.answers {
            self.count(&t, r.as_deref(), n);
        }
        self.samples.extend(o.samples);
        self.last_done = match (self.last_done, o.last_done) {
            (Some(a), Some(b)) => Some(a.max(b)),
            (a, b) => a.or(b),
        };
        self.reconnects += o.reconnects;
    }

    /// `tier` or `tier/reason` → count.
    pub fn answers(&self) -> BTreeMap<String, u64> {
        self.answers
            .iter()
            .map(|(t, r, n)| {
                let k = match r {
                    Some(r) => format!("{t}/{r}"),
                    None => t.clone(),
                };
                (k, *n)
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn answers_are_counted_by_tier_and_reason() {
        let mut t = Tally::new(Kind::Eta);
        t.answer(
            br#"{"eta_s":12.5,"meters":1,"tier":"historical","fallback_reason":"no_live_data"}"#,
        )
        .unwrap();
        t.answer(br#"{"eta_s":3,"tier":"live","fallback_reason":null}"#)
            .unwrap();
        t.answer(br#"{"eta_s":3,"tier":"live","fallback_reason":null}"#)
            .unwrap();
        assert!(t
            .answer(br#"{"eta_s":-1,"tier":"live","fallback_reason":null}"#)
            .is_err());
        assert!(t.answer(b"not json").is_err());
        let a = t.answers();
        assert_eq!(a["live"], 2);
        assert_eq!(a["historical/no_live_data"], 1);
    }

    #[test]
    fn matrix_shape_is_checked() {
        let mut t = Tally::new(Kind::Matrix { rows: 1, cols: 2 });
        t.answer(br#"{"eta_s":[[1,2]],"meters":[[1,2]],"tier":[["live","heuristic"]],"fallback_reason":[[null,"overloaded"]]}"#)
            .unwrap();
        assert!(t
            .answer(br#"{"eta_s":[[1]],"tier":[["live"]],"fallback_reason":[[null]]}"#)
            .is_err());
        assert_eq!(t.answers()["heuristic/overloaded"], 1);
    }
}
