//! `GET /v1/eta` query strings.
#![no_main]
use hodos::http::dto::parse_eta_query;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(s) = std::str::from_utf8(data) {
        let _ = parse_eta_query(Some(s));
    }
});
