//! Counting and reporting: per-connection tallies (latency histogram,
//! errors by kind, answers by tier and fallback reason), their merge, and the
//! per-scenario summary written as a table, as JSON and (by `plot`) as SVG.
//!
//! Latencies live in HdrHistogram (microseconds, 3 significant digits, up
//! to ten minutes), so percentiles are exact to 0.1% whatever the spread.

use crate::engine::Outcome;
use crate::workload::Kind;
use hdrhistogram::Histogram;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::time::{Duration, Instant};

/// Largest latency the histograms hold, µs (ten minutes).
const MAX_US: u64 = 600_000_000;

fn histogram() -> Histogram<u64> {
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

/// Server resource use during a scenario (when the server's pid is known).
#[derive(Debug, Clone, Serialize)]
pub struct ServerUse {
    pub pid: u32,
    /// Whether the server shares this process (then CPU includes the
    /// generator).
    pub in_process: bool,
    pub cpu_s: f64,
    pub cpu_ms_per_answer: f64,
    pub rss_mb: f64,
    pub hwm_mb: f64,
}

/// Generator self-checks.
#[derive(Debug, Clone, Serialize)]
pub struct GeneratorHealth {
    /// How late the pacer released tickets: large values mean the
    /// generator, not the server, was short of CPU.
    pub pacer_late_p99_ms: f64,
    pub pacer_late_max_ms: f64,
    /// Queueing for a free connection inside the generator.
    pub pool_wait_p99_ms: f64,
    pub reconnects: u64,
}

/// Everything reported for one scenario run.
#[derive(Debug, Clone, Serialize)]
pub struct Summary {
    pub scenario: String,
    pub system: String,
    pub workload: String,
    pub target_rate: f64,
    pub duration_s: f64,
    pub connections: usize,
    pub scheduled: u64,
    pub ok: u64,
    /// Good answers ÷ scheduled requests.
    pub answered_share: f64,
    /// Good answers ÷ (first scheduled time → last answer).
    pub achieved_rate: f64,
    pub latency_ms: Percentiles,
    pub errors: BTreeMap<String, u64>,
    pub error_total: u64,
    /// Unit of `answers`: `responses` or `cells`.
    pub answers_unit: &'static str,
    pub answers: BTreeMap<String, u64>,
    pub generator: GeneratorHealth,
    pub server: Option<ServerUse>,
    /// Machine-wide CPU during the run, to spot noise from other work.
    pub machine: Option<MachineUse>,
    /// Free-form remarks (verdicts, admin traffic of a storm, ...).
    pub notes: Vec<String>,
    pub timeline: Vec<Window>,
    /// Latency by percentile for the plot (not written to JSON).
    #[serde(skip)]
    pub curve: Vec<(f64, f64)>,
}

/// CPU seconds spent on the whole machine during a run, split by who.
#[derive(Debug, Clone, Serialize)]
pub struct MachineUse {
    pub wall_s: f64,
    /// Busy CPU seconds over all cores (`/proc/stat`: user, nice, system,
    /// irq, softirq).
    pub busy_cpu_s: f64,
    /// CPU time the hypervisor gave to something else while this machine
    /// wanted it (steal): host contention no process here can see.
    pub stolen_cpu_s: f64,
    pub generator_cpu_s: f64,
    /// The server's, when it is a separate process.
    pub server_cpu_s: f64,
    /// Everything else: other work on the machine competing with the run.
    pub other_cpu_s: f64,
    pub loadavg_1m_before: f64,
}

impl Summary {
    pub fn of(o: &Outcome) -> Summary {
        let t = &o.tally;
        let error_total = t.errors.values().sum();
        Summary {
            scenario: o.plan.scenario.clone(),
            system: o.plan.system.clone(),
            workload: o.plan.workload.kind.label(),
            target_rate: o.plan.rate,
            duration_s: o.plan.duration.as_secs_f64(),
            connections: o.plan.connections,
            scheduled: o.scheduled,
            ok: t.ok,
            answered_share: if o.scheduled == 0 {
                0.0
            } else {
                t.ok as f64 / o.scheduled as f64
            },
            achieved_rate: t.ok as f64 / o.elapsed.as_secs_f64().max(1e-9),
            latency_ms: Percentiles::of(&t.hist),
            errors: t.errors.clone(),
            error_total,
            answers_unit: if matches!(t.kind, Kind::Matrix { .. }) {
                "cells"
            } else {
                "responses"
            },
            answers: t.answers(),
            generator: GeneratorHealth {
                pacer_late_p99_ms: o.pacer_late.value_at_quantile(0.99) as f64 / 1000.0,
                pacer_late_max_ms: o.pacer_late.max() as f64 / 1000.0,
                pool_wait_p99_ms: t.wait.value_at_quantile(0.99) as f64 / 1000.0,
                reconnects: t.reconnects,
            },
            server: None,
            machine: None,
            notes: Vec::new(),
            timeline: timeline(&t.samples, 250),
            curve: crate::plot::curve(&t.hist),
        }
    }

    /// Share of answers (or cells) with this fallback reason.
    pub fn reason_share(&self, reason: &str) -> f64 {
        let all: u64 = self.answers.values().sum();
        if all == 0 {
            return 0.0;
        }
        let k: u64 = self
            .answers
            .iter()
            .filter(|(k, _)| {
                k.rsplit_once('/')
                    .map(|(_, r)| r == reason)
                    .unwrap_or(false)
            })
            .map(|(_, v)| v)
            .sum();
        k as f64 / all as f64
    }
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

/// The stdout table header.
pub fn table_header() -> String {
    format!(
        "{:<26} {:<8} {:>9} {:>9} {:>7} {:>8} {:>8} {:>8} {:>8} {:>8} {:>6}  {}",
        "scenario",
        "system",
        "target/s",
        "achieved",
        "ok%",
        "p50 ms",
        "p90 ms",
        "p99 ms",
        "p99.9",
        "max ms",
        "errors",
        "answers"
    )
}

fn short_answers(s: &Summary) -> String {
    let all: u64 = s.answers.values().sum();
    let mut v: Vec<(&String, &u64)> = s.answers.iter().collect();
    v.sort_by(|a, b| b.1.cmp(a.1));
    v.iter()
        .take(4)
        .map(|(k, n)| format!("{k} {:.1}%", 100.0 * **n as f64 / all.max(1) as f64))
        .collect::<Vec<_>>()
        .join(", ")
}

/// One stdout table row.
pub fn table_row(s: &Summary) -> String {
    let l = &s.latency_ms;
    format!(
        "{:<26} {:<8} {:>9.0} {:>9.0} {:>6.1}% {:>8.3} {:>8.3} {:>8.3} {:>8.3} {:>8.2} {:>6}  {}{}{}",
        s.scenario,
        s.system,
        s.target_rate,
        s.achieved_rate,
        100.0 * s.answered_share,
        l.p50,
        l.p90,
        l.p99,
        l.p999,
        l.max,
        s.error_total,
        short_answers(s),
        if s.errors.is_empty() {
            String::new()
        } else {
            format!(
                "  [{}]",
                s.errors
                    .iter()
                    .map(|(k, v)| format!("{k}={v}"))
                    .collect::<Vec<_>>()
                    .join(" ")
            )
        },
        noise(s)
    )
}

/// Whether other work (over 0.2 cores) or the hypervisor (over 0.05
/// cores stolen) took a noticeable share of the machine during the run.
pub fn is_noisy(s: &Summary) -> bool {
    match &s.machine {
        Some(m) => {
            let w = m.wall_s.max(1e-9);
            m.other_cpu_s / w > 0.2 || m.stolen_cpu_s / w > 0.05
        }
        None => false,
    }
}

/// `  (noisy: ...)` when other work or the hypervisor took a noticeable
/// share of the machine during the run.
fn noise(s: &Summary) -> String {
    let Some(m) = &s.machine else {
        return String::new();
    };
    let w = m.wall_s.max(1e-9);
    let (other, steal) = (m.other_cpu_s / w, m.stolen_cpu_s / w);
    if is_noisy(s) {
        format!("  (noisy: other work {other:.2} cores, stolen {steal:.2} cores)")
    } else {
        String::new()
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
