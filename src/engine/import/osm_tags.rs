//! OpenStreetMap tag rules for car routing: which ways are drivable, in which
//! direction, and at what free-flow speed.
//!
//! Everything here is a pure function of literal tag values, so each rule is
//! unit-tested on the values the OpenStreetMap wiki documents. The importer
//! ([`super::osm`]) reads a way's tags once into a [`TagView`] and asks
//! [`car_way`] for the verdict.
//!
//! Sources, cited beside each rule: the OpenStreetMap wiki pages
//! Key:highway, Key:oneway, Key:maxspeed, Key:access, Key:junction and
//! Key:area (wiki.openstreetmap.org/wiki/Key:…). Numbers that the wiki does not
//! give (default speeds, zone speeds) are marked "common practice / from
//! memory": they are choices, not facts.

use crate::graph::RoadClass;

/// The handful of tags the car rules look at, read from a way in one scan.
///
/// Holding borrowed values for a fixed set of keys (instead of a map) keeps
/// the importer allocation-free per way.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct TagView<'a> {
    pub highway: Option<&'a str>,
    pub oneway: Option<&'a str>,
    pub junction: Option<&'a str>,
    pub area: Option<&'a str>,
    pub access: Option<&'a str>,
    pub vehicle: Option<&'a str>,
    pub motor_vehicle: Option<&'a str>,
    pub motorcar: Option<&'a str>,
    pub maxspeed: Option<&'a str>,
    pub maxspeed_forward: Option<&'a str>,
    pub maxspeed_backward: Option<&'a str>,
}

impl<'a> TagView<'a> {
    /// Reads the relevant keys from `(key, value)` pairs; other keys are
    /// ignored. A repeated key keeps its last value.
    pub fn from_pairs<I>(pairs: I) -> Self
    where
        I: IntoIterator<Item = (&'a str, &'a str)>,
    {
        let mut t = TagView::default();
        for (k, v) in pairs {
            let slot = match k {
                "highway" => &mut t.highway,
                "oneway" => &mut t.oneway,
                "junction" => &mut t.junction,
                "area" => &mut t.area,
                "access" => &mut t.access,
                "vehicle" => &mut t.vehicle,
                "motor_vehicle" => &mut t.motor_vehicle,
                "motorcar" => &mut t.motorcar,
                "maxspeed" => &mut t.maxspeed,
                "maxspeed:forward" => &mut t.maxspeed_forward,
                "maxspeed:backward" => &mut t.maxspeed_backward,
                _ => continue,
            };
            *slot = Some(v);
        }
        t
    }

    /// Value of one of the keys this view holds (`None` for other keys).
    pub fn get(&self, key: &str) -> Option<&'a str> {
        match key {
            "highway" => self.highway,
            "oneway" => self.oneway,
            "junction" => self.junction,
            "area" => self.area,
            "access" => self.access,
            "vehicle" => self.vehicle,
            "motor_vehicle" => self.motor_vehicle,
            "motorcar" => self.motorcar,
            "maxspeed" => self.maxspeed,
            "maxspeed:forward" => self.maxspeed_forward,
            "maxspeed:backward" => self.maxspeed_backward,
            _ => None,
        }
    }
}

/// Road class of a `highway=*` value, for drivable classes only.
///
/// Source: OpenStreetMap wiki, Key:highway ("Roads" and "Link roads" tables).
/// Kept: motorway, trunk, primary, secondary, tertiary, their `_link`
/// variants, unclassified, residential, living_street, service.
///
/// Everything else is `None`: paths for other modes (footway, cycleway,
/// bridleway, path, steps, pedestrian, corridor), lifecycle values
/// (construction, proposed, abandoned, disused), special-purpose ways
/// (bus_guideway, busway, raceway, escape) and `highway=road` (the wiki's
/// placeholder for a road of unknown type, usually from unfinished mapping).
///
/// `highway=track` is excluded by choice: the wiki describes tracks as
/// agricultural and forestry roads, they are often unpaved or gated, and
/// including them gives car ETAs shortcuts no ordinary car takes.
pub fn road_class(highway: &str) -> Option<RoadClass> {
    Some(match highway {
        "motorway" => RoadClass::Motorway,
        "motorway_link" => RoadClass::MotorwayLink,
        "trunk" => RoadClass::Trunk,
        "trunk_link" => RoadClass::TrunkLink,
        "primary" => RoadClass::Primary,
        "primary_link" => RoadClass::PrimaryLink,
        "secondary" => RoadClass::Secondary,
        "secondary_link" => RoadClass::SecondaryLink,
        "tertiary" => RoadClass::Tertiary,
        "tertiary_link" => RoadClass::TertiaryLink,
        "unclassified" => RoadClass::Unclassified,
        "residential" => RoadClass::Residential,
        "living_street" => RoadClass::LivingStreet,
        "service" => RoadClass::Service,
        _ => return None,
    })
}

