//! Public request bodies: ETA/route and matrix JSON, parsed and validated
//! as the handlers do. Any input must give a value or a typed error.
#![no_main]
use hodos::http::dto::{parse_json, EtaRequest, MatrixRequest};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(r) = parse_json::<EtaRequest>(data) {
        let _ = r.validate();
    }
    if let Ok(m) = parse_json::<MatrixRequest>(data) {
        let _ = m.validate(40_000);
    }
});
