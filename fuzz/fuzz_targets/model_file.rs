//! Correction model files: header, checksum, payload decoding and the
//! model's structural checks.
#![no_main]
use hodos::serving::correction::file::decode;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let _ = decode(data);
});
