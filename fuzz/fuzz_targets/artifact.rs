//! Artifact files: header, checksum and payload decoding.
#![no_main]
use hodos::engine::artifact::Artifact;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let _ = Artifact::from_bytes(std::path::Path::new("fuzz.hodos"), data);
});
