//! The live layer: the most recent observed speed per edge.
//!
//! # Input
//!
//! An observation names its segments like a historical row (`segment`,
//! and/or `tail` + `head`, optional `way`; rules in
//! [`edge_index`](super::edge_index)) and carries a speed `kmh`, when it was
//! observed (`observed_at`, RFC 3339 with offset) and how many measurements
//! it summarises (`samples`):
//!
//! - JSON: a top-level array of [`Observation`] objects with those field
//!   names (key fields optional, absent or `null` = not given). Unknown
//!   fields are refused; an element that is not such an object (wrong type,
//!   missing or unknown field, negative `samples`) is one `malformed_row`,
//!   reported by its 0-based index.
//! - CSV: a header naming `kmh`, `observed_at`, `samples` and the key
//!   columns (`segment`, or `tail` and `head`, or all; optional `way`), any
//!   order; an empty key cell is "not given"; errors reported by 1-based
//!   line.
//!
//! ```text
//! segment,tail,head,kmh,observed_at,samples
//! 1042,,,18.5,2026-12-02T08:15:00+01:00,4
//! ,5001,5002,22,2026-12-02T08:15:00+01:00,2
//! ```
//!
//! # Validation
//!
//! One [`ErrorKind`] per observation, checked in this order: (CSV) wrong
//! field count, a non-empty key cell not an unsigned integer, unparsable
//! speed → `malformed_row`; neither `segment` nor both `tail` and `head` →
//! `malformed_row`; NaN/±inf → `not_a_number`; ≤ 0 → `nonpositive_speed`;
//! above the maximum → `over_max_speed`; `observed_at` not RFC 3339 →
//! `bad_timestamp`; more than `max_future_skew_s` ahead of `now` →
//! `future_timestamp`; `samples` not an integer ≥ 1 → `bad_samples`; no
//! such segment, or none with these ends (on this way) → `unknown_edge`;
//! `segment` disagreeing with `way`, `tail` or `head` → `segment_mismatch`.
//! A batch whose bad share exceeds `max_bad_share` is rejected whole and
//! changes nothing. An empty batch is accepted and changes nothing (unlike an
//! empty historical table it cannot wipe anything out).
//!
//! # Merging
//!
//! Newest observation per edge wins: an observation older than the one held
//! is ignored and counted as `superseded`; an equal timestamp replaces (the
//! later arrival wins). An observation naming several segments (by ends)
//! applies to all.
//!
//! # Storage
//!
//! Dense per-edge arrays (speed, observation time in Unix milliseconds,
//! samples; 16 bytes per edge), so that blending is one branch-light pass
//! over all edges and an update is O(1) per edge.

use super::batch::{read_csv, read_json, Batch, Compact};
use super::config::ValidationConfig;
use super::edge_index::EdgeIndex;
use super::error::SpeedsError;
use super::historical::{check_speed_value, speed_message};
use super::observation::{check_obs, record, At, Valid};
pub use super::observation::{Observation, COLUMNS};
use super::report::{reject_reason, ErrorKind, Loc, ReportBuilder, TableReport};
use chrono::{DateTime, SecondsFormat, Utc};

/// Marks "no observation held" in the time array.
pub(crate) const NO_OBS: i64 = i64::MIN;

/// What the layer holds for one edge.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LiveEntry {
    pub speed_kmh: f32,
    pub observed_at: DateTime<Utc>,
    pub samples: u32,
}

/// Live speeds, one slot per edge.
#[derive(Debug, Clone, PartialEq)]
pub struct LiveLayer {
    speed: Vec<f32>,
    /// Unix milliseconds of the held observation, [`NO_OBS`] when empty.
    observed_ms: Vec<i64>,
    samples: Vec<u32>,
    /// Edges holding an observation.
    held: usize,
    /// Newest held observation time, [`NO_OBS`] when empty.
    newest_ms: i64,
    /// Bumped whenever an update changes the layer, so the service knows
    /// when a re-blend is due.
    generation: u64,
}

impl LiveLayer {
    /// An empty layer for a graph with `num_edges` edges
    /// ([`EdgeIndex::num_edges`]).
    pub fn new(num_edges: usize) -> Self {
        LiveLayer {
            speed: vec![0.0; num_edges],
            observed_ms: vec![NO_OBS; num_edges],
            samples: vec![0; num_edges],
            held: 0,
            newest_ms: NO_OBS,
            generation: 0,
        }
    }

    pub fn num_edges(&self) -> usize {
        self.speed.len()
    }

    /// Edges holding an observation.
    pub fn len(&self) -> usize {
        self.held
    }

    pub fn is_empty(&self) -> bool {
        self.held == 0
    }

