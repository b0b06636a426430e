//! OSM tag values: `key=value` lines through every tag rule.
#![no_main]
use hodos::engine::import::osm_tags::{
    car_way, direction, is_accessible, parse_maxspeed, road_class, TagView,
};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(s) = std::str::from_utf8(data) else {
        return;
    };
    let pairs: Vec<(&str, &str)> = s
        .lines()
        .map(|l| l.split_once('=').unwrap_or((l, "")))
        .collect();
    for (_, v) in &pairs {
        let _ = road_class(v);
        let _ = parse_maxspeed(v);
    }
    let tags = TagView::from_pairs(pairs.iter().copied());
    let _ = direction(&tags);
    let _ = is_accessible(&tags);
    let _ = car_way(&tags);
});
