//! A live batch read as a stream into its compact form: the report of the
//! validation and the valid observations, about 30 bytes each, which is
//! also what the write-ahead log records. A batch's text is never held
//! whole: a JSON array is read element by element (a serde visitor over
//! the array's `SeqAccess`), a CSV file record by record, each row checked
//! by the rules of [`live`](super::live) as it arrives.
//!
//! # Compact form
//!
//! Little-endian, back to back:
//!
//! ```text
//! header: rows of the batch (u64) | bad rows (u64)
//! record: flags (u8: 1 segment, 2 way, 4 tail, 8 head given)
//!         | the given ids (u64 each, in that order)
//!         | kmh (f64) | observed_at, Unix ms (i64) | samples (u32)
//! ```
//!
//! The speed is kept as given (f64) and the time at the millisecond the
//! layer stores, so applying the compact form is applying the batch
//! ([`LiveLayer::apply_batch`](super::LiveLayer::apply_batch)).

use super::config::ValidationConfig;
use super::csv_input::{field, map_columns, parse_u64, reader, show};
use super::edge_index::{EdgeIndex, SegmentKey};
use super::error::{BatchFormError, SpeedsError};
use super::historical::{check_speed, check_speed_value, speed_message};
use super::observation::{check_obs, At, Observation, COLUMNS};
use super::report::{ErrorKind, Loc, ReportBuilder, TableReport};
use chrono::{DateTime, Utc};
use csv::ByteRecord;
use serde::Deserialize;
use std::io::Read;

const HAS_SEGMENT: u8 = 1;
const HAS_WAY: u8 = 2;
const HAS_TAIL: u8 = 4;
const HAS_HEAD: u8 = 8;
const HEADER: usize = 16;

/// A validated live batch, not yet applied: its report (without
/// `superseded`, which depends on the layer) and its valid observations in
/// the compact form.
#[derive(Debug, Clone, PartialEq)]
pub struct Batch {
    report: TableReport,
    data: Vec<u8>,
}

/// One observation of the compact form.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Compact {
    pub(crate) key: SegmentKey,
    pub(crate) kmh: f64,
    pub(crate) observed_ms: i64,
    pub(crate) samples: u32,
}

impl Batch {
    /// The validation report.
    pub fn report(&self) -> &TableReport {
        &self.report
    }

    /// The compact form (the write-ahead log's record of the batch).
    pub fn encoded(&self) -> &[u8] {
        &self.data
    }

    /// A batch from its compact form (a write-ahead log record), or why the
    /// bytes are not one. Its report has the counts, no row messages.
    pub fn decode(data: Vec<u8>) -> Result<Batch, BatchFormError> {
        if data.len() < HEADER {
            return Err(BatchFormError::CompactHeaderCut);
        }
        let rows = u64::from_le_bytes(data[..8].try_into().expect("8 bytes"));
        let bad = u64::from_le_bytes(data[8..16].try_into().expect("8 bytes"));
        let mut it = Records {
            data: &data,
            at: HEADER,
        };
        let mut n = 0u64;
        while it.at < data.len() {
            it.next_checked()?;
            n += 1;
        }
        if bad > rows || n != rows - bad {
            return Err(BatchFormError::CompactCount {
                observations: n,
                rows,
                bad,
            });
        }
        let report = TableReport {
            rows,
            accepted: n,
            bad,
            ..TableReport::default()
        };
        Ok(Batch { report, data })
    }

    /// The valid observations, in batch order.
    pub(crate) fn observations(&self) -> impl Iterator<Item = Compact> + '_ {
        let mut it = Records {
            data: &self.data,
            at: HEADER,
        };
        std::iter::from_fn(move || it.next_checked().ok().flatten())
    }
}

/// Walks the records of a compact form.
struct Records<'d> {
    data: &'d [u8],
    at: usize,
}