    /// Counter bumped by every update or expiry that changed the layer.
    pub fn generation(&self) -> u64 {
        self.generation
    }

    /// The observation held for an edge.
    pub fn get(&self, edge: u32) -> Option<LiveEntry> {
        let i = edge as usize;
        let ms = *self.observed_ms.get(i)?;
        if ms == NO_OBS {
            return None;
        }
        Some(LiveEntry {
            speed_kmh: self.speed[i],
            observed_at: DateTime::from_timestamp_millis(ms)?,
            samples: self.samples[i],
        })
    }

    /// Time of the newest held observation.
    pub fn newest_observed_at(&self) -> Option<DateTime<Utc>> {
        if self.newest_ms == NO_OBS {
            None
        } else {
            DateTime::from_timestamp_millis(self.newest_ms)
        }
    }

    /// Per-edge speeds and observation times (Unix ms, `i64::MIN` = none)
    /// for the blend.
    pub(crate) fn columns(&self) -> (&[f32], &[i64]) {
        (&self.speed, &self.observed_ms)
    }

    pub(crate) fn newest_ms(&self) -> Option<i64> {
        (self.newest_ms != NO_OBS).then_some(self.newest_ms)
    }

    /// Validates and applies typed observations (errors by index).
    pub fn apply(
        &mut self,
        index: &EdgeIndex,
        batch: &[Observation],
        now: DateTime<Utc>,
        cfg: &ValidationConfig,
    ) -> Result<TableReport, SpeedsError> {
        self.check_index(index)?;
        let now_ms = now.timestamp_millis();
        let mut rb = ReportBuilder::new(cfg);
        let mut valid = Vec::with_capacity(batch.len());
        for (i, o) in batch.iter().enumerate() {
            let checked = check_obs(
                index,
                &o.key(),
                check_speed_value(o.kmh, cfg)
                    .map_err(|k| (k, speed_message(k, &o.kmh.to_string(), cfg))),
                At::Text(&o.observed_at),
                Some(u64::from(o.samples)),
                now_ms,
                cfg,
            );
            record(&mut rb, &mut valid, Loc::Index(i as u64), checked);
        }
        self.commit(rb.finish(cfg, false), valid)
    }

    /// Validates and applies a JSON array of observations (errors by
    /// 0-based index); [`read_json`] and [`apply_batch`](Self::apply_batch).
    pub fn apply_json(
        &mut self,
        index: &EdgeIndex,
        json: &[u8],
        now: DateTime<Utc>,
        cfg: &ValidationConfig,
    ) -> Result<TableReport, SpeedsError> {
        self.check_index(index)?;
        let batch = read_json(index, json, now, cfg)?;
        self.apply_batch(index, &batch, now, cfg)
    }

    /// Validates and applies a CSV file of observations (errors by 1-based
    /// line, header = line 1); [`read_csv`] and
    /// [`apply_batch`](Self::apply_batch).
    pub fn apply_csv(
        &mut self,
        index: &EdgeIndex,
        csv: &[u8],
        now: DateTime<Utc>,
        cfg: &ValidationConfig,
    ) -> Result<TableReport, SpeedsError> {
        self.check_index(index)?;
        let batch = read_csv(index, csv, now, cfg)?;
        self.apply_batch(index, &batch, now, cfg)
    }

    /// Applies a batch read by [`read_json`] or [`read_csv`] (or taken back
    /// from the write-ahead log), newest per edge winning, and returns its
    /// report with `superseded` filled in. Each observation is checked
    /// again against `index`, `now` and `cfg`: with those the batch was
    /// read with, every one passes; a logged batch replayed over another
    /// graph may lose some, which then count as bad rows of the batch
    /// (rejecting it whole if its bad share now exceeds the maximum).
    pub fn apply_batch(
        &mut self,
        index: &EdgeIndex,
        batch: &Batch,
        now: DateTime<Utc>,
        cfg: &ValidationConfig,
    ) -> Result<TableReport, SpeedsError> {
        self.check_index(index)?;
        let now_ms = now.timestamp_millis();
        let check = |o: &Compact| {
            check_obs(
                index,
                &o.key,
                check_speed_value(o.kmh, cfg)
                    .map_err(|k| (k, speed_message(k, &o.kmh.to_string(), cfg))),
                At::Ms(o.observed_ms),
                Some(u64::from(o.samples)),
                now_ms,
                cfg,
            )
        };
        let mut report = batch.report().clone();
        let mut newly_bad = [0u64; ErrorKind::ALL.len()];
        for o in batch.observations() {
            if let Err((kind, _)) = check(&o) {
                newly_bad[kind as usize] += 1;
            }
        }
        let n: u64 = newly_bad.iter().sum();
        if n > 0 {
            report.accepted = report.accepted.saturating_sub(n);
            report.bad += n;
            for (k, &c) in ErrorKind::ALL.iter().zip(&newly_bad) {
                if c > 0 {
                    *report.bad_by_kind.entry(k.name().to_string()).or_default() += c;
                }
            }
            report.reject_reason = reject_reason(report.bad, report.rows, cfg);
            report.rejected = report.reject_reason.is_some();
        }
        if report.rejected {
            return Err(SpeedsError::Rejected(Box::new(report)));
        }
        let mut changed = false;
        for o in batch.observations() {
            let Ok(v) = check(&o) else { continue };
            if self.commit_one(&v) {
                changed = true;
            } else {
                report.superseded += 1;
            }
        }
        if changed {
            self.generation += 1;
        }
        Ok(report)
    }

