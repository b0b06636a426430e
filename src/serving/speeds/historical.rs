//! The historical profile: a typical speed per edge for each of the 168
//! hours of the week, read from CSV.
//!
//! # Format
//!
//! A header row, then one row per (segment, hour). Columns, any order (see
//! the header rule in the CSV helpers: an unknown or repeated column, or a
//! missing required one, rejects the file):
//!
//! - `hour_of_week` (required): integer `0..=167`, hour 0 = Monday 00:00
//!   local time ([`hour_of_week`](super::clock::hour_of_week)).
//! - `kmh` (required): the typical speed, `0 < kmh ≤ max_speed_kmh`.
//! - `segment`: the segment (directed edge) id in the artifact.
//! - `way`: the OSM way id (or the synthetic city's way id) of the segment.
//! - `tail`, `head`: external ids of the segment's end nodes.
//!
//! The header has `segment`, or both `tail` and `head`, or all of them; an
//! empty cell is "not given". Each row names its segments by the rules of
//! [`edge_index`](super::edge_index): `segment` alone is that segment;
//! `tail` + `head` is every segment with those ends (only those on `way`
//! when given); `segment` with `way`, `tail` or `head` must agree with them.
//!
//! ```text
//! segment,way,tail,head,hour_of_week,kmh
//! 1042,,,,8,31.5
//! ,77,5001,5002,8,24
//! 1043,77,5002,5003,8,26
//! ```
//!
//! # Validation
//!
//! Each row gets at most one [`ErrorKind`], checked in this order: wrong field
//! count → `malformed_row`; a non-empty key cell not an unsigned integer, or
//! neither `segment` nor both `tail` and `head` → `malformed_row`; hour not
//! an integer in `0..=167` (including `2.5`, `-1`, text) → `bad_hour`; speed
//! unparsable → `malformed_row`; NaN/±inf → `not_a_number`; ≤ 0 (or
//! rounding to 0 as `f32`) → `nonpositive_speed`; above the maximum →
//! `over_max_speed`; no such segment, or no segment with these ends (on
//! this way) → `unknown_edge`; `segment` disagreeing with `way`, `tail` or
//! `head` → `segment_mismatch`. A later row for the same segment and hour
//! replaces an earlier one (counted as `superseded`).
//!
//! A table with more than `max_bad_share` bad rows is rejected whole, and so
//! is a table with a header but no data rows: replacing a profile by an
//! empty one would silently turn every hour into free-flow, which is far more
//! often an export mistake than an intent.
//!
//! # Storage
//!
//! Memory-lean: for each hour a slice of `(edge, speed)` sorted by edge, all
//! hours in one array with 169 offsets (8 bytes per stored value, nothing for
//! absent ones). Missing rows fall back to free-flow when a bucket is turned
//! into a speed vector.

use super::clock::HOURS_PER_WEEK;
use super::config::ValidationConfig;
use super::csv_input::{field, map_columns, parse_f64, parse_u64, reader, show, Hashing};
use super::edge_index::EdgeIndex;
use super::error::SpeedsError;
use super::report::{ErrorKind, Loc, ReportBuilder, TableReport};
use csv::ByteRecord;
use std::io::Read;

/// The CSV columns every table has, in their canonical order; the key
/// columns (`segment`, `way`, `tail`, `head`) come before them.
pub const COLUMNS: [&str; 2] = ["hour_of_week", "kmh"];

/// An accepted historical profile.
#[derive(Debug, Clone, PartialEq)]
pub struct HistoricalProfile {
    /// `(edge, speed_kmh)` of all hours, hour by hour, sorted by edge within
    /// an hour, one value per (edge, hour).
    entries: Vec<(u32, f32)>,
    /// `entries[hour_start[h]..hour_start[h + 1]]` is hour `h`; 169 values.
    hour_start: Vec<u32>,
    /// Accepted data rows of the source table.
    rows: u64,
    /// Content hash of the source bytes: identifies the table across
    /// restarts (a saved copy reloads with the same version).
    version: String,
}

impl HistoricalProfile {
    /// Parses and validates a CSV table. On success returns the profile and
    /// its report (which may list a few bad rows that were skipped); a
    /// rejected table is `Err(SpeedsError::Rejected(report))`.
    pub fn parse(
        csv: &[u8],
        index: &EdgeIndex,
        cfg: &ValidationConfig,
    ) -> Result<(HistoricalProfile, TableReport), SpeedsError> {
        Self::read(csv, index, cfg)
    }

