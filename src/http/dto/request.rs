//! Request shapes of the answer API and their validation.
//!
//! Requests are parsed from raw bytes with `serde_path_to_error`, so a type
//! error names its field (`from.lat`), and unknown fields are refused. After
//! parsing, `validate` checks every rule and returns the first broken one
//! as a problem naming field and rule, yielding a [`Trip`] or [`MatrixTrip`]
//! the handlers pass to the serving layer.
//!
//! The departure time is `leaving`: an RFC 3339 timestamp with offset, the
//! time the vehicle sets off (absent: now). It is the same name in JSON
//! bodies and in the `GET /v1/eta` query string. An earlier name of this
//! field is refused like any unknown field, with a rule that names
//! `leaving` ([`RENAMED`]).

use crate::engine::geo::LatLon;
use crate::http::problem::ApiError;
use chrono::{DateTime, Utc};
use serde::de::DeserializeOwned;
use serde::{Deserialize, Serialize};

/// `{"lat": .., "lon": ..}` in WGS84 degrees.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Coord {
    pub lat: f64,
    pub lon: f64,
}

impl Coord {
    pub fn check(&self, field: &str) -> Result<LatLon, ApiError> {
        if !self.lat.is_finite() || !(-90.0..=90.0).contains(&self.lat) {
            return Err(ApiError::invalid(
                format!("{field}.lat"),
                "must be within -90..90",
            ));
        }
        if !self.lon.is_finite() || !(-180.0..=180.0).contains(&self.lon) {
            return Err(ApiError::invalid(
                format!("{field}.lon"),
                "must be within -180..180",
            ));
        }
        Ok(LatLon::new(self.lat, self.lon))
    }
}

