//! Historical speed tables (CSV) against a small synthetic city's segments.
#![no_main]
use hodos::engine::import::synthetic;
use hodos::serving::speeds::{EdgeIndex, HistoricalProfile, ValidationConfig};
use libfuzzer_sys::fuzz_target;
use std::sync::OnceLock;

fn index() -> &'static EdgeIndex {
    static INDEX: OnceLock<EdgeIndex> = OnceLock::new();
    INDEX.get_or_init(|| EdgeIndex::new(&synthetic::generate(2_000, 1)))
}

fuzz_target!(|data: &[u8]| {
    let _ = HistoricalProfile::parse(data, index(), &ValidationConfig::default());
});