impl Records<'_> {
    /// The next record; `Ok(None)` at the end, `Err` if the bytes stop
    /// inside one.
    fn next_checked(&mut self) -> Result<Option<Compact>, BatchFormError> {
        if self.at >= self.data.len() {
            return Ok(None);
        }
        let flags = self.data[self.at];
        self.at += 1;
        let mut take = |n: usize| -> Result<&[u8], BatchFormError> {
            let b = self
                .data
                .get(self.at..self.at + n)
                .ok_or(BatchFormError::CompactRecordCut)?;
            self.at += n;
            Ok(b)
        };
        let mut id = |bit: u8| -> Result<Option<u64>, BatchFormError> {
            if flags & bit == 0 {
                return Ok(None);
            }
            Ok(Some(u64::from_le_bytes(take(8)?.try_into().expect("8"))))
        };
        let key = SegmentKey {
            segment: id(HAS_SEGMENT)?,
            way: id(HAS_WAY)?,
            tail: id(HAS_TAIL)?,
            head: id(HAS_HEAD)?,
        };
        let kmh = f64::from_le_bytes(take(8)?.try_into().expect("8"));
        let observed_ms = i64::from_le_bytes(take(8)?.try_into().expect("8"));
        let samples = u32::from_le_bytes(take(4)?.try_into().expect("4"));
        Ok(Some(Compact {
            key,
            kmh,
            observed_ms,
            samples,
        }))
    }
}

/// Collects a batch row by row: the report and the compact form.
struct Builder<'a> {
    index: &'a EdgeIndex,
    cfg: &'a ValidationConfig,
    now_ms: i64,
    rb: ReportBuilder,
    data: Vec<u8>,
}

impl<'a> Builder<'a> {
    fn new(index: &'a EdgeIndex, now: DateTime<Utc>, cfg: &'a ValidationConfig) -> Self {
        Builder {
            index,
            cfg,
            now_ms: now.timestamp_millis(),
            rb: ReportBuilder::new(cfg),
            data: vec![0; HEADER],
        }
    }

    /// Checks one parsed row and keeps it if valid.
    fn row(
        &mut self,
        loc: Loc,
        key: &SegmentKey,
        speed: Result<f64, (ErrorKind, String)>,
        at: At<'_>,
        samples: Option<u64>,
        explain_samples: impl FnOnce(ErrorKind, String) -> (ErrorKind, String),
    ) {
        let kmh = speed.as_ref().ok().copied();
        match check_obs(self.index, key, speed, at, samples, self.now_ms, self.cfg) {
            Ok(v) => {
                self.rb.good();
                encode(
                    &mut self.data,
                    key,
                    kmh.expect("a valid row has a speed"),
                    v.observed_ms,
                    v.samples,
                );
            }
            Err((kind, msg)) => {
                let (kind, msg) = explain_samples(kind, msg);
                self.rb.bad(loc, kind, || msg)
            }
        }
    }

    fn finish(self) -> Result<Batch, SpeedsError> {
        let report = self.rb.finish(self.cfg, false);
        if report.rejected {
            return Err(SpeedsError::Rejected(Box::new(report)));
        }
        let mut data = self.data;
        data[..8].copy_from_slice(&report.rows.to_le_bytes());
        data[8..16].copy_from_slice(&report.bad.to_le_bytes());
        data.shrink_to_fit();
        Ok(Batch { report, data })
    }
}

fn encode(out: &mut Vec<u8>, key: &SegmentKey, kmh: f64, observed_ms: i64, samples: u32) {
    let ids = [
        (HAS_SEGMENT, key.segment),
        (HAS_WAY, key.way),
        (HAS_TAIL, key.tail),
        (HAS_HEAD, key.head),
    ];
    out.push(
        ids.iter()
            .filter(|(_, v)| v.is_some())
            .map(|(b, _)| b)
            .sum(),
    );
    for v in ids.iter().filter_map(|(_, v)| *v) {
        out.extend_from_slice(&v.to_le_bytes());
    }
    out.extend_from_slice(&kmh.to_le_bytes());
    out.extend_from_slice(&observed_ms.to_le_bytes());
    out.extend_from_slice(&samples.to_le_bytes());
}

