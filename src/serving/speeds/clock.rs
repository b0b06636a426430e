//! The clock: an instant → hour of the week in the region's local time.
//!
//! Hour 0 is Monday 00:00–00:59 local time, hour 167 Sunday 23:00–23:59.
//! Local time comes from the IANA time zone database through chrono-tz, so
//! daylight-saving changes follow the zone's published rules: on a
//! spring-forward day the skipped local hour has no instants (the bucket is
//! simply not used that day); on a fall-back day the repeated local hour
//! gets two real hours of instants.

use chrono::{DateTime, Datelike, Timelike, Utc};
use chrono_tz::Tz;

/// Buckets in a historical profile: 7 days × 24 hours.
pub const HOURS_PER_WEEK: u8 = 168;

/// Hour of the week (`0..168`) of instant `t` in zone `tz`; hour 0 is Monday
/// 00:00–00:59 local time.
pub fn hour_of_week(t: DateTime<Utc>, tz: Tz) -> u8 {
    let local = t.with_timezone(&tz);
    // num_days_from_monday: Monday = 0 .. Sunday = 6; hour: 0..24.
    (local.weekday().num_days_from_monday() * 24 + local.hour()) as u8
}
