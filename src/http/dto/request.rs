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

use crate::problem::ApiError;
use chrono::{DateTime, Utc};
use hodos_engine::geo::LatLon;
use serde::de::{self, DeserializeOwned, Deserializer, MapAccess, SeqAccess, Visitor};
use serde::{Deserialize, Serialize};
use std::fmt;

/// `{"lat": .., "lon": ..}` in WGS84 degrees. Only the object form: serde's
/// derive would also take `[lat, lon]`, which the schema does not allow and
/// whose axis order a caller cannot tell (GeoJSON writes `[lon, lat]`).
#[derive(Debug, Clone, Copy, Serialize, PartialEq)]
pub struct Coord {
    pub lat: f64,
    pub lon: f64,
}

/// Marks a parse error whose text is our own rule: [`parse_json`] hands
/// the rest of the message on as the problem's `rule` (no serde wording).
const RULE: &str = "rule: ";

/// The rule for a coordinate sent as an array.
pub const COORD_ARRAY_RULE: &str =
    "must be an object {\"lat\": .., \"lon\": ..}; arrays are refused (their axis order is ambiguous)";

impl<'de> Deserialize<'de> for Coord {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        #[derive(Deserialize)]
        #[serde(deny_unknown_fields)]
        struct Fields {
            lat: f64,
            lon: f64,
        }
        struct ObjectOnly;
        impl<'de> Visitor<'de> for ObjectOnly {
            type Value = Coord;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("an object {\"lat\": .., \"lon\": ..}")
            }
            fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<Coord, A::Error> {
                let c = Fields::deserialize(de::value::MapAccessDeserializer::new(map))?;
                Ok(Coord {
                    lat: c.lat,
                    lon: c.lon,
                })
            }
            fn visit_seq<A: SeqAccess<'de>>(self, _: A) -> Result<Coord, A::Error> {
                Err(de::Error::custom(format!("{RULE}{COORD_ARRAY_RULE}")))
            }
            fn visit_bool<E: de::Error>(self, _: bool) -> Result<Coord, E> {
                Err(not_an_object())
            }
            fn visit_i64<E: de::Error>(self, _: i64) -> Result<Coord, E> {
                Err(not_an_object())
            }
            fn visit_u64<E: de::Error>(self, _: u64) -> Result<Coord, E> {
                Err(not_an_object())
            }
            fn visit_f64<E: de::Error>(self, _: f64) -> Result<Coord, E> {
                Err(not_an_object())
            }
            fn visit_str<E: de::Error>(self, _: &str) -> Result<Coord, E> {
                Err(not_an_object())
            }
            fn visit_unit<E: de::Error>(self) -> Result<Coord, E> {
                Err(not_an_object())
            }
        }
        fn not_an_object<E: de::Error>() -> E {
            E::custom(format!(
                "{RULE}must be an object {{\"lat\": .., \"lon\": ..}}"
            ))
        }
        // `any`, not `map`: serde_json refuses an array for `map` before
        // the visitor can say why.
        d.deserialize_any(ObjectOnly)
    }
}

/// The rule for `leaving`.
const LEAVING_RULE: &str = "must be an RFC 3339 date-time such as 2026-12-02T08:30:00Z";

