//! Headless Chromium (Debian's package) for tests that look at a page.

use std::path::Path;
use std::process::{Command, Output};

pub const CHROMIUM: &str = "/usr/bin/chromium";

/// Whether Chromium is here; without it prints SKIPPED and returns false,
/// unless `HODOS_REQUIRE_CHROMIUM=1` (set by `.ci/run`), which fails.
pub fn available() -> bool {
    if Path::new(CHROMIUM).exists() {
        return true;
    }
    crate::skipped_unless_required(
        "HODOS_REQUIRE_CHROMIUM",
        format!("{CHROMIUM} not installed"),
    );
    false
}

/// Runs headless Chromium with its own profile folder and `args`.
pub fn run(args: &[&str], profile: &Path) -> Output {
    Command::new(CHROMIUM)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--hide-scrollbars",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .args(args)
        .output()
        .expect("run chromium")
}
