//! Blending: the historical bucket and the live layer → one speed per edge.
//!
//! For an edge whose live observation has age `a` (now − observed_at):
//!
//! - `a > ttl`: expired, ignored; the edge keeps its historical speed.
//! - otherwise the live weight is `w = 0.5^(a / half_life)` (exponential
//!   decay with a half-life, common practice for ageing measurements: fresh
//!   data dominates, and after each half-life it counts half as much), and
//!   the speed is `w · live + (1 − w) · historical`.
//!
//! An observation stamped slightly in the future (allowed clock skew) counts
//! as age 0. Edges without a live observation keep the historical speed.
//!
//! The blend is one pass over all edges with no allocation when the output
//! buffer is reused ([`blend_into`]); it runs every few hundred milliseconds
//! on graphs of ~10⁶ edges.

use super::error::SpeedsError;
use super::live::{ttl_ms, LiveLayer, NO_OBS};
use chrono::{DateTime, Utc};
use serde::Serialize;
use std::time::Duration;

/// What a blend used.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct BlendStats {
    /// Edges whose speed includes a fresh (age ≤ ttl) live observation.
    pub fresh_edges: u64,
    /// Age in seconds of the newest held observation (fresh or not), 0 when
    /// it is stamped in the future; `None` when the layer is empty.
    pub newest_age_s: Option<f64>,
    /// Whether any live observation is fresh.
    pub any_fresh: bool,
}

/// Live weight for an observation of age `age_s` seconds with half-life
/// `half_life_s` seconds: `0.5^(age / half_life)`, 1 at age ≤ 0. A zero
/// half-life gives weight 1 at age 0 and 0 after.
pub fn live_weight(age_s: f64, half_life_s: f64) -> f64 {
    if age_s <= 0.0 {
        return 1.0;
    }
    if half_life_s <= 0.0 {
        return 0.0;
    }
    (-age_s / half_life_s).exp2()
}

/// Blended speeds (km/h) and what the blend used. `historical` holds one
/// speed per edge for the current hour (see
/// [`HistoricalProfile::speeds_for_hour`](super::HistoricalProfile::speeds_for_hour)).
pub fn blend(
    historical: &[f32],
    live: &LiveLayer,
    now: DateTime<Utc>,
    half_life: Duration,
    ttl: Duration,
) -> Result<(Vec<f32>, BlendStats), SpeedsError> {
    let mut out = Vec::new();
    let stats = blend_into(historical, live, now, half_life, ttl, &mut out)?;
    Ok((out, stats))
}

/// [`blend`] into a reused buffer (cleared first).
pub fn blend_into(
    historical: &[f32],
    live: &LiveLayer,
    now: DateTime<Utc>,
    half_life: Duration,
    ttl: Duration,
    out: &mut Vec<f32>,
) -> Result<BlendStats, SpeedsError> {
    if historical.len() != live.num_edges() {
        return Err(SpeedsError::LengthMismatch {
            what: "historical speed vector",
            got: historical.len(),
            expected: live.num_edges(),
        });
    }
    let now_ms = now.timestamp_millis();
    let ttl_ms = ttl_ms(ttl);
    let half_life_s = half_life.as_secs_f64();
    let (live_speed, live_ms) = live.columns();
    out.clear();
    out.reserve(historical.len());
    let mut fresh = 0u64;
    out.extend(
        historical
            .iter()
            .zip(live_speed)
            .zip(live_ms)
            .map(|((&h, &l), &ms)| {
                let age_ms = now_ms.saturating_sub(ms);
                if ms == NO_OBS || age_ms > ttl_ms {
                    return h;
                }
                fresh += 1;
                let w = live_weight(age_ms as f64 / 1000.0, half_life_s);
                (w * f64::from(l) + (1.0 - w) * f64::from(h)) as f32
            }),
    );
    let newest_age_s = live
        .newest_ms()
        .map(|ms| (now_ms.saturating_sub(ms).max(0)) as f64 / 1000.0);
    Ok(BlendStats {
        fresh_edges: fresh,
        newest_age_s,
        any_fresh: fresh > 0,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    // Exponential decay with a half-life (common practice): weight 1 at age
    // 0, exactly 1/2 after one half-life, 1/4 after two.
    #[test]
    fn weight_halves_per_half_life() {
        assert_eq!(live_weight(0.0, 300.0), 1.0);
        assert_eq!(live_weight(300.0, 300.0), 0.5);
        assert_eq!(live_weight(600.0, 300.0), 0.25);
        assert_eq!(live_weight(-5.0, 300.0), 1.0);
        assert_eq!(live_weight(1.0, 0.0), 0.0);
        assert_eq!(live_weight(0.0, 0.0), 1.0);
    }
}
