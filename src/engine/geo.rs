//! Great-circle geometry on the WGS84 sphere approximation.
//!
//! Everything here is pure arithmetic: the haversine distance used for edge
//! lengths and the heuristic tier, and a local equirectangular projection used
//! by the snapping index (metres east/north of a reference latitude).

use serde::{Deserialize, Serialize};

/// Mean Earth radius in metres (IUGG mean radius R1 = 6,371,008.8 m).
pub const EARTH_RADIUS_M: f64 = 6_371_008.8;

/// A WGS84 coordinate in degrees.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LatLon {
    pub lat: f64,
    pub lon: f64,
}

impl LatLon {
    pub const fn new(lat: f64, lon: f64) -> Self {
        Self { lat, lon }
    }

    /// True when both values are finite and within -90..90 / -180..180.
    pub fn is_valid(&self) -> bool {
        self.lat.is_finite()
            && self.lon.is_finite()
            && (-90.0..=90.0).contains(&self.lat)
            && (-180.0..=180.0).contains(&self.lon)
    }
}

impl std::fmt::Display for LatLon {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{:.6},{:.6}", self.lat, self.lon)
    }
}

/// Why a `LAT,LON` text is not a coordinate.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum LatLonParseError {
    #[error("expected LAT,LON, got {0:?}")]
    NoComma(String),
    #[error("latitude {0:?} is not a number")]
    Latitude(String),
    #[error("longitude {0:?} is not a number")]
    Longitude(String),
    #[error("{0:?} is out of range (lat -90..90, lon -180..180)")]
    OutOfRange(String),
}

impl std::str::FromStr for LatLon {
    type Err = LatLonParseError;

    /// Parses `LAT,LON` in degrees.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let (a, b) = s
            .split_once(',')
            .ok_or_else(|| LatLonParseError::NoComma(s.to_string()))?;
        let lat: f64 = a
            .trim()
            .parse()
            .map_err(|_| LatLonParseError::Latitude(a.to_string()))?;
        let lon: f64 = b
            .trim()
            .parse()
            .map_err(|_| LatLonParseError::Longitude(b.to_string()))?;
        let p = LatLon::new(lat, lon);
        if !p.is_valid() {
            return Err(LatLonParseError::OutOfRange(s.to_string()));
        }
        Ok(p)
    }
}

/// Haversine great-circle distance in metres between two points.
pub fn haversine_m(a: LatLon, b: LatLon) -> f64 {
    haversine_with_radius(a, b, EARTH_RADIUS_M)
}

/// Haversine distance on a sphere of the given radius (same unit as result).
pub fn haversine_with_radius(a: LatLon, b: LatLon, radius: f64) -> f64 {
    let (p1, p2) = (a.lat.to_radians(), b.lat.to_radians());
    let dp = p2 - p1;
    let dl = (b.lon - a.lon).to_radians();
    let h = (dp / 2.0).sin().powi(2) + p1.cos() * p2.cos() * (dl / 2.0).sin().powi(2);
    2.0 * radius * h.sqrt().min(1.0).asin()
}

/// Length in metres of a polyline, by haversine over consecutive points.
pub fn polyline_length_m(points: &[LatLon]) -> f64 {
    points.windows(2).map(|w| haversine_m(w[0], w[1])).sum()
}

/// A local equirectangular projection around a reference latitude.
///
/// Good to a fraction of a percent over a city-sized region, which is all the
/// snapping index needs: it ranks candidate segments and reports a snap
/// distance, and the ranking is what matters.
#[derive(Debug, Clone, Copy, Serialize, Deserialize)]
pub struct LocalProjection {
    /// Metres per degree of longitude at the reference latitude.
    m_per_deg_lon: f64,
    /// Metres per degree of latitude.
    m_per_deg_lat: f64,
}

impl LocalProjection {
    pub fn new(ref_lat: f64) -> Self {
        let m_per_deg_lat = EARTH_RADIUS_M * std::f64::consts::PI / 180.0;
        Self {
            m_per_deg_lat,
            m_per_deg_lon: m_per_deg_lat * ref_lat.to_radians().cos(),
        }
    }

    /// Projects to metres `[east, north]`.
    pub fn project(&self, p: LatLon) -> [f64; 2] {
        [p.lon * self.m_per_deg_lon, p.lat * self.m_per_deg_lat]
    }

    /// Inverse of [`project`](Self::project).
    pub fn unproject(&self, xy: [f64; 2]) -> LatLon {
        LatLon::new(xy[1] / self.m_per_deg_lat, xy[0] / self.m_per_deg_lon)
    }
}

/// Linear interpolation between two coordinates (fine over one road segment).
pub fn lerp(a: LatLon, b: LatLon, t: f64) -> LatLon {
    LatLon::new(a.lat + (b.lat - a.lat) * t, a.lon + (b.lon - a.lon) * t)
}
