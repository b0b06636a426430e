//! Response shapes of the answer API (`/v1/eta`, `/v1/eta/matrix`,
//! `/v1/route`) and their conversions from the serving layer's answers.
//!
//! Numbers are rounded to millimetres / milliseconds here, once, so every
//! answer route reports the same precision. Graph answers carry `sources`:
//! the shares of their travel time on live, historical and free-flow speeds
//! (rounded to 1e-6; `null` for heuristic answers).

use hodos_engine::geo::LatLon;
use hodos_serving::answer::{Answer, MatrixAnswer};
use hodos_serving::tier::Sources;
use serde::Serialize;

/// Rounds to three decimals (metres → millimetres, seconds → milliseconds).
pub fn round3(x: f64) -> f64 {
    (x * 1000.0).round() / 1000.0
}

/// Which snapshot answered.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct SnapshotRef {
    pub region: String,
    pub generation: u64,
}

impl SnapshotRef {
    /// From the serving layer's `(region, generation)` pair.
    pub fn from_pair(s: &Option<(String, u64)>) -> Option<SnapshotRef> {
        s.as_ref().map(|(region, generation)| SnapshotRef {
            region: region.clone(),
            generation: *generation,
        })
    }
}

/// The hour-of-week profile whose metric answered.
#[derive(Debug, Clone, Copy, Serialize, PartialEq)]
pub struct ProfileRef {
    pub index: u8,
    /// The hour of week whose speeds the profile's metric holds.
    pub representative_hour: u8,
}

/// Shares of an answer's travel time per speed source, adding up to 1.
#[derive(Debug, Clone, Copy, Serialize, PartialEq)]
pub struct SourcesDto {
    /// On edges whose speed blends in a fresh live observation.
    pub live: f64,
    /// On edges with a historical row for the departure hour.
    pub historical: f64,
    /// On edges at their default free-flow speed.
    pub free_flow: f64,
}

impl From<&Sources> for SourcesDto {
    fn from(s: &Sources) -> Self {
        let r = |x: f64| (x * 1e6).round() / 1e6;
        SourcesDto {
            live: r(s.live),
            historical: r(s.historical),
            free_flow: r(s.free_flow),
        }
    }
}

#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct EtaResponse {
    pub eta_s: f64,
    pub meters: f64,
    pub tier: &'static str,
    pub fallback_reason: Option<&'static str>,
    pub speeds_age_s: Option<f64>,
    pub sources: Option<SourcesDto>,
    pub snapshot: Option<SnapshotRef>,
    pub from_snap_m: Option<f64>,
    pub to_snap_m: Option<f64>,
    /// Hour of week of the departure in the region's time zone (0 = Monday
    /// 00:00), when a region covers the trip.
    pub hour_of_week: Option<u8>,
    /// The profile whose metric answered (historical tier only).
    pub profile: Option<ProfileRef>,
    /// The tier's uncorrected time: `eta_s` itself when no correction
    /// model applied.
    pub graph_eta_s: f64,
    /// The interval around `eta_s` (the model's quantile levels, p10 and
    /// p90 by default); null without a correction model.
    pub eta_low_s: Option<f64>,
    pub eta_high_s: Option<f64>,
    /// The correction model that gave `eta_s`; null when none applied.
    pub model_version: Option<u64>,
}

impl From<&Answer> for EtaResponse {
    fn from(a: &Answer) -> Self {
        EtaResponse {
            eta_s: round3(a.eta_s),
            meters: round3(a.meters),
            tier: a.tier.as_str(),
            fallback_reason: a.reason.map(|r| r.as_str()),
            speeds_age_s: a.speeds_age_s.map(round3),
            sources: a.sources.as_ref().map(SourcesDto::from),
            snapshot: SnapshotRef::from_pair(&a.snapshot),
            from_snap_m: a.from_snap_m.map(round3),
            to_snap_m: a.to_snap_m.map(round3),
            hour_of_week: a.hour_of_week,
            profile: a.profile.map(|p| ProfileRef {
                index: p.index,
                representative_hour: p.representative_hour,
            }),
            graph_eta_s: round3(a.graph_s()),
            eta_low_s: a.correction.map(|c| round3(c.low_s)),
            eta_high_s: a.correction.map(|c| round3(c.high_s)),
            model_version: a.correction.map(|c| c.model_version),
        }
    }
}

/// A GeoJSON LineString (RFC 7946 §3.1.4): `[lon, lat]` positions.
///
/// Fields in this order (`coordinates`, `type`) so the bytes on the wire
/// stay those of the earlier `serde_json::Value` form, whose keys were sorted.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct LineString {
    pub coordinates: Vec<[f64; 2]>,
    /// Always `LineString`.
    #[serde(rename = "type")]
    pub kind: &'static str,
}