    /// Drops observations older than `ttl` at `now` (age > ttl, the same
    /// rule the blend uses); returns how many edges were cleared.
    pub fn expire(&mut self, now: DateTime<Utc>, ttl: std::time::Duration) -> usize {
        let limit = now.timestamp_millis().saturating_sub(ttl_ms(ttl));
        let mut dropped = 0;
        let mut newest = NO_OBS;
        for (ms, sp) in self.observed_ms.iter_mut().zip(self.speed.iter_mut()) {
            if *ms == NO_OBS {
                continue;
            }
            if *ms < limit {
                *ms = NO_OBS;
                *sp = 0.0;
                dropped += 1;
            } else {
                newest = newest.max(*ms);
            }
        }
        if dropped > 0 {
            for (s, &ms) in self.samples.iter_mut().zip(&self.observed_ms) {
                if ms == NO_OBS {
                    *s = 0;
                }
            }
            self.held -= dropped;
            self.generation += 1;
        }
        self.newest_ms = newest;
        dropped
    }

    /// The held observations named by their ends (`tail`, `head`; no
    /// segment id, so they survive a rebuild that renumbers segments), one
    /// per distinct end pair (parallel segments share theirs), ascending by
    /// `(tail, head)`. Applying them to an empty layer gives this layer back
    /// when no two parallel segments hold different observations.
    pub fn to_observations(&self, index: &EdgeIndex) -> Vec<Observation> {
        let mut out = Vec::new();
        for ((from, to), edges) in index.groups() {
            let best = edges
                .iter()
                .filter_map(|&e| self.get(e))
                .max_by_key(|x| x.observed_at);
            if let Some(x) = best {
                out.push(Observation {
                    segment: None,
                    way: None,
                    tail: Some(from),
                    head: Some(to),
                    kmh: f64::from(x.speed_kmh),
                    observed_at: x.observed_at.to_rfc3339_opts(SecondsFormat::Millis, true),
                    samples: x.samples,
                });
            }
        }
        out
    }

    fn check_index(&self, index: &EdgeIndex) -> Result<(), SpeedsError> {
        if index.num_edges() != self.num_edges() {
            return Err(SpeedsError::LengthMismatch {
                what: "edge index",
                got: index.num_edges(),
                expected: self.num_edges(),
            });
        }
        Ok(())
    }

    /// Applies a validated batch unless its report rejects it.
    fn commit(
        &mut self,
        mut report: TableReport,
        valid: Vec<Valid<'_>>,
    ) -> Result<TableReport, SpeedsError> {
        if report.rejected {
            return Err(SpeedsError::Rejected(Box::new(report)));
        }
        let mut changed = false;
        for v in valid {
            if self.commit_one(&v) {
                changed = true;
            } else {
                report.superseded += 1;
            }
        }
        if changed {
            self.generation += 1;
        }
        Ok(report)
    }

    /// Applies one validated observation to every edge it names that holds
    /// nothing newer; whether it took effect anywhere.
    fn commit_one(&mut self, v: &Valid<'_>) -> bool {
        let mut took = false;
        for e in v.edges.iter() {
            let i = e as usize;
            let held = self.observed_ms[i];
            if held == NO_OBS || v.observed_ms >= held {
                if held == NO_OBS {
                    self.held += 1;
                }
                self.observed_ms[i] = v.observed_ms;
                self.speed[i] = v.speed;
                self.samples[i] = v.samples;
                took = true;
            }
        }
        if took {
            self.newest_ms = self.newest_ms.max(v.observed_ms);
        }
        took
    }
}

/// `ttl` in milliseconds, saturating.
pub(crate) fn ttl_ms(d: std::time::Duration) -> i64 {
    i64::try_from(d.as_millis()).unwrap_or(i64::MAX)
}
