//! Completed trips in: [`TripRecord`] and its readers.
//!
//! # Formats
//!
//! Our own two formats carry the same fields under the same names:
//!
//! | field | CSV column(s) | JSON lines key | required |
//! |---|---|---|---|
//! | trip id | `id` | `id` (string) | no |
//! | origin | `from_lat`, `from_lon` | `from: {"lat", "lon"}` | yes |
//! | destination | `to_lat`, `to_lon` | `to: {"lat", "lon"}` | yes |
//! | departure | `leaving` | `leaving` | yes |
//! | actual duration, s | `duration_s` | `duration_s` | yes |
//! | actual distance, m | `distance_m` | `distance_m` | no |
//! | vehicle class | `vehicle` | `vehicle` | no |
//! | ETA hodos served, s | `served_eta_s` | `served.eta_s` | no |
//! | its tier | `served_tier` | `served.tier` | no |
//! | its snapshot generation | `served_snapshot` | `served.snapshot` | no |
//!
//! `leaving` is RFC 3339 with an offset (`2026-03-02T08:15:00+01:00`); a
//! time written without one (`2026-03-02 08:15:00`) is read in the zone
//! given to the reader ([`ReadOptions::zone`]) and refused when none is
//! given. CSV columns may come in any order; unknown columns are ignored.
//! JSON lines refuse unknown keys (a misspelt optional key would otherwise
//! vanish silently). Blank lines are skipped.
//!
//! # The NYC TLC yellow-taxi layout
//!
//! [`CsvLayout::nyc_tlc_yellow`] maps the 19-column CSV the New York City
//! Taxi & Limousine Commission publishes for 2015–2016 yellow-taxi trips
//! (see `shared/data/trips/SOURCES.md`) onto the same record, by column
//! name (matched ignoring ASCII case, so the 2015 file's `RateCodeID` and
//! the 2016 files' `RatecodeID` are one column; neither is read):
//!
//! | record field | TLC column(s) |
//! |---|---|
//! | origin | `pickup_latitude`, `pickup_longitude` |
//! | destination | `dropoff_latitude`, `dropoff_longitude` |
//! | departure | `tpep_pickup_datetime`, local wall-clock time, zone `America/New_York` |
//! | duration | `tpep_dropoff_datetime` − `tpep_pickup_datetime` (meter on to off) |
//! | distance | `trip_distance` (miles) × 1,609.344 |
//! | vehicle class | the fixed value `yellow_taxi` |
//!
//! The layout is data ([`CsvLayout`]), read by the same code as our CSV;
//! another operator's export needs another layout, not another reader.
//!
//! # Validation
//!
//! Each row is checked on its own; a bad row is refused and counted by
//! kind in a [`TripReport`] that names its line (the header is line 1;
//! JSON lines count from 1), like the speed tables' reports. Refused: a
//! malformed row, a missing or non-numeric required field, a coordinate out
//! of range or exactly `0, 0` (TLC's marker for an unknown position, and no
//! place a road vehicle drives), a departure that does not parse or has no
//! zone, a local time that does not exist in its zone (the spring-forward
//! gap), a duration that is not positive or is longer than
//! [`ReadOptions::max_duration_s`], a negative distance, an unknown served
//! tier. A local time that occurs twice (autumn fall-back) takes the
//! earlier instant.
//!
//! Readers take any [`std::io::Read`]; [`read_trips_file`] opens a path
//! and decompresses it when its name ends in `.gz`.

use chrono::{DateTime, FixedOffset, LocalResult, NaiveDateTime, TimeZone};
use chrono_tz::Tz;
use hodos_engine::geo::LatLon;
use hodos_serving::tier::Tier;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::io::{BufRead, BufReader, Read};
use std::path::{Path, PathBuf};

/// Metres in one international mile (exact by definition, 1959).
pub const METRES_PER_MILE: f64 = 1609.344;

/// One completed trip.
#[derive(Debug, Clone, PartialEq)]
pub struct TripRecord {
    pub trip_id: Option<String>,
    pub from: LatLon,
    pub to: LatLon,
    /// When the trip set off, with the offset of its zone at that moment.
    pub leaving: DateTime<FixedOffset>,
    /// How long it took, seconds.
    pub duration_s: f64,
    /// How far it went, metres (odometer or meter), when known.
    pub distance_m: Option<f64>,
    pub vehicle: Option<String>,
    /// The ETA hodos served for this trip, when the caller kept it.
    pub served: Option<ServedEta>,
}

