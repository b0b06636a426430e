//! Our CSV with a header, and the column-mapping reader behind it: a
//! [`CsvLayout`] says which column holds which field, so another
//! operator's export (such as the NYC TLC layout of [`super::tlc`]) needs
//! another layout, not another reader. Columns may come in any order;
//! unknown columns are ignored; refused rows are named by line (the header
//! is line 1).

use super::fields::{checked, opt_num, parse_num, parse_time, point, tier_named, ReadOptions};
use super::record::{ServedEta, TripRecord};
use super::report::{err, RowError, TripErrorKind, TripReadError, TripReport};
use chrono_tz::Tz;
use std::io::Read;

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

#[cfg(test)]
mod tests {
    use crate::trips::{read_trips, ReadOptions, ServedEta, TripErrorKind, TripFormat};
    use hodos_engine::geo::LatLon;
    use hodos_serving::tier::Tier;

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
}