/// Free-flow speed in km/h for a road without a usable `maxspeed`.
///
/// Common practice / from memory, not from a standard: typical urban and
/// interurban driving speeds per class. Links are somewhat slower than their
/// road because they are short, curved and end at junctions. `Unknown` (a
/// source without classes) gets a middling 40.
pub fn default_speed_kmh(class: RoadClass) -> f32 {
    match class {
        RoadClass::Motorway => 110.0,
        RoadClass::MotorwayLink => 70.0,
        RoadClass::Trunk => 90.0,
        RoadClass::TrunkLink => 60.0,
        RoadClass::Primary => 65.0,
        RoadClass::PrimaryLink => 50.0,
        RoadClass::Secondary => 55.0,
        RoadClass::SecondaryLink => 45.0,
        RoadClass::Tertiary => 45.0,
        RoadClass::TertiaryLink => 40.0,
        RoadClass::Unclassified => 40.0,
        RoadClass::Residential => 30.0,
        RoadClass::LivingStreet => 10.0,
        RoadClass::Service => 15.0,
        RoadClass::Unknown => 40.0,
    }
}

/// Which way traffic may travel along a way, relative to its node order.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Direction {
    /// Two-way road.
    Both,
    /// One-way in the order of the way's nodes.
    Forward,
    /// One-way against the order of the way's nodes (`oneway=-1`).
    Backward,
}

/// Travel direction of a way.
///
/// Source: OpenStreetMap wiki, Key:oneway.
/// - `yes`, `true`, `1` → [`Direction::Forward`]; `-1`, `reverse` →
///   [`Direction::Backward`]; `no`, `false`, `0` → [`Direction::Both`].
/// - Implied one-way when `oneway` is absent: `highway=motorway`,
///   `junction=roundabout` and `junction=circular` (Key:oneway, "implied
///   oneway"; Key:junction). `highway=motorway_link` is treated as implied
///   one-way too: the wiki's motorway_link page says links are one-way unless
///   tagged `oneway=no` (from memory), and two-way links do carry
///   `oneway=no` in practice. An explicit value always wins over the implied
///   one, so `junction=roundabout + oneway=no` is two-way.
/// - `alternating` (one lane shared in turns, e.g. at a narrow bridge with
///   signals) → [`Direction::Both`]: both directions are driven, just not at
///   once. `reversible` (direction switches over the day) also maps to
///   `Both` here, but [`is_accessible`] excludes such ways: no single
///   free-flow direction is right for them, and leaving them out never routes
///   a car the wrong way.
/// - Any other value (`unknown`, conditional text, typos) is treated as if
///   the tag were absent, so the implied default applies.
pub fn direction(tags: &TagView<'_>) -> Direction {
    match tags.oneway.map(str::trim) {
        Some("yes" | "true" | "1") => Direction::Forward,
        Some("-1" | "reverse") => Direction::Backward,
        Some("no" | "false" | "0" | "alternating" | "reversible") => Direction::Both,
        _ => {
            let implied = matches!(tags.highway, Some("motorway" | "motorway_link"))
                || matches!(tags.junction, Some("roundabout" | "circular"));
            if implied {
                Direction::Forward
            } else {
                Direction::Both
            }
        }
    }
}