    /// [`parse`](Self::parse) over a stream, read to its end row by row:
    /// memory is the profile being built (8 bytes per stored value), never
    /// the table's text. An I/O error of `input` is a
    /// [`SpeedsError::Csv`].
    pub fn read<R: Read>(
        input: R,
        index: &EdgeIndex,
        cfg: &ValidationConfig,
    ) -> Result<(HistoricalProfile, TableReport), SpeedsError> {
        let mut rdr = reader(Hashing::new(input));
        let ([c_hour, c_speed], keys) = map_columns(&mut rdr, COLUMNS)?;
        let want_fields = rdr
            .byte_headers()
            .map_err(|e| SpeedsError::Csv(e.to_string()))?
            .len();
        let mut rb = ReportBuilder::new(cfg);
        let mut per_hour: Vec<Vec<(u32, f32)>> = vec![Vec::new(); HOURS_PER_WEEK as usize];
        let mut rec = ByteRecord::new();
        loop {
            match rdr.read_byte_record(&mut rec) {
                Ok(true) => {}
                Ok(false) => break,
                Err(e) => return Err(SpeedsError::Csv(e.to_string())),
            }
            let line = Loc::Line(rdr.get_ref().line_of(&rec));
            if rec.len() != want_fields {
                let got = rec.len();
                rb.bad(line, ErrorKind::MalformedRow, || {
                    format!("{got} fields, expected {want_fields}")
                });
                continue;
            }
            let key = match keys.read(&rec) {
                Ok(k) => k,
                Err(e) => {
                    rb.bad(line, ErrorKind::MalformedRow, || e.message());
                    continue;
                }
            };
            let hour_b = field(&rec, c_hour);
            let hour = match parse_u64(hour_b) {
                Some(h) if h < u64::from(HOURS_PER_WEEK) => h as usize,
                _ => {
                    rb.bad(line, ErrorKind::BadHour, || {
                        format!(
                            "hour_of_week `{}`: expected an integer 0..=167",
                            show(hour_b)
                        )
                    });
                    continue;
                }
            };
            let speed_b = field(&rec, c_speed);
            let speed = match check_speed(speed_b, cfg) {
                Ok(s) => s,
                Err(kind) => {
                    rb.bad(line, kind, || speed_message(kind, &show(speed_b), cfg));
                    continue;
                }
            };
            let named = match index.resolve(&key) {
                Ok(n) => n,
                Err(refusal) => {
                    rb.bad(line, refusal.kind(), || refusal.message());
                    continue;
                }
            };
            rb.good();
            per_hour[hour].extend(named.iter().map(|e| (e, speed as f32)));
        }
        let version = rdr.into_inner().into_inner().version();
        let mut report = rb.finish(cfg, true);
        if report.rejected {
            return Err(SpeedsError::Rejected(Box::new(report)));
        }
        let total: usize = per_hour.iter().map(Vec::len).sum();
        let mut entries: Vec<(u32, f32)> = Vec::with_capacity(total);
        let mut hour_start = Vec::with_capacity(HOURS_PER_WEEK as usize + 1);
        let mut superseded = 0u64;
        for mut v in per_hour {
            hour_start.push(entries.len() as u32);
            // Stable: equal edges keep file order, so the last one is the
            // latest row.
            v.sort_by_key(|&(e, _)| e);
            let start = entries.len();
            for (e, s) in v {
                let n = entries.len();
                if n > start && entries[n - 1].0 == e {
                    entries[n - 1].1 = s;
                    superseded += 1;
                } else {
                    entries.push((e, s));
                }
            }
        }
        hour_start.push(entries.len() as u32);
        entries.shrink_to_fit();
        report.superseded = superseded;
        let profile = HistoricalProfile {
            entries,
            hour_start,
            rows: report.accepted,
            version,
        };
        Ok((profile, report))
    }

    /// The stored `(edge, speed_kmh)` values of one hour, sorted by edge;
    /// empty for an hour ≥ 168.
    pub fn hour(&self, hour: u8) -> &[(u32, f32)] {
        let h = hour as usize;
        if h >= HOURS_PER_WEEK as usize {
            return &[];
        }
        &self.entries[self.hour_start[h] as usize..self.hour_start[h + 1] as usize]
    }

    /// One speed per edge for `hour`: the table's value where it has one,
    /// `free_flow[e]` elsewhere. An hour ≥ 168 has no rows, so it yields
    /// free-flow.
    pub fn speeds_for_hour(&self, free_flow: &[f32], hour: u8) -> Vec<f32> {
        let mut out = Vec::new();
        self.speeds_for_hour_into(free_flow, hour, &mut out);
        out
    }

    /// [`speeds_for_hour`](Self::speeds_for_hour) into a reused buffer.
    /// Values for edges beyond `free_flow.len()` (a different graph) are
    /// skipped.
    pub fn speeds_for_hour_into(&self, free_flow: &[f32], hour: u8, out: &mut Vec<f32>) {
        out.clear();
        out.extend_from_slice(free_flow);
        for &(e, s) in self.hour(hour) {
            if let Some(x) = out.get_mut(e as usize) {
                *x = s;
            }
        }
    }

    /// Content hash of the source table (CRC-32 and byte length), stable
    /// across save and reload.
    pub fn version(&self) -> &str {
        &self.version
    }

    /// Accepted data rows of the source table.
    pub fn rows(&self) -> u64 {
        self.rows
    }

    /// Stored (segment, hour) values; parallel segments count once each.
    pub fn entries(&self) -> usize {
        self.entries.len()
    }
}

/// Validates a speed field: parsed, finite, positive, at most the maximum.
pub(crate) fn check_speed(b: &[u8], cfg: &ValidationConfig) -> Result<f64, ErrorKind> {
    let s = parse_f64(b).ok_or(ErrorKind::MalformedRow)?;
    check_speed_value(s, cfg)
}

/// Validates a parsed speed.
pub(crate) fn check_speed_value(s: f64, cfg: &ValidationConfig) -> Result<f64, ErrorKind> {
    if !s.is_finite() {
        Err(ErrorKind::NotANumber)
    } else if s <= 0.0 || s as f32 <= 0.0 {
        // Also a positive value so small it is stored as 0 in f32.
        Err(ErrorKind::NonpositiveSpeed)
    } else if s > cfg.max_speed_kmh {
        Err(ErrorKind::OverMaxSpeed)
    } else {
        Ok(s)
    }
}

/// The message for a speed refused with `kind`.
pub(crate) fn speed_message(kind: ErrorKind, field: &str, cfg: &ValidationConfig) -> String {
    match kind {
        ErrorKind::MalformedRow => format!("kmh `{field}`: not a number"),
        ErrorKind::NotANumber => format!("kmh `{field}`: not a finite number"),
        ErrorKind::NonpositiveSpeed => format!("kmh `{field}`: must be > 0"),
        _ => format!(
            "kmh `{field}`: above the maximum {} km/h",
            cfg.max_speed_kmh
        ),
    }
}
