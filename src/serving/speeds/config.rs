//! Validation limits shared by the historical and the live table.

use serde::{Deserialize, Serialize};

/// Limits applied to every uploaded row. `Default` gives the documented
/// defaults; the service may read its own values from its configuration file
/// (unknown keys are refused so a typo does not silently keep a default).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct ValidationConfig {
    /// Largest plausible speed in km/h (default 200). Faster values are
    /// almost always unit mistakes (m/s vs km/h, mph) or sensor glitches, and
    /// one absurd speed would make an edge a shortcut for every route.
    pub max_speed_kmh: f64,
    /// Largest accepted share of bad rows, `bad / data rows` (default 0.05).
    /// Above it the table is rejected whole: a table with many broken rows is
    /// more likely a wrong file than a few glitches, and applying its
    /// remainder would mix two versions of the truth.
    pub max_bad_share: f64,
    /// How many bad rows are reported in detail (default 10); the rest are
    /// only counted, so a broken million-row file gives a short report.
    pub max_reported_errors: usize,
    /// How far in the future (seconds) a live observation may be stamped
    /// before it is refused (default 120): covers clock skew between the
    /// sender and this host without letting a wrong clock pin a speed for
    /// hours.
    pub max_future_skew_s: u64,
}

impl Default for ValidationConfig {
    fn default() -> Self {
        ValidationConfig {
            max_speed_kmh: 200.0,
            max_bad_share: 0.05,
            max_reported_errors: 10,
            max_future_skew_s: 120,
        }
    }
}