/// What one access-type key says about cars.
fn access_verdict(value: &str) -> Option<bool> {
    match value.trim() {
        // Key:access, "List of possible values": legal for the public, or
        // for cars going to a destination on the road (the common case for
        // a trip's first or last street).
        "yes" | "designated" | "permissive" | "destination" | "customers" | "permit"
        | "discouraged" => Some(true),
        // Key:access: no public access, or only for a group an ETA service
        // does not route (owners, farm and forest vehicles, emergency
        // services, military, delivery vehicles; `use_sidepath` is a cycling
        // value but still forbids the way).
        "no" | "private" | "agricultural" | "forestry" | "emergency" | "military" | "delivery"
        | "use_sidepath" => Some(false),
        // Unknown values say nothing; a less specific key decides.
        _ => None,
    }
}

/// Whether cars may use a way, from its access tags.
///
/// Source: OpenStreetMap wiki, Key:access ("Transport mode restrictions":
/// the keys form a hierarchy access → vehicle → motor_vehicle → motorcar,
/// and the most specific key that is present wins). So `access=no +
/// motor_vehicle=yes` is drivable and `motor_vehicle=yes + motorcar=no` is
/// not. Without any access tag a drivable highway class is open.
///
/// Also excluded: `oneway=reversible` (see [`direction`]) and `area=yes`
/// (Key:area: a highway drawn as an area, e.g. a square, is not a line a car
/// follows).
pub fn is_accessible(tags: &TagView<'_>) -> bool {
    if matches!(tags.oneway.map(str::trim), Some("reversible")) {
        return false;
    }
    if matches!(tags.area, Some("yes")) {
        return false;
    }
    for value in [tags.motorcar, tags.motor_vehicle, tags.vehicle, tags.access]
        .into_iter()
        .flatten()
    {
        if let Some(v) = access_verdict(value) {
            return v;
        }
    }
    true
}

/// Speed used for `maxspeed=none` (no legal limit): 130 km/h, a choice
/// (typical cruising speed on such a motorway), not a value from the wiki.
pub const MAXSPEED_NONE_KMH: f32 = 130.0;

/// Speed used for `maxspeed=walk`: 7 km/h. Key:maxspeed describes "walk" as
/// walking pace; 7 is the upper end of walking pace, from memory.
pub const MAXSPEED_WALK_KMH: f32 = 7.0;

/// Largest speed accepted from a tag; larger values are treated as
/// mistakes. A choice: no public road has a higher posted limit.
pub const MAXSPEED_MAX_KMH: f32 = 300.0;

/// km/h per mile per hour (international mile, 1609.344 m, exact).
const KMH_PER_MPH: f32 = 1.609_344;
/// km/h per knot (international nautical mile, 1852 m, exact).
const KMH_PER_KNOT: f32 = 1.852;

/// Speed of an implicit zone code `XX:category` (Key:maxspeed, "Implicit
/// maxspeed values"). The wiki defines the codes; the national numbers differ,
/// so these are generic values, common practice / from memory: urban 50,
/// rural 90, trunk 100, motorway 120, living_street 10, bicycle_road 30,
/// zoneNN / zone:NN = NN. Great Britain's
/// national speed limits are in mph by law: single carriageway 60 mph, dual
/// carriageway and motorway 70 mph.
fn zone_speed_kmh(country: &str, category: &str) -> Option<f32> {
    let category = category.trim();
    if country.eq_ignore_ascii_case("GB") || country.eq_ignore_ascii_case("UK") {
        match category {
            "nsl_single" => return Some(60.0 * KMH_PER_MPH),
            "nsl_dual" | "motorway" => return Some(70.0 * KMH_PER_MPH),
            _ => {}
        }
    }
    let v = match category {
        "urban" => 50.0,
        "rural" => 90.0,
        "trunk" => 100.0,
        "motorway" => 120.0,
        "living_street" => 10.0,
        "bicycle_road" => 30.0,
        other => {
            // "zone30" and "zone:30"; a zone without a number says nothing.
            let n = other.strip_prefix("zone")?;
            let n = n.strip_prefix(':').unwrap_or(n);
            return parse_plain_number(n);
        }
    };
    Some(v)
}

