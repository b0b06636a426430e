//! JSON lines: one trip object per line, the same fields as our CSV under
//! the same names (origin and destination as `{"lat", "lon"}` objects, the
//! served ETA as a `served` object). Unknown keys are refused (a misspelt
//! optional key would otherwise vanish silently); blank lines are skipped;
//! lines count from 1.

use super::fields::{checked, parse_time, point, tier_named, ReadOptions};
use super::record::{ServedEta, TripRecord};
use super::report::{err, RowError, TripErrorKind, TripReadError, TripReport};
use serde::Deserialize;
use std::io::{BufRead, BufReader, Read};

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

#[cfg(test)]
mod tests {
    use crate::trips::{read_trips, ReadOptions, TripErrorKind, TripFormat};
    use hodos_serving::tier::Tier;

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
}