/// `leaving`: a string when present. `null` is refused like the schema
/// says (`type: string`); omit the field for "now".
fn leaving_string<'de, D: Deserializer<'de>>(d: D) -> Result<Option<String>, D::Error> {
    struct V;
    impl<'de> Visitor<'de> for V {
        type Value = Option<String>;
        fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
            f.write_str("a date-time string")
        }
        fn visit_str<E: de::Error>(self, s: &str) -> Result<Self::Value, E> {
            Ok(Some(s.to_string()))
        }
        fn visit_unit<E: de::Error>(self) -> Result<Self::Value, E> {
            Err(E::custom(format!(
                "{RULE}{LEAVING_RULE}; null is refused: omit the field to leave now"
            )))
        }
        fn visit_none<E: de::Error>(self) -> Result<Self::Value, E> {
            self.visit_unit()
        }
        fn visit_bool<E: de::Error>(self, _: bool) -> Result<Self::Value, E> {
            Err(E::custom(format!("{RULE}{LEAVING_RULE}")))
        }
        fn visit_i64<E: de::Error>(self, _: i64) -> Result<Self::Value, E> {
            Err(E::custom(format!("{RULE}{LEAVING_RULE}")))
        }
        fn visit_u64<E: de::Error>(self, _: u64) -> Result<Self::Value, E> {
            Err(E::custom(format!("{RULE}{LEAVING_RULE}")))
        }
        fn visit_f64<E: de::Error>(self, _: f64) -> Result<Self::Value, E> {
            Err(E::custom(format!("{RULE}{LEAVING_RULE}")))
        }
        fn visit_map<A: MapAccess<'de>>(self, _: A) -> Result<Self::Value, A::Error> {
            Err(de::Error::custom(format!("{RULE}{LEAVING_RULE}")))
        }
        fn visit_seq<A: SeqAccess<'de>>(self, _: A) -> Result<Self::Value, A::Error> {
            Err(de::Error::custom(format!("{RULE}{LEAVING_RULE}")))
        }
    }
    d.deserialize_any(V)
}

/// The largest `budget_ms`: 2^53 − 1, the largest integer every JSON
/// parser holds exactly (RFC 8259 §6); the document's `maximum`.
pub const BUDGET_MAX: u64 = (1 << 53) - 1;

/// The rule for `budget_ms`.
pub const BUDGET_RULE: &str =
    "must be a whole number of milliseconds, at least 1 and at most 9007199254740991";

/// `budget_ms`: an integral JSON number (JSON Schema's `integer` takes
/// `147700.0` as well as `147700`), at least 1. Anything else is refused
/// with [`BUDGET_RULE`], never a Rust type name; `null` is refused like
/// the schema says (omit the field for no budget).
fn budget_number<'de, D: Deserializer<'de>>(d: D) -> Result<Option<u64>, D::Error> {
    struct V;
    fn refuse<E: de::Error>() -> E {
        E::custom(format!("{RULE}{BUDGET_RULE}"))
    }
    impl<'de> Visitor<'de> for V {
        type Value = Option<u64>;
        fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
            f.write_str(BUDGET_RULE)
        }
        fn visit_u64<E: de::Error>(self, v: u64) -> Result<Self::Value, E> {
            Ok(Some(v))
        }
        fn visit_i64<E: de::Error>(self, v: i64) -> Result<Self::Value, E> {
            u64::try_from(v).map(Some).map_err(|_| refuse())
        }
        fn visit_f64<E: de::Error>(self, v: f64) -> Result<Self::Value, E> {
            // Exactly integral and within u64 (2^64 itself is not).
            if v.fract() == 0.0 && (0.0..18_446_744_073_709_551_616.0).contains(&v) {
                Ok(Some(v as u64))
            } else {
                Err(refuse())
            }
        }
        fn visit_unit<E: de::Error>(self) -> Result<Self::Value, E> {
            Err(E::custom(format!(
                "{RULE}{BUDGET_RULE}; null is refused: omit the field for no budget"
            )))
        }
        fn visit_none<E: de::Error>(self) -> Result<Self::Value, E> {
            self.visit_unit()
        }
        fn visit_bool<E: de::Error>(self, _: bool) -> Result<Self::Value, E> {
            Err(refuse())
        }
        fn visit_str<E: de::Error>(self, _: &str) -> Result<Self::Value, E> {
            Err(refuse())
        }
        fn visit_map<A: MapAccess<'de>>(self, _: A) -> Result<Self::Value, A::Error> {
            Err(refuse())
        }
        fn visit_seq<A: SeqAccess<'de>>(self, _: A) -> Result<Self::Value, A::Error> {
            Err(refuse())
        }
    }
    d.deserialize_any(V)
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
    #[serde(default, deserialize_with = "leaving_string")]
    pub leaving: Option<String>,
    #[serde(default, deserialize_with = "budget_number")]
    pub budget_ms: Option<u64>,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MatrixRequest {
    pub from: Vec<Coord>,
    pub to: Vec<Coord>,
    /// When the vehicle sets off (RFC 3339 with offset); absent = now.
    #[serde(default, deserialize_with = "leaving_string")]
    pub leaving: Option<String>,
    #[serde(default, deserialize_with = "budget_number")]
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
/// Every request body is an object: serde's derive would also read a
/// struct from an array of its fields in order, which the schema does not
/// allow, so an array is refused before parsing.
pub fn parse_json<T: DeserializeOwned>(body: &[u8]) -> Result<T, ApiError> {
    if body.iter().find(|b| !b.is_ascii_whitespace()) == Some(&b'[') {
        return Err(ApiError::invalid("body", "must be a JSON object"));
    }
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
                    // Our own rule from a field's deserializer.
                    if let Some(rule) = msg.strip_prefix(RULE) {
                        return Err(ApiError::invalid(base_or_body(base), rule));
                    }
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
            .map_err(|_| ApiError::invalid("leaving", LEAVING_RULE)),
    }
}

