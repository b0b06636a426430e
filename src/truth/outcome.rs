//! [`TripOutcome`]: one completed trip's answer, as hodos would have given
//! it at the trip's departure, beside what the trip really took.

use chrono::{DateTime, Datelike, FixedOffset, Timelike};
use hodos_serving::tier::{FallbackReason, Tier};
use serde::Serialize;

/// One replayed trip.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TripOutcome {
    pub trip_id: Option<String>,
    /// The departure the answer was asked for.
    pub leaving: DateTime<FixedOffset>,
    /// Hour of week of the departure on the trip's own local clock (its
    /// offset): 0 = Monday 00:00 … 167 = Sunday 23:00.
    pub hour_of_week: u8,
    /// Saturday or Sunday on the trip's local clock.
    pub weekend: bool,
    /// The region that answered (none outside every region).
    pub region: Option<String>,
    pub tier: Tier,
    pub reason: Option<FallbackReason>,
    /// Great-circle (haversine) distance between the two ends, metres.
    pub great_circle_m: f64,
    /// The trip's actual duration, seconds.
    pub actual_s: f64,
    /// The uncorrected answer of its tier, seconds.
    pub graph_s: f64,
    /// The ETA served: corrected when a model applied, else `graph_s`.
    pub eta_s: f64,
    /// `(low, high)` seconds when a model gave an interval.
    pub interval_s: Option<(f64, f64)>,
    /// The correction model's version, when one applied.
    pub model_version: Option<u64>,
    /// The correction model's feature vector (empty without a model).
    pub features: Vec<f32>,
}

/// Hour of week (0 = Monday 00:00) and weekend flag of `t` on its own
/// local clock.
pub fn local_hour_of_week(t: &DateTime<FixedOffset>) -> (u8, bool) {
    let wd = t.weekday().num_days_from_monday();
    ((wd * 24 + t.hour()) as u8, wd >= 5)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// 2016-01-03 was a Sunday and 2016-01-04 a Monday (the Gregorian
    /// calendar; `cal 1 2016`).
    #[test]
    fn hour_of_week_is_on_the_local_clock() {
        let sun = DateTime::parse_from_rfc3339("2016-01-03T23:30:00-05:00").unwrap();
        assert_eq!(local_hour_of_week(&sun), (167, true));
        let mon = DateTime::parse_from_rfc3339("2016-01-04T00:10:00-05:00").unwrap();
        assert_eq!(local_hour_of_week(&mon), (0, false));
        // The same instant in UTC is Monday 04:30.
        let utc = sun.with_timezone(&FixedOffset::east_opt(0).unwrap());
        assert_eq!(local_hour_of_week(&utc), (4, false));
    }
}
