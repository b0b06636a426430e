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
//!
//! # Layout
//!
//! - `record`: [`TripRecord`] and [`ServedEta`];
//! - `report`: [`TripReport`] (refused rows by kind and line),
//!   [`TripErrorKind`], [`TripRowError`], [`TripReadError`];
//! - `fields`: [`ReadOptions`], field parsing and the checks every format
//!   shares;
//! - `csv`: [`CsvLayout`] and its reader [`read_csv`], with our layout;
//! - `json_lines`: [`read_json_lines`];
//! - `tlc`: the NYC TLC yellow-taxi layout ([`CsvLayout::nyc_tlc_yellow`]);
//! - this file: [`TripFormat`] (and [`UnknownTripFormat`]) and the entry points [`read_trips`] and
//!   [`read_trips_file`].

mod csv;
mod fields;
mod json_lines;
mod record;
mod report;
mod tlc;

pub use self::csv::{read_csv, CsvLayout, DurationColumn, VehicleColumn};
pub use fields::ReadOptions;
pub use json_lines::read_json_lines;
pub use record::{ServedEta, TripRecord};
pub use report::{TripErrorKind, TripReadError, TripReport, TripRowError};
pub use tlc::METRES_PER_MILE;

use std::io::{BufReader, Read};
use std::path::Path;

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

/// A format name that is none of `csv`, `jsonl`, `tlc`.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("unknown trip format {0:?} (csv, jsonl or tlc)")]
pub struct UnknownTripFormat(pub String);

impl std::str::FromStr for TripFormat {
    type Err = UnknownTripFormat;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s {
            "csv" => Ok(TripFormat::Csv),
            "jsonl" => Ok(TripFormat::JsonLines),
            "tlc" => Ok(TripFormat::Tlc),
            _ => Err(UnknownTripFormat(s.to_string())),
        }
    }
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