impl From<LatLon> for Coord {
    fn from(p: LatLon) -> Self {
        Coord {
            lat: p.lat,
            lon: p.lon,
        }
    }
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EtaRequest {
    pub from: Coord,
    pub to: Coord,
    /// When the vehicle sets off (RFC 3339 with offset); absent = now.
    #[serde(default)]
    pub leaving: Option<String>,
    #[serde(default)]
    pub budget_ms: Option<u64>,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MatrixRequest {
    pub from: Vec<Coord>,
    pub to: Vec<Coord>,
    /// When the vehicle sets off (RFC 3339 with offset); absent = now.
    #[serde(default)]
    pub leaving: Option<String>,
    #[serde(default)]
    pub budget_ms: Option<u64>,
}

/// A validated trip request.
#[derive(Debug, Clone, PartialEq)]
pub struct Trip {
    pub from: LatLon,
    pub to: LatLon,
    pub depart_at: Option<DateTime<Utc>>,
    pub budget_ms: Option<u64>,
}

/// A validated matrix request.
#[derive(Debug, Clone, PartialEq)]
pub struct MatrixTrip {
    pub from: Vec<LatLon>,
    pub to: Vec<LatLon>,
    pub depart_at: Option<DateTime<Utc>>,
    pub budget_ms: Option<u64>,
}

/// Parses a JSON body into `T`: syntax errors are 400, shape errors 422 with
/// the path of the offending field.
pub fn parse_json<T: DeserializeOwned>(body: &[u8]) -> Result<T, ApiError> {
    let mut de = serde_json::Deserializer::from_slice(body);
    let parsed: Result<T, _> = serde_path_to_error::deserialize(&mut de);
    match parsed {
        Ok(v) => {
            de.end()
                .map_err(|e| ApiError::Malformed(format!("malformed JSON: {e}")))?;
            Ok(v)
        }
        Err(e) => {
            let path = e.path().to_string();
            let inner = e.into_inner();
            use serde_json::error::Category;
            match inner.classify() {
                Category::Syntax | Category::Eof | Category::Io => {
                    Err(ApiError::Malformed(format!("malformed JSON: {inner}")))
                }
                Category::Data => {
                    let msg = strip_position(&inner.to_string());
                    let base = if path == "." || path.is_empty() {
                        String::new()
                    } else {
                        path
                    };
                    // serde reports a missing field at its parent: name it.
                    if let Some(name) = msg
                        .strip_prefix("missing field `")
                        .and_then(|r| r.strip_suffix('`'))
                    {
                        let field = if base.is_empty() {
                            name.to_string()
                        } else {
                            format!("{base}.{name}")
                        };
                        return Err(ApiError::invalid(field, "is required"));
                    }
                    // A former field name: say what it is called now.
                    if let Some((name, rule)) = msg
                        .strip_prefix("unknown field `")
                        .and_then(|r| r.split_once('`'))
                        .and_then(|(name, _)| Some((name, renamed_rule(name)?)))
                    {
                        // The path already ends at the unknown key.
                        let field = if base.is_empty() {
                            name.to_string()
                        } else {
                            base
                        };
                        return Err(ApiError::invalid(field, rule));
                    }
                    let field = base_or_body(base);
                    Err(ApiError::invalid(field, format!("is not valid: {msg}")))
                }
            }
        }
    }
}

fn base_or_body(base: String) -> String {
    if base.is_empty() {
        "body".to_string()
    } else {
        base
    }
}

fn strip_position(s: &str) -> String {
    match s.find(" at line ") {
        Some(i) => s[..i].to_string(),
        None => s.to_string(),
    }
}

/// Former names of request fields and the name that replaced each: an
/// unknown field with one of these names is refused with a rule pointing
/// at the new name, so a caller holding an old client sees what to change.
pub const RENAMED: [(&str, &str); 1] = [("depart_at", "leaving")];

/// The rule for an unknown field `name`, when it is a former name.
fn renamed_rule(name: &str) -> Option<String> {
    RENAMED
        .iter()
        .find(|(old, _)| *old == name)
        .map(|(_, new)| format!("is an unknown field; the departure time is `{new}`"))
}

/// Parses the `leaving` field: an RFC 3339 timestamp with offset.
pub fn parse_leaving(v: &Option<String>) -> Result<Option<DateTime<Utc>>, ApiError> {
    match v {
        None => Ok(None),
        Some(s) => DateTime::parse_from_rfc3339(s)
            .map(|d| Some(d.with_timezone(&Utc)))
            .map_err(|_| {
                ApiError::invalid(
                    "leaving",
                    "must be an RFC 3339 date-time such as 2026-12-02T08:30:00Z",
                )
            }),
    }
}

fn check_budget(b: Option<u64>) -> Result<Option<u64>, ApiError> {
    match b {
        Some(0) => Err(ApiError::invalid("budget_ms", "must be at least 1")),
        other => Ok(other),
    }
}

impl EtaRequest {
    pub fn validate(&self) -> Result<Trip, ApiError> {
        Ok(Trip {
            from: self.from.check("from")?,
            to: self.to.check("to")?,
            depart_at: parse_leaving(&self.leaving)?,
            budget_ms: check_budget(self.budget_ms)?,
        })
    }
}

impl MatrixRequest {
    pub fn validate(&self, max_cells: usize) -> Result<MatrixTrip, ApiError> {
        if self.from.is_empty() {
            return Err(ApiError::invalid(
                "from",
                "must list at least one coordinate",
            ));
        }
        if self.to.is_empty() {
            return Err(ApiError::invalid("to", "must list at least one coordinate"));
        }
        let cells = self.from.len().saturating_mul(self.to.len());
        if cells > max_cells {
            return Err(ApiError::OverLimit {
                field: "from×to".into(),
                rule: format!("asks for {cells} cells; the limit is {max_cells}"),
            });
        }
        let from = self
            .from
            .iter()
            .enumerate()
            .map(|(i, c)| c.check(&format!("from[{i}]")))
            .collect::<Result<Vec<_>, _>>()?;
        let to = self
            .to
            .iter()
            .enumerate()
            .map(|(i, c)| c.check(&format!("to[{i}]")))
            .collect::<Result<Vec<_>, _>>()?;
        Ok(MatrixTrip {
            from,
            to,
            depart_at: parse_leaving(&self.leaving)?,
            budget_ms: check_budget(self.budget_ms)?,
        })
    }
}

/// Parses `GET /v1/eta?from=LAT,LON&to=LAT,LON[&leaving=..][&budget_ms=..]`.
pub fn parse_eta_query(query: Option<&str>) -> Result<Trip, ApiError> {
    let mut from = None;
    let mut to = None;
    let mut leaving = None;
    let mut budget = None;
    for (k, v) in form_pairs(query.unwrap_or("")) {
        let slot = match k.as_str() {
            "from" => &mut from,
            "to" => &mut to,
            "leaving" => &mut leaving,
            "budget_ms" => &mut budget,
            other => {
                let rule = renamed_rule(other).unwrap_or_else(|| {
                    "is not a known parameter (from, to, leaving, budget_ms)".to_string()
                });
                return Err(ApiError::invalid(other.to_string(), rule));
            }
        };
        if slot.is_some() {
            return Err(ApiError::invalid(k, "is given more than once"));
        }
        *slot = Some(v);
    }
    let coord = |name: &str, v: Option<String>| -> Result<LatLon, ApiError> {
        let v = v.ok_or_else(|| ApiError::invalid(name, "is required (LAT,LON)"))?;
        let (a, b) = v
            .split_once(',')
            .ok_or_else(|| ApiError::invalid(name, "must be LAT,LON in degrees"))?;
        let lat: f64 = a
            .trim()
            .parse()
            .map_err(|_| ApiError::invalid(format!("{name}.lat"), "must be a number"))?;
        let lon: f64 = b
            .trim()
            .parse()
            .map_err(|_| ApiError::invalid(format!("{name}.lon"), "must be a number"))?;
        Coord { lat, lon }.check(name)
    };
    let budget_ms = match budget {
        None => None,
        Some(b) => Some(
            b.parse::<u64>()
                .map_err(|_| ApiError::invalid("budget_ms", "must be a positive integer"))?,
        ),
    };
    Ok(Trip {
        from: coord("from", from)?,
        to: coord("to", to)?,
        depart_at: parse_leaving(&leaving)?,
        budget_ms: check_budget(budget_ms)?,
    })
}

/// `application/x-www-form-urlencoded` pairs, percent-decoded.
fn form_pairs(q: &str) -> Vec<(String, String)> {
    q.split('&')
        .filter(|s| !s.is_empty())
        .map(|kv| {
            let (k, v) = kv.split_once('=').unwrap_or((kv, ""));
            (decode(k), decode(v))
        })
        .collect()
}

fn decode(s: &str) -> String {
    let b = s.as_bytes();
    let mut out = Vec::with_capacity(b.len());
    let mut i = 0;
    while i < b.len() {
        match b[i] {
            b'+' => out.push(b' '),
            b'%' if i + 2 < b.len() => {
                let hex = std::str::from_utf8(&b[i + 1..i + 3])
                    .ok()
                    .and_then(|h| u8::from_str_radix(h, 16).ok());
                match hex {
                    Some(v) => {
                        out.push(v);
                        i += 2;
                    }
                    None => out.push(b'%'),
                }
            }
            c => out.push(c),
        }
        i += 1;
    }
    String::from_utf8_lossy(&out).into_owned()
}