/// A finite positive number within the accepted range.
fn parse_plain_number(s: &str) -> Option<f32> {
    let s = s.trim();
    // Rust's float parser also accepts "inf", "NaN", "1e3"; OSM values are
    // plain decimals, so allow digits and one decimal point only.
    if s.is_empty() || !s.bytes().all(|b| b.is_ascii_digit() || b == b'.') {
        return None;
    }
    let v: f32 = s.parse().ok()?;
    (v > 0.0 && v <= MAXSPEED_MAX_KMH).then_some(v)
}

/// Parses one `maxspeed` value (no `;` lists) to km/h.
fn parse_single_maxspeed(value: &str) -> Option<f32> {
    let v = value.trim();
    match v {
        // Key:maxspeed: "none" = no limit; "walk" = walking pace;
        // "signals" / "variable" = set by signs that change, so no fixed
        // value (the caller falls back to the class default).
        "none" => return Some(MAXSPEED_NONE_KMH),
        "walk" => return Some(MAXSPEED_WALK_KMH),
        "signals" | "variable" => return None,
        _ => {}
    }
    // Key:maxspeed: values are km/h unless a unit follows: "mph" or
    // "knots", with or without a space ("30 mph", "30mph").
    let split = v
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(v.len());
    let (num, unit) = v.split_at(split);
    if num.is_empty() {
        // Implicit zone codes: "DE:urban", "FI:zone30", "DE:zone:30".
        let (country, category) = v.split_once(':')?;
        let country_ok = (2..=6).contains(&country.len())
            && country
                .bytes()
                .all(|b| b.is_ascii_alphabetic() || b == b'-');
        return if country_ok {
            zone_speed_kmh(country, category)
        } else {
            None
        };
    }
    let n = parse_plain_number(num)?;
    let kmh = match unit.trim() {
        "" => n,
        "mph" => n * KMH_PER_MPH,
        "knots" => n * KMH_PER_KNOT,
        // Not valid by the wiki (km/h is the default unit and is written
        // bare) but seen in data and unambiguous.
        "km/h" | "kmh" | "kph" => n,
        _ => return None,
    };
    (kmh <= MAXSPEED_MAX_KMH).then_some(kmh)
}

/// Parses a `maxspeed` value to km/h; `None` means "use the class default".
///
/// Source: OpenStreetMap wiki, Key:maxspeed. Handles plain numbers ("50",
/// "50.5"), units ("30 mph", "30mph", "10 knots"), "none" (→
/// [`MAXSPEED_NONE_KMH`], a choice), "walk" (→ [`MAXSPEED_WALK_KMH`]), the
/// implicit zone codes `XX:urban`, `XX:rural`, `XX:trunk`, `XX:motorway`,
/// `XX:living_street`, `XX:zone30` / `XX:zone:30` (see the table in
/// `zone_speed_kmh`), and "signals" / "variable" (→ `None`).
///
/// Several values separated by `;` ("50;30", used where the limit depends on
/// lane, time or vehicle) → the lowest value that parses: a free-flow ETA
/// should not assume the higher limit applies. Garbage, zero and negative
/// values → `None`.
pub fn parse_maxspeed(value: &str) -> Option<f32> {
    value
        .split(';')
        .filter_map(parse_single_maxspeed)
        .fold(None, |acc: Option<f32>, v| {
            Some(acc.map_or(v, |a| a.min(v)))
        })
}

/// The verdict on one way for car routing.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CarWay {
    pub class: RoadClass,
    pub direction: Direction,
    /// Speed in km/h along the way's node order (`maxspeed:forward`, else
    /// `maxspeed`, else the class default).
    pub speed_forward_kmh: f32,
    /// Speed in km/h against the node order (`maxspeed:backward`, else
    /// `maxspeed`, else the class default).
    pub speed_backward_kmh: f32,
}