/// Reads and validates a JSON array of observations from a stream (errors
/// by 0-based index). Memory is one element at a time plus the compact
/// form of the valid ones. A batch that is not a JSON array of values (a
/// syntax error anywhere, trailing text, an I/O error of `input`) is
/// [`SpeedsError::Json`]; one over the bad-row share is
/// [`SpeedsError::Rejected`].
pub fn read_json<R: Read>(
    index: &EdgeIndex,
    input: R,
    now: DateTime<Utc>,
    cfg: &ValidationConfig,
) -> Result<Batch, SpeedsError> {
    use serde::de::{Deserializer as _, SeqAccess, Visitor};
    /// Visits the array's elements one by one.
    struct Elements<'b, 'a>(&'b mut Builder<'a>);
    impl<'de> Visitor<'de> for Elements<'_, '_> {
        type Value = ();
        fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
            f.write_str("an array of observations")
        }
        fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<(), A::Error> {
            let mut i = 0u64;
            while let Some(e) = seq.next_element::<Element>()? {
                self.0.element(i, &e);
                i += 1;
            }
            Ok(())
        }
    }
    let json_err = |e: serde_json::Error| SpeedsError::Json(BatchFormError::NotAnArray(e));
    let mut b = Builder::new(index, now, cfg);
    let mut de =
        serde_json::Deserializer::from_reader(std::io::BufReader::with_capacity(64 * 1024, input));
    de.deserialize_seq(Elements(&mut b)).map_err(json_err)?;
    de.end().map_err(json_err)?;
    b.finish()
}

impl Builder<'_> {
    /// One element of a JSON batch.
    fn element(&mut self, i: u64, e: &Element) {
        let loc = Loc::Index(i);
        let o = match e.observation() {
            Ok(o) => o,
            Err(e) => {
                self.rb.bad(loc, ErrorKind::MalformedRow, || e.to_string());
                return;
            }
        };
        let speed = check_speed_value(o.kmh, self.cfg)
            .map_err(|k| (k, speed_message(k, &o.kmh.to_string(), self.cfg)));
        self.row(
            loc,
            &o.key(),
            speed,
            At::Text(&o.observed_at),
            Some(u64::from(o.samples)),
            |k, m| (k, m),
        );
    }
}

/// Reads and validates a CSV file of observations from a stream (errors by
/// 1-based line, header = line 1). Memory is one record at a time plus the
/// compact form of the valid ones.
pub fn read_csv<R: Read>(
    index: &EdgeIndex,
    input: R,
    now: DateTime<Utc>,
    cfg: &ValidationConfig,
) -> Result<Batch, SpeedsError> {
    let mut rdr = reader(input);
    let ([c_speed, c_at, c_samples], keys) = map_columns(&mut rdr, COLUMNS)?;
    let want_fields = rdr
        .byte_headers()
        .map_err(|e| SpeedsError::Csv(e.to_string()))?
        .len();
    let mut b = Builder::new(index, now, cfg);
    let mut rec = ByteRecord::new();
    loop {
        match rdr.read_byte_record(&mut rec) {
            Ok(true) => {}
            Ok(false) => break,
            Err(e) => return Err(SpeedsError::Csv(e.to_string())),
        }
        let loc = Loc::Line(rdr.get_ref().line_of(&rec));
        if rec.len() != want_fields {
            let got = rec.len();
            b.rb.bad(loc, ErrorKind::MalformedRow, || {
                format!("{got} fields, expected {want_fields}")
            });
            continue;
        }
        let key = match keys.read(&rec) {
            Ok(k) => k,
            Err(e) => {
                b.rb.bad(loc, ErrorKind::MalformedRow, || e.message());
                continue;
            }
        };
        let at = String::from_utf8_lossy(field(&rec, c_at));
        let samples_b = field(&rec, c_samples);
        let samples = parse_u64(samples_b);
        let speed_b = field(&rec, c_speed);
        let speed =
            check_speed(speed_b, cfg).map_err(|k| (k, speed_message(k, &show(speed_b), cfg)));
        b.row(loc, &key, speed, At::Text(&at), samples, |k, m| {
            if k == ErrorKind::BadSamples && samples.is_none() {
                (
                    k,
                    format!("samples `{}`: expected an integer ≥ 1", show(samples_b)),
                )
            } else {
                (k, m)
            }
        });
    }
    b.finish()
}