fn check_budget(b: Option<u64>) -> Result<Option<u64>, ApiError> {
    match b {
        Some(0) => Err(ApiError::invalid("budget_ms", "must be at least 1")),
        Some(b) if b > BUDGET_MAX => Err(ApiError::invalid("budget_ms", BUDGET_RULE)),
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
            .filter(|(a, b)| decimal(a, 2) && decimal(b, 3))
            .ok_or_else(|| ApiError::invalid(name, QUERY_COORD_RULE))?;
        // `decimal` admits only digits, one point and a sign: these parse.
        let lat: f64 = a
            .parse()
            .map_err(|_| ApiError::invalid(format!("{name}.lat"), "must be a number"))?;
        let lon: f64 = b
            .parse()
            .map_err(|_| ApiError::invalid(format!("{name}.lon"), "must be a number"))?;
        Coord { lat, lon }.check(name)
    };
    let budget_ms = match budget {
        None => None,
        Some(b) => Some(
            b.parse::<u64>()
                .map_err(|_| ApiError::invalid("budget_ms", BUDGET_RULE))?,
        ),
    };
    Ok(Trip {
        from: coord("from", from)?,
        to: coord("to", to)?,
        depart_at: parse_leaving(&leaving)?,
        budget_ms: check_budget(budget_ms)?,
    })
}

/// The rule for a malformed `from`/`to` query parameter.
pub const QUERY_COORD_RULE: &str =
    "must be LAT,LON in decimal degrees (digits, an optional point and sign; e.g. 12.5,-3.25)";

/// The OpenAPI `pattern` of the `from`/`to` query parameters: exactly the
/// strings [`parse_eta_query`] takes (decimal syntax of [`decimal`], then
/// latitude within ±90 and longitude within ±180), so a tool generating
/// from the schema and the service agree on every string.
pub const QUERY_COORD_PATTERN: &str =
    r"^-?(90(\.0+)?|[0-8]?[0-9](\.[0-9]+)?),-?(180(\.0+)?|(1[0-7][0-9]|[0-9]?[0-9])(\.[0-9]+)?)$";

/// `-?D{1,int_digits}(.D+)?` with a three-digit integer part starting with
/// `1` (longitudes): the syntax half of [`QUERY_COORD_PATTERN`].
fn decimal(s: &str, int_digits: usize) -> bool {
    let s = s.strip_prefix('-').unwrap_or(s);
    let (int, frac) = match s.split_once('.') {
        Some((i, f)) => (i, Some(f)),
        None => (s, None),
    };
    let digits = |t: &str| !t.is_empty() && t.bytes().all(|c| c.is_ascii_digit());
    digits(int)
        && int.len() <= int_digits
        && (int.len() < 3 || int.starts_with('1'))
        && frac.is_none_or(digits)
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
