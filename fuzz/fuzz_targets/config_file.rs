//! The TOML configuration file: parsing and validation.
#![no_main]
use hodos::config::Config;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(s) = std::str::from_utf8(data) {
        if let Ok(c) = Config::parse(s) {
            let _ = c.validate();
        }
    }
});