/// Combines the rules: `Some` for a way cars may drive, with its class,
/// direction and speeds.
///
/// `maxspeed:forward` / `maxspeed:backward` (Key:maxspeed, "direction
/// dependent limits") refer to the way's node order, so a one-way way with
/// `oneway=-1` uses the backward value.
pub fn car_way(tags: &TagView<'_>) -> Option<CarWay> {
    let class = road_class(tags.highway?)?;
    if !is_accessible(tags) {
        return None;
    }
    let direction = direction(tags);
    let default = default_speed_kmh(class);
    let base = tags.maxspeed.and_then(parse_maxspeed);
    let pick = |specific: Option<&str>| {
        specific
            .and_then(parse_maxspeed)
            .or(base)
            .unwrap_or(default)
    };
    Some(CarWay {
        class,
        direction,
        speed_forward_kmh: pick(tags.maxspeed_forward),
        speed_backward_kmh: pick(tags.maxspeed_backward),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn view<'a>(pairs: &'a [(&'a str, &'a str)]) -> TagView<'a> {
        TagView::from_pairs(pairs.iter().copied())
    }

    fn close(a: Option<f32>, b: f32) -> bool {
        a.is_some_and(|a| (a - b).abs() < 1e-3)
    }

    // Key:highway: the road and link classes are drivable.
    #[test]
    fn road_classes_of_the_wiki_tables() {
        assert_eq!(road_class("motorway"), Some(RoadClass::Motorway));
        assert_eq!(road_class("motorway_link"), Some(RoadClass::MotorwayLink));
        assert_eq!(road_class("trunk_link"), Some(RoadClass::TrunkLink));
        assert_eq!(road_class("primary"), Some(RoadClass::Primary));
        assert_eq!(road_class("secondary_link"), Some(RoadClass::SecondaryLink));
        assert_eq!(road_class("tertiary"), Some(RoadClass::Tertiary));
        assert_eq!(road_class("unclassified"), Some(RoadClass::Unclassified));
        assert_eq!(road_class("residential"), Some(RoadClass::Residential));
        assert_eq!(road_class("living_street"), Some(RoadClass::LivingStreet));
        assert_eq!(road_class("service"), Some(RoadClass::Service));
    }

    // Key:highway: paths, lifecycle and special-purpose values are not roads
    // for cars; track is excluded by choice (see road_class).
    #[test]
    fn non_drivable_highways_are_none() {
        for v in [
            "footway",
            "cycleway",
            "path",
            "steps",
            "track",
            "pedestrian",
            "bridleway",
            "construction",
            "proposed",
            "bus_guideway",
            "busway",
            "raceway",
            "road",
            "platform",
            "",
            "Residential",
        ] {
            assert_eq!(road_class(v), None, "{v}");
        }
    }

    #[test]
    fn default_speeds_are_positive_and_links_slower() {
        use RoadClass::*;
        for (road, link) in [
            (Motorway, MotorwayLink),
            (Trunk, TrunkLink),
            (Primary, PrimaryLink),
            (Secondary, SecondaryLink),
            (Tertiary, TertiaryLink),
        ] {
            assert!(default_speed_kmh(link) < default_speed_kmh(road));
        }
        assert_eq!(default_speed_kmh(Motorway), 110.0);
        assert_eq!(default_speed_kmh(Residential), 30.0);
        assert_eq!(default_speed_kmh(Unknown), 40.0);
        for c in [Unclassified, LivingStreet, Service, Unknown] {
            assert!(default_speed_kmh(c) > 0.0);
        }
    }

    // Key:oneway: explicit values.
    #[test]
    fn oneway_values() {
        for v in ["yes", "true", "1"] {
            assert_eq!(
                direction(&view(&[("highway", "residential"), ("oneway", v)])),
                Direction::Forward,
                "{v}"
            );
        }
        for v in ["-1", "reverse"] {
            assert_eq!(
                direction(&view(&[("highway", "residential"), ("oneway", v)])),
                Direction::Backward,
                "{v}"
            );
        }
        for v in ["no", "false", "0"] {
            assert_eq!(
                direction(&view(&[("highway", "residential"), ("oneway", v)])),
                Direction::Both,
                "{v}"
            );
        }
        assert_eq!(
            direction(&view(&[("highway", "residential")])),
            Direction::Both
        );
    }

    // Key:oneway "implied oneway" and Key:junction: motorways and
    // roundabouts are one-way unless oneway=no says otherwise.
    #[test]
    fn implied_oneway() {
        assert_eq!(
            direction(&view(&[("highway", "motorway")])),
            Direction::Forward
        );
        assert_eq!(
            direction(&view(&[("highway", "motorway_link")])),
            Direction::Forward
        );
        assert_eq!(
            direction(&view(&[("highway", "primary"), ("junction", "roundabout")])),
            Direction::Forward
        );
        assert_eq!(
            direction(&view(&[("highway", "tertiary"), ("junction", "circular")])),
            Direction::Forward
        );
        assert_eq!(
            direction(&view(&[
                ("highway", "primary"),
                ("junction", "roundabout"),
                ("oneway", "no")
            ])),
            Direction::Both
        );
        assert_eq!(
            direction(&view(&[("highway", "motorway"), ("oneway", "no")])),
            Direction::Both
        );
        assert_eq!(
            direction(&view(&[("highway", "motorway_link"), ("oneway", "-1")])),
            Direction::Backward
        );
        // junction=yes (a plain junction area) implies nothing.
        assert_eq!(
            direction(&view(&[("highway", "primary"), ("junction", "yes")])),
            Direction::Both
        );
    }

    #[test]
    fn unusual_oneway_values() {
        // alternating: both directions, in turns → Both.
        assert_eq!(
            direction(&view(&[("highway", "service"), ("oneway", "alternating")])),
            Direction::Both
        );
        // reversible: Both here, but excluded by is_accessible.
        let rev = [("highway", "primary"), ("oneway", "reversible")];
        assert_eq!(direction(&view(&rev)), Direction::Both);
        assert!(!is_accessible(&view(&rev)));
        assert!(car_way(&view(&rev)).is_none());
        // Unknown text behaves as if absent: implied default applies.
        assert_eq!(
            direction(&view(&[("highway", "residential"), ("oneway", "unknown")])),
            Direction::Both
        );
        assert_eq!(
            direction(&view(&[("highway", "motorway"), ("oneway", "yes;no")])),
            Direction::Forward
        );
    }

    // Key:access: the most specific transport-mode key wins.
    #[test]
    fn access_hierarchy() {
        assert!(is_accessible(&view(&[("highway", "residential")])));
        assert!(!is_accessible(&view(&[("access", "no")])));
        assert!(!is_accessible(&view(&[("access", "private")])));
        assert!(is_accessible(&view(&[
            ("access", "no"),
            ("motor_vehicle", "yes")
        ])));
        assert!(is_accessible(&view(&[
            ("access", "private"),
            ("motorcar", "yes")
        ])));
        assert!(!is_accessible(&view(&[
            ("motor_vehicle", "yes"),
            ("motorcar", "no")
        ])));
        assert!(!is_accessible(&view(&[
            ("access", "yes"),
            ("motor_vehicle", "no")
        ])));
        assert!(!is_accessible(&view(&[
            ("access", "yes"),
            ("motor_vehicle", "private")
        ])));
        assert!(!is_accessible(&view(&[("vehicle", "no")])));
        assert!(is_accessible(&view(&[
            ("vehicle", "no"),
            ("motor_vehicle", "destination")
        ])));
        for v in [
            "yes",
            "destination",
            "permissive",
            "designated",
            "customers",
        ] {
            assert!(is_accessible(&view(&[("access", v)])), "{v}");
        }
        for v in ["agricultural", "forestry", "emergency", "delivery"] {
            assert!(!is_accessible(&view(&[("motor_vehicle", v)])), "{v}");
        }
        // An unknown value defers to the less specific key.
        assert!(!is_accessible(&view(&[
            ("access", "no"),
            ("motorcar", "sometimes")
        ])));
        assert!(is_accessible(&view(&[("motorcar", "sometimes")])));
        // Key:area: a highway area is not a road line.
        assert!(!is_accessible(&view(&[
            ("highway", "service"),
            ("area", "yes")
        ])));
    }

    // Key:maxspeed: numbers and units.
    #[test]
    fn maxspeed_numbers_and_units() {
        assert!(close(parse_maxspeed("50"), 50.0));
        assert!(close(parse_maxspeed("50.5"), 50.5));
        assert!(close(parse_maxspeed(" 30 "), 30.0));
        // 1 mph = 1.609344 km/h exactly (international mile).
        assert!(close(parse_maxspeed("30 mph"), 48.28032));
        assert!(close(parse_maxspeed("30mph"), 48.28032));
        // 1 knot = 1.852 km/h exactly.
        assert!(close(parse_maxspeed("10 knots"), 18.52));
        assert!(close(parse_maxspeed("50 km/h"), 50.0));
    }

    #[test]
    fn maxspeed_words() {
        assert!(close(parse_maxspeed("none"), MAXSPEED_NONE_KMH));
        assert!(close(parse_maxspeed("walk"), MAXSPEED_WALK_KMH));
        assert_eq!(parse_maxspeed("signals"), None);
        assert_eq!(parse_maxspeed("variable"), None);
    }

    // Key:maxspeed "Implicit maxspeed values": country:category codes.
    #[test]
    fn maxspeed_zone_codes() {
        assert!(close(parse_maxspeed("DE:urban"), 50.0));
        assert!(close(parse_maxspeed("FI:rural"), 90.0));
        assert!(close(parse_maxspeed("FR:motorway"), 120.0));
        assert!(close(parse_maxspeed("DE:trunk"), 100.0));
        assert!(close(parse_maxspeed("DE:living_street"), 10.0));
        assert!(close(parse_maxspeed("DE:zone30"), 30.0));
        assert!(close(parse_maxspeed("DE:zone:30"), 30.0));
        assert!(close(parse_maxspeed("DE:zone:20"), 20.0));
        assert!(close(parse_maxspeed("GB:nsl_single"), 60.0 * 1.609344));
        assert!(close(parse_maxspeed("GB:nsl_dual"), 70.0 * 1.609344));
        assert_eq!(parse_maxspeed("DE:zone"), None);
        assert_eq!(parse_maxspeed("DE:nonsense"), None);
        assert_eq!(parse_maxspeed(":urban"), None);
    }

    #[test]
    fn maxspeed_lists_take_the_lowest() {
        assert!(close(parse_maxspeed("50;30"), 30.0));
        assert!(close(parse_maxspeed("30;50"), 30.0));
        assert!(close(parse_maxspeed("60;signals"), 60.0));
        assert!(close(parse_maxspeed("20 mph;50"), 20.0 * 1.609344));
        assert_eq!(parse_maxspeed("signals;variable"), None);
    }

    #[test]
    fn maxspeed_garbage_is_none() {
        for v in [
            "",
            "fast",
            "0",
            "-30",
            "0.0",
            "50 furlongs",
            "inf",
            "NaN",
            "1e2",
            "5000",
            "50..0",
            "mph",
            "30 mph mph",
        ] {
            assert_eq!(parse_maxspeed(v), None, "{v:?}");
        }
    }

    #[test]
    fn car_way_combines_the_rules() {
        let w = car_way(&view(&[("highway", "residential"), ("maxspeed", "40")])).unwrap();
        assert_eq!(w.class, RoadClass::Residential);
        assert_eq!(w.direction, Direction::Both);
        assert_eq!((w.speed_forward_kmh, w.speed_backward_kmh), (40.0, 40.0));

        let w = car_way(&view(&[("highway", "primary"), ("maxspeed", "signals")])).unwrap();
        assert_eq!(w.speed_forward_kmh, default_speed_kmh(RoadClass::Primary));

        let w = car_way(&view(&[
            ("highway", "secondary"),
            ("maxspeed", "50"),
            ("maxspeed:backward", "30"),
        ]))
        .unwrap();
        assert_eq!((w.speed_forward_kmh, w.speed_backward_kmh), (50.0, 30.0));

        let w = car_way(&view(&[
            ("highway", "tertiary"),
            ("maxspeed:forward", "70"),
        ]))
        .unwrap();
        assert_eq!((w.speed_forward_kmh, w.speed_backward_kmh), (70.0, 45.0));

        assert!(car_way(&view(&[("highway", "footway")])).is_none());
        assert!(car_way(&view(&[("highway", "residential"), ("access", "private")])).is_none());
        assert!(car_way(&view(&[("building", "yes")])).is_none());
    }

    #[test]
    fn tag_view_reads_only_known_keys() {
        let t = view(&[
            ("highway", "service"),
            ("name", "x"),
            ("maxspeed:forward", "20"),
        ]);
        assert_eq!(t.get("highway"), Some("service"));
        assert_eq!(t.get("maxspeed:forward"), Some("20"));
        assert_eq!(t.get("name"), None);
    }
}