/// An ETA hodos served for a trip, as the caller kept it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ServedEta {
    pub eta_s: f64,
    pub tier: Option<Tier>,
    /// The snapshot generation that answered.
    pub snapshot: Option<u64>,
}

/// Input formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TripFormat {
    /// A CSV with a header: our columns ([`CsvLayout::hodos`]).
    Csv,
    /// One JSON object per line.
    JsonLines,
    /// The NYC TLC yellow-taxi CSV ([`CsvLayout::nyc_tlc_yellow`]).
    Tlc,
}

impl TripFormat {
    /// The format a file name suggests: `.jsonl` / `.ndjson` (optionally
    /// `.gz`) → JSON lines, anything else → our CSV. The TLC layout is
    /// never guessed: the caller names it.
    pub fn from_name(path: &Path) -> TripFormat {
        let name = path
            .file_name()
            .map(|n| n.to_string_lossy().to_ascii_lowercase())
            .unwrap_or_default();
        let name = name.strip_suffix(".gz").unwrap_or(&name);
        if name.ends_with(".jsonl") || name.ends_with(".ndjson") {
            TripFormat::JsonLines
        } else {
            TripFormat::Csv
        }
    }

    pub fn as_str(self) -> &'static str {
        match self {
            TripFormat::Csv => "csv",
            TripFormat::JsonLines => "jsonl",
            TripFormat::Tlc => "tlc",
        }
    }
}

impl std::str::FromStr for TripFormat {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s {
            "csv" => Ok(TripFormat::Csv),
            "jsonl" => Ok(TripFormat::JsonLines),
            "tlc" => Ok(TripFormat::Tlc),
            _ => Err(format!("unknown trip format {s:?} (csv, jsonl or tlc)")),
        }
    }
}

/// How the reader treats times and implausible rows.
#[derive(Debug, Clone)]
pub struct ReadOptions {
    /// Zone of departure times written without an offset. `None` refuses
    /// them (the TLC layout brings its own zone).
    pub zone: Option<Tz>,
    /// Longest duration accepted, seconds. Default 6 h: a meter or a log
    /// left running (common practice in taxi-data cleaning is a cut-off of
    /// a few hours; this value is our choice).
    pub max_duration_s: f64,
    /// How many refused rows the report lists (all are counted).
    pub max_reported_errors: usize,
}

impl Default for ReadOptions {
    fn default() -> Self {
        ReadOptions {
            zone: None,
            max_duration_s: 6.0 * 3600.0,
            max_reported_errors: 20,
        }
    }
}

/// Why a row was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum TripErrorKind {
    /// Not a record: wrong field count, bad quoting or UTF-8, invalid JSON.
    Malformed,
    /// A required field is empty or absent.
    MissingField,
    /// A field that must be a number is not one (or is not finite).
    BadNumber,
    /// A coordinate outside −90..90 / −180..180.
    BadCoordinate,
    /// A coordinate at exactly 0, 0 (the unknown-position marker).
    UnknownCoordinate,
    /// A departure (or arrival) time that does not parse, has no zone, or
    /// does not exist in its zone.
    BadTime,
    /// A duration that is zero, negative, or over the longest accepted.
    BadDuration,
    /// A negative distance.
    BadDistance,
    /// A served ETA that is negative or names an unknown tier.
    BadServed,
}

impl TripErrorKind {
    pub fn as_str(self) -> &'static str {
        match self {
            TripErrorKind::Malformed => "malformed",
            TripErrorKind::MissingField => "missing_field",
            TripErrorKind::BadNumber => "bad_number",
            TripErrorKind::BadCoordinate => "bad_coordinate",
            TripErrorKind::UnknownCoordinate => "unknown_coordinate",
            TripErrorKind::BadTime => "bad_time",
            TripErrorKind::BadDuration => "bad_duration",
            TripErrorKind::BadDistance => "bad_distance",
            TripErrorKind::BadServed => "bad_served",
        }
    }
}

/// One refused row.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TripRowError {
    /// Line in the input (the CSV header is line 1).
    pub line: u64,
    pub kind: TripErrorKind,
    pub message: String,
}

impl std::fmt::Display for TripRowError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "line {}: {}", self.line, self.message)
    }
}

/// What a reader accepted and refused.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct TripReport {
    /// Data rows read (blank lines and the header excluded).
    pub rows: u64,
    pub accepted: u64,
    /// `rows = accepted + refused`.
    pub refused: u64,
    /// Refused rows per kind name; kinds that did not occur are absent.
    pub refused_by_kind: BTreeMap<String, u64>,
    /// The first refused rows in input order.
    pub first_errors: Vec<TripRowError>,
}