impl LineString {
    pub fn new(points: impl IntoIterator<Item = LatLon>) -> Self {
        LineString {
            coordinates: points.into_iter().map(|p| [p.lon, p.lat]).collect(),
            kind: "LineString",
        }
    }
}

/// An ETA with its path.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct RouteResponse {
    #[serde(flatten)]
    pub eta: EtaResponse,
    /// GeoJSON LineString (RFC 7946), `[lon, lat]` positions.
    pub geometry: LineString,
}

impl RouteResponse {
    /// The answer with its road path; heuristic answers have none, so their
    /// geometry is the straight line from `from` to `to`.
    pub fn new(a: &Answer, from: LatLon, to: LatLon) -> Self {
        let geometry = match &a.geometry {
            Some(g) => LineString::new(g.iter().copied()),
            None => LineString::new([from, to]),
        };
        RouteResponse {
            eta: EtaResponse::from(a),
            geometry,
        }
    }
}

#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct MatrixResponse {
    pub eta_s: Vec<Vec<f64>>,
    pub meters: Vec<Vec<f64>>,
    pub tier: Vec<Vec<&'static str>>,
    pub fallback_reason: Vec<Vec<Option<&'static str>>>,
    pub sources: Vec<Vec<Option<SourcesDto>>>,
    pub snapshot: Option<SnapshotRef>,
    /// Per cell, as in [`EtaResponse`].
    pub graph_eta_s: Vec<Vec<f64>>,
    pub eta_low_s: Vec<Vec<Option<f64>>>,
    pub eta_high_s: Vec<Vec<Option<f64>>>,
    pub model_version: Vec<Vec<Option<u64>>>,
}

impl From<&MatrixAnswer> for MatrixResponse {
    fn from(a: &MatrixAnswer) -> Self {
        let rows = || (0..a.rows).map(|i| &a.cells[i * a.cols..(i + 1) * a.cols]);
        MatrixResponse {
            eta_s: rows()
                .map(|row| row.iter().map(|c| round3(c.eta_s)).collect())
                .collect(),
            meters: rows()
                .map(|row| row.iter().map(|c| round3(c.meters)).collect())
                .collect(),
            tier: rows()
                .map(|row| row.iter().map(|c| c.tier.as_str()).collect())
                .collect(),
            fallback_reason: rows()
                .map(|row| row.iter().map(|c| c.reason.map(|r| r.as_str())).collect())
                .collect(),
            sources: rows()
                .map(|row| {
                    row.iter()
                        .map(|c| c.sources.as_ref().map(SourcesDto::from))
                        .collect()
                })
                .collect(),
            snapshot: SnapshotRef::from_pair(&a.snapshot),
            graph_eta_s: rows()
                .map(|row| {
                    row.iter()
                        .map(|c| round3(c.correction.map_or(c.eta_s, |k| k.graph_s)))
                        .collect()
                })
                .collect(),
            eta_low_s: rows()
                .map(|row| {
                    row.iter()
                        .map(|c| c.correction.map(|k| round3(k.low_s)))
                        .collect()
                })
                .collect(),
            eta_high_s: rows()
                .map(|row| {
                    row.iter()
                        .map(|c| c.correction.map(|k| round3(k.high_s)))
                        .collect()
                })
                .collect(),
            model_version: rows()
                .map(|row| {
                    row.iter()
                        .map(|c| c.correction.map(|k| k.model_version))
                        .collect()
                })
                .collect(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// RFC 7946 §3.1.1: positions are `[longitude, latitude]`; §3.1.4: a
    /// LineString has `"type": "LineString"` and `coordinates`.
    #[test]
    fn line_string_is_lon_lat_geojson() {
        let l = LineString::new([LatLon::new(10.0, 20.0), LatLon::new(11.0, 21.0)]);
        let v = serde_json::to_value(&l).unwrap();
        assert_eq!(
            v,
            serde_json::json!({"type": "LineString", "coordinates": [[20.0, 10.0], [21.0, 11.0]]})
        );
    }

    /// Rounding half away from zero at the third decimal (`f64::round`).
    #[test]
    fn round3_keeps_three_decimals() {
        // 1.0625 = 1 + 2^-4 is exact in binary: 1062.5 rounds up.
        assert_eq!(round3(1.0625), 1.063);
        assert_eq!(round3(1.0624), 1.062);
        assert_eq!(round3(-0.0004), -0.0);
    }
}