/// One element of a JSON batch as read: its value (integral numbers as
/// integers), and the first key given twice in it. `serde_json::Value` keeps the last of duplicate keys, so
/// `{"kmh": 5, "kmh": 500}` would pass as 500; the public API refuses
/// duplicates (serde's derive reports them) and so does this.
struct Element {
    value: serde_json::Value,
    duplicate: Option<String>,
}

impl Element {
    /// The observation, or why the element is not one (an object
    /// without duplicate keys: serde's derive would also read an array of
    /// the fields in order, which the schema does not allow).
    fn observation(&self) -> Result<Observation, ElementError> {
        if let Some(k) = &self.duplicate {
            return Err(ElementError::DuplicateKey(k.clone()));
        }
        if !self.value.is_object() {
            return Err(ElementError::NotAnObject);
        }
        Observation::deserialize(&self.value).map_err(ElementError::Fields)
    }
}

/// Why an element of a JSON batch is not an observation (a bad row).
#[derive(Debug, thiserror::Error)]
enum ElementError {
    #[error("not an observation: duplicate key `{0}`")]
    DuplicateKey(String),
    #[error("not an observation: must be a JSON object")]
    NotAnObject,
    #[error("not an observation: {0}")]
    Fields(serde_json::Error),
}

impl<'de> Deserialize<'de> for Element {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        use serde::de::{MapAccess, SeqAccess, Visitor};
        use serde_json::{Map, Value};
        /// Builds a `Value`, noting the first duplicate key at any depth.
        struct V<'a>(&'a mut Option<String>);
        /// One nested value through the same visitor.
        struct Seed<'a>(&'a mut Option<String>);
        impl<'de> serde::de::DeserializeSeed<'de> for Seed<'_> {
            type Value = Value;
            fn deserialize<D: serde::Deserializer<'de>>(self, d: D) -> Result<Value, D::Error> {
                d.deserialize_any(V(self.0))
            }
        }
        impl<'de> Visitor<'de> for V<'_> {
            type Value = Value;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("a JSON value")
            }
            fn visit_bool<E>(self, v: bool) -> Result<Value, E> {
                Ok(Value::Bool(v))
            }
            fn visit_i64<E>(self, v: i64) -> Result<Value, E> {
                Ok(Value::from(v))
            }
            fn visit_u64<E>(self, v: u64) -> Result<Value, E> {
                Ok(Value::from(v))
            }
            fn visit_f64<E>(self, v: f64) -> Result<Value, E> {
                // JSON Schema's `integer` takes a number with a zero
                // fractional part (2020-12 validation §6.1.1): `3.0` is
                // read as the integer 3, so `samples: 3.0` is taken.
                if v.fract() == 0.0 && (0.0..18_446_744_073_709_551_616.0).contains(&v) {
                    Ok(Value::from(v as u64))
                } else if v.fract() == 0.0 && (-9_223_372_036_854_775_808.0..0.0).contains(&v) {
                    Ok(Value::from(v as i64))
                } else {
                    Ok(Value::from(v))
                }
            }
            fn visit_str<E>(self, v: &str) -> Result<Value, E> {
                Ok(Value::String(v.to_string()))
            }
            fn visit_string<E>(self, v: String) -> Result<Value, E> {
                Ok(Value::String(v))
            }
            fn visit_unit<E>(self) -> Result<Value, E> {
                Ok(Value::Null)
            }
            fn visit_none<E>(self) -> Result<Value, E> {
                Ok(Value::Null)
            }
            fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Value, A::Error> {
                let mut out = Vec::new();
                while let Some(v) = seq.next_element_seed(Seed(&mut *self.0))? {
                    out.push(v);
                }
                Ok(Value::Array(out))
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Value, A::Error> {
                let mut out = Map::new();
                while let Some(k) = map.next_key::<String>()? {
                    let v = map.next_value_seed(Seed(&mut *self.0))?;
                    if out.contains_key(&k) && self.0.is_none() {
                        *self.0 = Some(k.clone());
                    }
                    out.insert(k, v);
                }
                Ok(Value::Object(out))
            }
        }
        let mut duplicate = None;
        let value = d.deserialize_any(V(&mut duplicate))?;
        Ok(Element { value, duplicate })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::speeds::LiveLayer;
    use hodos_engine::import::synthetic;

    /// Hands out its input a few bytes per read (1 to 7, cycling), as a
    /// network stream would.
    struct Trickle<'a> {
        data: &'a [u8],
        step: usize,
    }

    impl Read for Trickle<'_> {
        fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
            self.step = self.step % 7 + 1;
            let n = self.step.min(buf.len()).min(self.data.len());
            buf[..n].copy_from_slice(&self.data[..n]);
            self.data = &self.data[n..];
            Ok(n)
        }
    }

    fn trickle(data: &[u8]) -> Trickle<'_> {
        Trickle { data, step: 0 }
    }

    fn now() -> DateTime<Utc> {
        DateTime::from_timestamp(1_796_000_000, 0).unwrap()
    }

    fn at(s: i64) -> String {
        DateTime::from_timestamp(1_796_000_000 - s, 0)
            .unwrap()
            .to_rfc3339()
    }

    /// A CSV over 1 MB (past the kept window several times) with blank
    /// lines, CRLF endings and a quoted newline; bad rows at lines known
    /// from the construction come back with those lines, read in pieces
    /// of 1 to 7 bytes.
    #[test]
    fn csv_lines_are_exact_when_streamed() {
        let idx = EdgeIndex::new(&synthetic::generate(400, 3));
        let e = idx.num_edges();
        let cfg = ValidationConfig {
            max_bad_share: 1.0,
            max_reported_errors: 1000,
            ..ValidationConfig::default()
        };
        let mut text = String::from("segment,kmh,observed_at,samples\r\n");
        let mut line = 2u64;
        let mut want = Vec::new();
        let mut i = 0usize;
        while text.len() < 1_200_000 {
            if i % 997 == 0 {
                text.push_str("\r\n\n");
                line += 2;
            }
            if i % 1_499 == 0 {
                want.push((line, ErrorKind::MalformedRow));
                text.push_str("\"1\n2\",30,x,1\r\n");
                line += 2;
            } else {
                text.push_str(&format!("{},{}.5,{},2\r\n", i % e, 20 + i % 30, at(5)));
                line += 1;
            }
            i += 1;
        }
        let batch = read_csv(&idx, trickle(text.as_bytes()), now(), &cfg).unwrap();
        let got: Vec<(u64, ErrorKind)> = batch
            .report()
            .first_errors
            .iter()
            .map(|r| (r.line.unwrap(), r.kind))
            .collect();
        assert_eq!(got, want);
        assert_eq!(batch.report().rows, i as u64);
        // The same bytes in memory give the same batch.
        assert_eq!(read_csv(&idx, text.as_bytes(), now(), &cfg).unwrap(), batch);
    }

    /// The compact form round-trips: a batch decoded from its encoding
    /// applies to the same layer as the batch read from JSON, and as the
    /// typed observations (`LiveLayer::apply`, which never encodes).
    #[test]
    fn compact_form_applies_like_the_batch() {
        let g = synthetic::generate(400, 3);
        let idx = EdgeIndex::new(&g);
        let cfg = ValidationConfig::default();
        let mut obs = Vec::new();
        for e in 0..idx.num_edges() as u32 {
            let (tail, head) = idx.ends(e).unwrap();
            let o = match e % 3 {
                0 => Observation {
                    segment: Some(u64::from(e)),
                    way: None,
                    tail: None,
                    head: None,
                    kmh: 12.25 + f64::from(e % 50),
                    observed_at: at(i64::from(e % 90)),
                    samples: 1 + e % 4,
                },
                1 => Observation {
                    segment: Some(u64::from(e)),
                    way: None,
                    tail: Some(tail),
                    head: Some(head),
                    kmh: 33.0,
                    observed_at: at(30),
                    samples: 2,
                },
                _ => Observation {
                    segment: None,
                    way: None,
                    tail: Some(tail),
                    head: Some(head),
                    kmh: 41.5,
                    observed_at: at(i64::from(e % 7)),
                    samples: 5,
                },
            };
            obs.push(o);
        }
        let json = serde_json::to_vec(&obs).unwrap();
        let batch = read_json(&idx, trickle(&json), now(), &cfg).unwrap();
        assert_eq!(batch.report().rows, obs.len() as u64);
        assert_eq!(batch.report().bad, 0);
        let decoded = Batch::decode(batch.encoded().to_vec()).unwrap();
        assert_eq!(
            decoded.observations().collect::<Vec<_>>(),
            batch.observations().collect::<Vec<_>>()
        );
        let (mut a, mut b, mut c) = (
            LiveLayer::new(idx.num_edges()),
            LiveLayer::new(idx.num_edges()),
            LiveLayer::new(idx.num_edges()),
        );
        let ra = a.apply_batch(&idx, &batch, now(), &cfg).unwrap();
        let rb = b.apply_batch(&idx, &decoded, now(), &cfg).unwrap();
        let rc = c.apply(&idx, &obs, now(), &cfg).unwrap();
        assert_eq!(a, b);
        assert_eq!(a, c);
        assert_eq!(ra.superseded, rc.superseded);
        assert_eq!(rb.superseded, rc.superseded);
        // Cut anywhere inside a record, the form is refused.
        let enc = batch.encoded();
        for cut in [enc.len() - 1, HEADER + 3, 5] {
            assert!(Batch::decode(enc[..cut].to_vec()).is_err(), "cut {cut}");
        }
    }

    /// The JSON rules hold element by element: duplicate keys at any
    /// depth, non-objects, unknown fields are bad rows by index; a syntax
    /// error anywhere or trailing text refuses the batch.
    #[test]
    fn json_rules_when_streamed() {
        let idx = EdgeIndex::new(&synthetic::generate(400, 3));
        let cfg = ValidationConfig {
            max_bad_share: 1.0,
            ..ValidationConfig::default()
        };
        let t = at(1);
        let json = format!(
            r#"[{{"segment":1,"kmh":30,"observed_at":"{t}","samples":2.0}},
                {{"segment":1,"segment":2,"kmh":30,"observed_at":"{t}","samples":1}},
                [1,null,null,null,30,"{t}",1],
                {{"segment":1,"kmh":30,"observed_at":"{t}","samples":1,"lane":{{"a":1,"a":2}}}},
                {{"segment":1,"kmh":30,"observed_at":"{t}","samples":1.5}}]"#
        );
        let b = read_json(&idx, trickle(json.as_bytes()), now(), &cfg).unwrap();
        let r = b.report();
        assert_eq!((r.rows, r.accepted, r.bad), (5, 1, 4));
        let msgs: Vec<(u64, &str)> = r
            .first_errors
            .iter()
            .map(|x| (x.index.unwrap(), x.message.as_str()))
            .collect();
        assert!(msgs[0].0 == 1 && msgs[0].1.contains("duplicate key `segment`"));
        assert!(msgs[1].0 == 2 && msgs[1].1.contains("must be a JSON object"));
        assert!(msgs[2].0 == 3 && msgs[2].1.contains("duplicate key `a`"));
        assert_eq!(msgs[3].0, 4);
        for bad in [&b"[{}"[..], b"[] x", b"{}", b"", b"[1,]"] {
            assert!(
                matches!(
                    read_json(&idx, trickle(bad), now(), &cfg),
                    Err(SpeedsError::Json(_))
                ),
                "{}",
                String::from_utf8_lossy(bad)
            );
        }
    }
}