impl TripReport {
    fn refuse(&mut self, max: usize, line: u64, e: RowError) {
        self.refused += 1;
        *self
            .refused_by_kind
            .entry(e.0.as_str().to_string())
            .or_default() += 1;
        if self.first_errors.len() < max {
            self.first_errors.push(TripRowError {
                line,
                kind: e.0,
                message: e.1,
            });
        }
    }

    /// Adds another file's report (lines stay as each file counted them).
    pub fn merge(&mut self, other: TripReport, max: usize) {
        self.rows += other.rows;
        self.accepted += other.accepted;
        self.refused += other.refused;
        for (k, v) in other.refused_by_kind {
            *self.refused_by_kind.entry(k).or_default() += v;
        }
        for e in other.first_errors {
            if self.first_errors.len() < max {
                self.first_errors.push(e);
            }
        }
    }
}

/// A reader failure that stops the whole input (rows are reported, not
/// failed).
#[derive(Debug, thiserror::Error)]
pub enum TripReadError {
    #[error("{path}: {source}")]
    Open {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("reading trips: {0}")]
    Io(std::io::Error),
    #[error("trip CSV header: {0}")]
    Header(String),
}

/// How to read one field of a CSV layout.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum DurationColumn {
    /// Seconds in this column.
    Seconds(&'static str),
    /// The arrival time in this column, minus the departure.
    Until(&'static str),
}

/// The vehicle class of a layout's rows.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum VehicleColumn {
    None,
    Column(&'static str),
    /// Every row of this layout is this class.
    Fixed(&'static str),
}

/// A CSV layout: which column holds which field. Column names are
/// matched ignoring ASCII case and surrounding spaces.
#[derive(Debug, Clone, PartialEq)]
pub struct CsvLayout {
    pub name: &'static str,
    pub id: Option<&'static str>,
    /// `(latitude, longitude)` columns of the origin.
    pub from: (&'static str, &'static str),
    pub to: (&'static str, &'static str),
    pub leaving: &'static str,
    pub duration: DurationColumn,
    /// The distance column and the metres in one of its units.
    pub distance: Option<(&'static str, f64)>,
    pub vehicle: VehicleColumn,
    /// Columns of the served ETA: `(eta_s, tier, snapshot)`.
    pub served: Option<(&'static str, &'static str, &'static str)>,
    /// Zone of times without an offset, when the layout defines one
    /// (overrides [`ReadOptions::zone`]).
    pub zone: Option<Tz>,
}

impl CsvLayout {
    /// Our own CSV format (see the module documentation).
    pub fn hodos() -> Self {
        CsvLayout {
            name: "hodos trips CSV",
            id: Some("id"),
            from: ("from_lat", "from_lon"),
            to: ("to_lat", "to_lon"),
            leaving: "leaving",
            duration: DurationColumn::Seconds("duration_s"),
            distance: Some(("distance_m", 1.0)),
            vehicle: VehicleColumn::Column("vehicle"),
            served: Some(("served_eta_s", "served_tier", "served_snapshot")),
            zone: None,
        }
    }

    /// The NYC TLC yellow-taxi trip records of 2015–2016 (see the module
    /// documentation for the mapping).
    pub fn nyc_tlc_yellow() -> Self {
        CsvLayout {
            name: "NYC TLC yellow-taxi CSV",
            id: None,
            from: ("pickup_latitude", "pickup_longitude"),
            to: ("dropoff_latitude", "dropoff_longitude"),
            leaving: "tpep_pickup_datetime",
            duration: DurationColumn::Until("tpep_dropoff_datetime"),
            distance: Some(("trip_distance", METRES_PER_MILE)),
            vehicle: VehicleColumn::Fixed("yellow_taxi"),
            served: None,
            zone: Some(chrono_tz::America::New_York),
        }
    }
}

/// A row error before it has a line: kind and message.
struct RowError(TripErrorKind, String);

fn err(kind: TripErrorKind, msg: impl Into<String>) -> RowError {
    RowError(kind, msg.into())
}

/// Parses a departure: RFC 3339 with offset, else a local time in `zone`.
fn parse_time(s: &str, zone: Option<Tz>, what: &str) -> Result<DateTime<FixedOffset>, RowError> {
    let s = s.trim();
    if s.is_empty() {
        return Err(err(TripErrorKind::MissingField, format!("{what} is empty")));
    }
    if let Ok(t) = DateTime::parse_from_rfc3339(s) {
        return Ok(t);
    }
    let naive = ["%Y-%m-%d %H:%M:%S%.f", "%Y-%m-%dT%H:%M:%S%.f"]
        .iter()
        .find_map(|f| NaiveDateTime::parse_from_str(s, f).ok())
        .ok_or_else(|| {
            err(
                TripErrorKind::BadTime,
                format!("{what} {s:?} is neither RFC 3339 nor YYYY-MM-DD HH:MM:SS"),
            )
        })?;
    let Some(zone) = zone else {
        return Err(err(
            TripErrorKind::BadTime,
            format!("{what} {s:?} has no UTC offset and no zone was given"),
        ));
    };
    match zone.from_local_datetime(&naive) {
        LocalResult::Single(t) => Ok(t.fixed_offset()),
        // Fall-back hour: the earlier of the two instants.
        LocalResult::Ambiguous(a, _) => Ok(a.fixed_offset()),
        LocalResult::None => Err(err(
            TripErrorKind::BadTime,
            format!("{what} {s:?} does not exist in {zone} (clocks moved forward)"),
        )),
    }
}

fn parse_num(s: &str, what: &str) -> Result<f64, RowError> {
    let s = s.trim();
    if s.is_empty() {
        return Err(err(TripErrorKind::MissingField, format!("{what} is empty")));
    }
    match s.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        _ => Err(err(
            TripErrorKind::BadNumber,
            format!("{what} {s:?} is not a finite number"),
        )),
    }
}

fn opt_num(s: Option<&str>, what: &str) -> Result<Option<f64>, RowError> {
    match s.map(str::trim) {
        None | Some("") => Ok(None),
        Some(v) => parse_num(v, what).map(Some),
    }
}

fn point(lat: f64, lon: f64, what: &str) -> Result<LatLon, RowError> {
    let p = LatLon::new(lat, lon);
    if !p.is_valid() {
        return Err(err(
            TripErrorKind::BadCoordinate,
            format!("{what} {lat},{lon} is out of range (lat -90..90, lon -180..180)"),
        ));
    }
    if lat == 0.0 && lon == 0.0 {
        return Err(err(
            TripErrorKind::UnknownCoordinate,
            format!("{what} is 0,0 (unknown position)"),
        ));
    }
    Ok(p)
}

fn tier_named(s: &str) -> Result<Tier, RowError> {
    Tier::ALL
        .into_iter()
        .find(|t| t.as_str() == s)
        .ok_or_else(|| {
            err(
                TripErrorKind::BadServed,
                format!("served tier {s:?} is not one of live, historical, free_flow, heuristic"),
            )
        })
}

/// The checks every format shares, once the fields are parsed.
fn checked(mut t: TripRecord, opts: &ReadOptions) -> Result<TripRecord, RowError> {
    if !t.duration_s.is_finite() || t.duration_s <= 0.0 {
        return Err(err(
            TripErrorKind::BadDuration,
            format!("duration {} s is not positive", t.duration_s),
        ));
    }
    if t.duration_s > opts.max_duration_s {
        return Err(err(
            TripErrorKind::BadDuration,
            format!(
                "duration {} s is longer than the longest accepted ({} s)",
                t.duration_s, opts.max_duration_s
            ),
        ));
    }
    if let Some(d) = t.distance_m {
        if !d.is_finite() || d < 0.0 {
            return Err(err(
                TripErrorKind::BadDistance,
                format!("distance {d} m is negative"),
            ));
        }
    }
    if let Some(s) = &t.served {
        if !s.eta_s.is_finite() || s.eta_s < 0.0 {
            return Err(err(
                TripErrorKind::BadServed,
                format!("served ETA {} s is negative", s.eta_s),
            ));
        }
    }
    if t.trip_id.as_deref().is_some_and(|s| s.trim().is_empty()) {
        t.trip_id = None;
    }
    Ok(t)
}

/// Column positions of a layout in one header.
struct Columns {
    id: Option<usize>,
    from: (usize, usize),
    to: (usize, usize),
    leaving: usize,
    duration: usize,
    distance: Option<(usize, f64)>,
    vehicle: Option<usize>,
    served: Option<(Option<usize>, Option<usize>, Option<usize>)>,
}

impl Columns {
    fn find(layout: &CsvLayout, header: &csv::StringRecord) -> Result<Self, TripReadError> {
        let names: Vec<String> = header
            .iter()
            .map(|h| h.trim().trim_start_matches('\u{feff}').to_ascii_lowercase())
            .collect();
        let pos = |n: &str| names.iter().position(|h| *h == n.to_ascii_lowercase());
        let mut missing = Vec::new();
        let mut need = |n: &'static str| {
            pos(n).unwrap_or_else(|| {
                missing.push(n);
                0
            })
        };
        let from = (need(layout.from.0), need(layout.from.1));
        let to = (need(layout.to.0), need(layout.to.1));
        let leaving = need(layout.leaving);
        let duration = need(match layout.duration {
            DurationColumn::Seconds(c) | DurationColumn::Until(c) => c,
        });
        if !missing.is_empty() {
            return Err(TripReadError::Header(format!(
                "the {} layout needs column(s) {} (header: {})",
                layout.name,
                missing.join(", "),
                header.iter().collect::<Vec<_>>().join(",")
            )));
        }
        Ok(Columns {
            id: layout.id.and_then(pos),
            from,
            to,
            leaving,
            duration,
            distance: layout
                .distance
                .and_then(|(c, scale)| pos(c).map(|i| (i, scale))),
            vehicle: match layout.vehicle {
                VehicleColumn::Column(c) => pos(c),
                _ => None,
            },
            served: layout.served.map(|(e, t, s)| (pos(e), pos(t), pos(s))),
        })
    }
}

fn csv_row(
    layout: &CsvLayout,
    cols: &Columns,
    rec: &csv::StringRecord,
    opts: &ReadOptions,
) -> Result<TripRecord, RowError> {
    let f = |i: usize| rec.get(i).unwrap_or("");
    let of = |i: Option<usize>| i.and_then(|i| rec.get(i));
    let zone = layout.zone.or(opts.zone);
    let from = point(
        parse_num(f(cols.from.0), layout.from.0)?,
        parse_num(f(cols.from.1), layout.from.1)?,
        "origin",
    )?;
    let to = point(
        parse_num(f(cols.to.0), layout.to.0)?,
        parse_num(f(cols.to.1), layout.to.1)?,
        "destination",
    )?;
    let leaving = parse_time(f(cols.leaving), zone, layout.leaving)?;
    let duration_s = match layout.duration {
        DurationColumn::Seconds(c) => parse_num(f(cols.duration), c)?,
        DurationColumn::Until(c) => {
            let end = parse_time(f(cols.duration), zone, c)?;
            (end - leaving).num_milliseconds() as f64 / 1000.0
        }
    };
    let distance_m = match cols.distance {
        Some((i, scale)) => opt_num(rec.get(i), "distance")?.map(|d| d * scale),
        None => None,
    };
    let vehicle = match layout.vehicle {
        VehicleColumn::Fixed(v) => Some(v.to_string()),
        VehicleColumn::Column(_) => of(cols.vehicle)
            .map(|s| s.trim().to_string())
            .filter(|s| !s.is_empty()),
        VehicleColumn::None => None,
    };
    let served = match cols.served {
        Some((e, t, s)) => match opt_num(of(e), "served_eta_s")? {
            Some(eta_s) => Some(ServedEta {
                eta_s,
                tier: match of(t).map(str::trim).filter(|s| !s.is_empty()) {
                    Some(name) => Some(tier_named(name)?),
                    None => None,
                },
                snapshot: match of(s).map(str::trim).filter(|s| !s.is_empty()) {
                    Some(v) => Some(v.parse::<u64>().map_err(|_| {
                        err(
                            TripErrorKind::BadServed,
                            format!("served_snapshot {v:?} is not a whole number"),
                        )
                    })?),
                    None => None,
                },
            }),
            None => None,
        },
        None => None,
    };
    checked(
        TripRecord {
            trip_id: of(cols.id).map(|s| s.trim().to_string()),
            from,
            to,
            leaving,
            duration_s,
            distance_m,
            vehicle,
            served,
        },
        opts,
    )
}

/// 1-based line where a record starts: the reader places a record's
/// position before the blank lines it skipped to reach it, so those are
/// stepped over on the input bytes.
fn line_at(p: &csv::Position, input: &[u8]) -> u64 {
    let mut line = p.line();
    let mut i = p.byte() as usize;
    while let Some(&c) = input.get(i) {
        match c {
            b'\n' => line += 1,
            b'\r' => {}
            _ => break,
        }
        i += 1;
    }
    line
}

/// Reads a CSV of `layout` from `input` (read whole, so refused rows can
/// be named by line).
pub fn read_csv(
    mut input: impl Read,
    layout: &CsvLayout,
    opts: &ReadOptions,
) -> Result<(Vec<TripRecord>, TripReport), TripReadError> {
    let mut bytes = Vec::new();
    input.read_to_end(&mut bytes).map_err(TripReadError::Io)?;
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(false)
        .from_reader(bytes.as_slice());
    let header = rdr
        .headers()
        .map_err(|e| TripReadError::Header(e.to_string()))?
        .clone();
    let cols = Columns::find(layout, &header)?;
    let mut out = Vec::new();
    let mut report = TripReport::default();
    let mut rec = csv::StringRecord::new();
    loop {
        match rdr.read_record(&mut rec) {
            Ok(false) => break,
            Ok(true) => {
                let line = rec.position().map(|p| line_at(p, &bytes)).unwrap_or(0);
                if rec.iter().all(|f| f.trim().is_empty()) {
                    continue;
                }
                report.rows += 1;
                match csv_row(layout, &cols, &rec, opts) {
                    Ok(t) => {
                        report.accepted += 1;
                        out.push(t);
                    }
                    Err(e) => report.refuse(opts.max_reported_errors, line, e),
                }
            }
            Err(e) => {
                let line = e.position().map(|p| line_at(p, &bytes)).unwrap_or(0);
                match e.kind() {
                    csv::ErrorKind::Io(_) => {
                        return Err(TripReadError::Io(std::io::Error::other(e.to_string())))
                    }
                    _ => {
                        report.rows += 1;
                        report.refuse(
                            opts.max_reported_errors,
                            line,
                            err(TripErrorKind::Malformed, e.to_string()),
                        );
                    }
                }
            }
        }
    }
    Ok((out, report))
}

/// A coordinate object of a JSON line.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct JsonPoint {
    lat: f64,
    lon: f64,
}

/// One JSON line.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct JsonTrip {
    #[serde(default)]
    id: Option<String>,
    from: JsonPoint,
    to: JsonPoint,
    leaving: String,
    duration_s: f64,
    #[serde(default)]
    distance_m: Option<f64>,
    #[serde(default)]
    vehicle: Option<String>,
    #[serde(default)]
    served: Option<JsonServed>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct JsonServed {
    eta_s: f64,
    #[serde(default)]
    tier: Option<String>,
    #[serde(default)]
    snapshot: Option<u64>,
}

fn json_row(line: &str, opts: &ReadOptions) -> Result<TripRecord, RowError> {
    let j: JsonTrip =
        serde_json::from_str(line).map_err(|e| err(TripErrorKind::Malformed, e.to_string()))?;
    let served = match j.served {
        Some(s) => Some(ServedEta {
            eta_s: s.eta_s,
            tier: s.tier.as_deref().map(tier_named).transpose()?,
            snapshot: s.snapshot,
        }),
        None => None,
    };
    checked(
        TripRecord {
            trip_id: j.id,
            from: point(j.from.lat, j.from.lon, "origin")?,
            to: point(j.to.lat, j.to.lon, "destination")?,
            leaving: parse_time(&j.leaving, opts.zone, "leaving")?,
            duration_s: j.duration_s,
            distance_m: j.distance_m,
            vehicle: j.vehicle.filter(|v| !v.trim().is_empty()),
            served,
        },
        opts,
    )
}

/// Reads JSON lines from `input`.
pub fn read_json_lines(
    input: impl Read,
    opts: &ReadOptions,
) -> Result<(Vec<TripRecord>, TripReport), TripReadError> {
    let mut out = Vec::new();
    let mut report = TripReport::default();
    let mut rdr = BufReader::new(input);
    let mut buf = Vec::new();
    let mut line = 0u64;
    loop {
        buf.clear();
        let n = rdr.read_until(b'\n', &mut buf).map_err(TripReadError::Io)?;
        if n == 0 {
            break;
        }
        line += 1;
        let Ok(text) = std::str::from_utf8(&buf) else {
            report.rows += 1;
            report.refuse(
                opts.max_reported_errors,
                line,
                err(TripErrorKind::Malformed, "not UTF-8"),
            );
            continue;
        };
        let text = text.trim();
        if text.is_empty() {
            continue;
        }
        report.rows += 1;
        match json_row(text, opts) {
            Ok(t) => {
                report.accepted += 1;
                out.push(t);
            }
            Err(e) => report.refuse(opts.max_reported_errors, line, e),
        }
    }
    Ok((out, report))
}

/// Reads trips of `format` from `input`.
pub fn read_trips(
    input: impl Read,
    format: TripFormat,
    opts: &ReadOptions,
) -> Result<(Vec<TripRecord>, TripReport), TripReadError> {
    match format {
        TripFormat::Csv => read_csv(input, &CsvLayout::hodos(), opts),
        TripFormat::Tlc => read_csv(input, &CsvLayout::nyc_tlc_yellow(), opts),
        TripFormat::JsonLines => read_json_lines(input, opts),
    }
}

/// Opens `path` (gzip-decompressed when its name ends in `.gz`) and reads
/// trips of `format` from it.
pub fn read_trips_file(
    path: &Path,
    format: TripFormat,
    opts: &ReadOptions,
) -> Result<(Vec<TripRecord>, TripReport), TripReadError> {
    let open = |e| TripReadError::Open {
        path: path.to_path_buf(),
        source: e,
    };
    let file = std::fs::File::open(path).map_err(open)?;
    let gz = path
        .extension()
        .is_some_and(|x| x.eq_ignore_ascii_case("gz"));
    let input: Box<dyn Read> = if gz {
        Box::new(flate2::read::MultiGzDecoder::new(BufReader::new(file)))
    } else {
        Box::new(file)
    };
    read_trips(input, format, opts).map_err(|e| match e {
        TripReadError::Io(source) => TripReadError::Open {
            path: path.to_path_buf(),
            source,
        },
        TripReadError::Header(h) => TripReadError::Header(format!("{}: {h}", path.display())),
        other => other,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    const HEADER: &str = "id,from_lat,from_lon,to_lat,to_lon,leaving,duration_s,distance_m,vehicle,served_eta_s,served_tier,served_snapshot\n";

    #[test]
    fn our_csv_reads_every_field_and_reports_bad_rows_by_line() {
        let text = format!(
            "{HEADER}\
             t1,52.1,13.2,52.2,13.3,2026-03-02T08:15:00+01:00,600,4200,van,540,historical,7\n\
             t2,52.1,13.2,52.2,13.3,2026-03-02T08:15:00+01:00,0,,,,,\n\
             t3,0,0,52.2,13.3,2026-03-02T08:15:00+01:00,60,,,,,\n\
             t4,52.1,13.2,52.2,13.3,2026-03-02 08:15:00,60,,,,,\n\
             t5,52.1,13.2,52.2,13.3,2026-03-02T08:15:00Z,abc,,,,,\n\
             t6,52.1,13.2\n\
             \n\
             t7,52.1,13.2,52.2,13.3,2026-03-02T08:15:00Z,60,,,60,warp,\n\
             ,91,13.2,52.2,13.3,2026-03-02T08:15:00Z,60,,,,,\n"
        );
        let (trips, rep) =
            read_trips(text.as_bytes(), TripFormat::Csv, &ReadOptions::default()).unwrap();
        assert_eq!(trips.len(), 1);
        let t = &trips[0];
        assert_eq!(t.trip_id.as_deref(), Some("t1"));
        assert_eq!(t.from, LatLon::new(52.1, 13.2));
        assert_eq!(t.leaving.offset().local_minus_utc(), 3600);
        assert_eq!(t.duration_s, 600.0);
        assert_eq!(t.distance_m, Some(4200.0));
        assert_eq!(t.vehicle.as_deref(), Some("van"));
        assert_eq!(
            t.served,
            Some(ServedEta {
                eta_s: 540.0,
                tier: Some(Tier::Historical),
                snapshot: Some(7)
            })
        );
        assert_eq!((rep.rows, rep.accepted, rep.refused), (8, 1, 7));
        let lines: Vec<(u64, TripErrorKind)> =
            rep.first_errors.iter().map(|e| (e.line, e.kind)).collect();
        assert_eq!(
            lines,
            vec![
                (3, TripErrorKind::BadDuration),
                (4, TripErrorKind::UnknownCoordinate),
                (5, TripErrorKind::BadTime),
                (6, TripErrorKind::BadNumber),
                (7, TripErrorKind::Malformed),
                (9, TripErrorKind::BadServed),
                (10, TripErrorKind::BadCoordinate),
            ]
        );
    }

    #[test]
    fn a_zone_reads_local_times_and_refuses_the_spring_gap() {
        let text = format!(
            "{HEADER}\
             a,40.7,-74.0,40.8,-73.9,2016-03-13 01:30:00,60,,,,,\n\
             b,40.7,-74.0,40.8,-73.9,2016-03-13 02:30:00,60,,,,,\n\
             c,40.7,-74.0,40.8,-73.9,2016-11-06 01:30:00,60,,,,,\n"
        );
        let opts = ReadOptions {
            zone: Some(chrono_tz::America::New_York),
            ..ReadOptions::default()
        };
        let (trips, rep) = read_trips(text.as_bytes(), TripFormat::Csv, &opts).unwrap();
        // Offsets from the IANA rules for America/New_York: EST −05:00
        // until 2016-03-13 02:00, EDT −04:00 until 2016-11-06 02:00 (the
        // 01:00–02:00 hour then happens twice; the earlier is EDT).
        assert_eq!(trips.len(), 2);
        assert_eq!(trips[0].leaving.offset().local_minus_utc(), -5 * 3600);
        assert_eq!(trips[1].leaving.offset().local_minus_utc(), -4 * 3600);
        assert_eq!(rep.first_errors[0].line, 3);
        assert_eq!(rep.first_errors[0].kind, TripErrorKind::BadTime);
    }

    #[test]
    fn json_lines_read_the_same_fields() {
        let text = r#"{"id":"j1","from":{"lat":52.1,"lon":13.2},"to":{"lat":52.2,"lon":13.3},"leaving":"2026-03-02T08:15:00+01:00","duration_s":600,"served":{"eta_s":500,"tier":"heuristic"}}

{"from":{"lat":52.1,"lon":13.2},"to":{"lat":52.2,"lon":13.3},"leaving":"2026-03-02T08:15:00+01:00","duration_s":600,"colour":"red"}
not json
{"from":{"lat":52.1,"lon":13.2},"to":{"lat":52.2,"lon":13.3},"leaving":"2026-03-02T08:15:00+01:00","duration_s":-5}
"#;
        let (trips, rep) = read_trips(
            text.as_bytes(),
            TripFormat::JsonLines,
            &ReadOptions::default(),
        )
        .unwrap();
        assert_eq!(trips.len(), 1);
        assert_eq!(
            trips[0].served.as_ref().unwrap().tier,
            Some(Tier::Heuristic)
        );
        let lines: Vec<(u64, TripErrorKind)> =
            rep.first_errors.iter().map(|e| (e.line, e.kind)).collect();
        assert_eq!(
            lines,
            vec![
                (3, TripErrorKind::Malformed),
                (4, TripErrorKind::Malformed),
                (5, TripErrorKind::BadDuration)
            ]
        );
        assert!(rep.first_errors[0].message.contains("colour"));
    }

    /// The first data row of TLC's yellow_tripdata_2015-01.csv (as in
    /// shared/data/trips): pickup 2015-01-15 19:05:39, dropoff 19:23:42 →
    /// 1,083 s; 1.59 miles → 2,558.857 m; EST (−05:00) in January.
    #[test]
    fn the_tlc_layout_maps_a_real_row() {
        let text = "VendorID,tpep_pickup_datetime,tpep_dropoff_datetime,passenger_count,trip_distance,pickup_longitude,pickup_latitude,RateCodeID,store_and_fwd_flag,dropoff_longitude,dropoff_latitude,payment_type,fare_amount,extra,mta_tax,tip_amount,tolls_amount,improvement_surcharge,total_amount\n\
            2,2015-01-15 19:05:39,2015-01-15 19:23:42,1,1.59,-73.993896484375,40.750110626220703,1,N,-73.974784851074219,40.750617980957031,1,12,1,0.5,3.25,0,0.3,17.05\n\
            2,2015-01-15 19:05:39,2015-01-15 19:05:39,1,1.59,-73.993896484375,40.750110626220703,1,N,-73.974784851074219,40.750617980957031,1,12,1,0.5,3.25,0,0.3,17.05\n\
            2,2015-01-15 19:05:39,2015-01-15 19:23:42,1,1.59,0,0,1,N,-73.974784851074219,40.750617980957031,1,12,1,0.5,3.25,0,0.3,17.05\n";
        let (trips, rep) =
            read_trips(text.as_bytes(), TripFormat::Tlc, &ReadOptions::default()).unwrap();
        assert_eq!(trips.len(), 1);
        let t = &trips[0];
        assert_eq!(t.duration_s, 1083.0);
        assert!((t.distance_m.unwrap() - 2558.85696).abs() < 1e-6);
        assert_eq!(t.from, LatLon::new(40.750_110_626_220_7, -73.993896484375));
        assert_eq!(t.leaving.to_rfc3339(), "2015-01-15T19:05:39-05:00");
        assert_eq!(t.vehicle.as_deref(), Some("yellow_taxi"));
        let kinds: Vec<_> = rep.first_errors.iter().map(|e| (e.line, e.kind)).collect();
        assert_eq!(
            kinds,
            vec![
                (3, TripErrorKind::BadDuration),
                (4, TripErrorKind::UnknownCoordinate)
            ]
        );
    }

    #[test]
    fn a_missing_column_names_the_layout() {
        let e = read_trips(
            "a,b\n1,2\n".as_bytes(),
            TripFormat::Tlc,
            &ReadOptions::default(),
        )
        .unwrap_err();
        assert!(e.to_string().contains("tpep_pickup_datetime"), "{e}");
    }
}
