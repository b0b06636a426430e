//! What every format shares once a row is split into fields: the
//! [`ReadOptions`], parsing of times, numbers and coordinates, and the
//! checks of a parsed [`TripRecord`] (see the validation rules in the
//! [module documentation](super)).

use super::record::TripRecord;
use super::report::{err, RowError, TripErrorKind};
use chrono::{DateTime, FixedOffset, LocalResult, NaiveDateTime, TimeZone};
use chrono_tz::Tz;
use hodos_engine::geo::LatLon;
use hodos_serving::tier::Tier;

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

/// Parses a departure: RFC 3339 with offset, else a local time in `zone`.
pub(super) fn parse_time(
    s: &str,
    zone: Option<Tz>,
    what: &str,
) -> Result<DateTime<FixedOffset>, RowError> {
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

pub(super) fn parse_num(s: &str, what: &str) -> Result<f64, RowError> {
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

pub(super) fn opt_num(s: Option<&str>, what: &str) -> Result<Option<f64>, RowError> {
    match s.map(str::trim) {
        None | Some("") => Ok(None),
        Some(v) => parse_num(v, what).map(Some),
    }
}

pub(super) fn point(lat: f64, lon: f64, what: &str) -> Result<LatLon, RowError> {
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

pub(super) fn tier_named(s: &str) -> Result<Tier, RowError> {
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
pub(super) fn checked(mut t: TripRecord, opts: &ReadOptions) -> Result<TripRecord, RowError> {
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
