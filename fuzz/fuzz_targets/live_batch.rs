//! Live observation batches: the first byte picks JSON or CSV.
#![no_main]
use hodos::engine::import::synthetic;
use hodos::serving::speeds::{EdgeIndex, LiveLayer, ValidationConfig};
use libfuzzer_sys::fuzz_target;
use std::sync::OnceLock;

fn index() -> &'static EdgeIndex {
    static INDEX: OnceLock<EdgeIndex> = OnceLock::new();
    INDEX.get_or_init(|| EdgeIndex::new(&synthetic::generate(2_000, 1)))
}

fuzz_target!(|data: &[u8]| {
    let Some((&kind, body)) = data.split_first() else {
        return;
    };
    let idx = index();
    let mut layer = LiveLayer::new(idx.num_edges());
    let now = chrono::DateTime::from_timestamp(1_796_000_000, 0).unwrap();
    let cfg = ValidationConfig::default();
    let _ = if kind & 1 == 0 {
        layer.apply_json(idx, body, now, &cfg)
    } else {
        layer.apply_csv(idx, body, now, &cfg)
    };
});
