//! The settings the serving layer reads: the `[query]`, `[live]`,
//! `[tables]` and `[fallback]` sections and each `[[region]]` of the
//! configuration file, as plain `serde` types with their defaults.
//!
//! The file itself (TOML, paths, environment overrides, validation) is
//! [`crate::config`]'s job; this module knows no file format and no
//! HTTP setting.

use hodos_engine::geo::LatLon;
use serde::Deserialize;
use std::path::PathBuf;

/// Everything the serving layer takes from configuration, in one value.
#[derive(Debug, Clone, Default)]
pub struct ServingSettings {
    pub query: QueryConfig,
    pub live: LiveConfig,
    pub tables: TableConfig,
    pub fallback: FallbackConfig,
    /// CPU priority of the background update threads.
    pub customize_priority: CustomizePriority,
}

/// CPU priority of background customization (see
/// `server.customize_priority`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum CustomizePriority {
    /// Linux `SCHED_IDLE`: runs when a core would otherwise idle.
    #[default]
    Idle,
    /// Nice 19: a small share of a busy machine, never starved.
    Low,
    /// The same priority as request workers.
    Normal,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct QueryConfig {
    /// Budget for one request's graph work when the request names none.
    pub default_budget_ms: u64,
    /// Cap on a request's `budget_ms`.
    pub max_budget_ms: u64,
    /// Farthest a coordinate may be from a road and still be snapped.
    pub max_snap_m: f64,
    /// Most cells (`from × to`) one matrix request may ask for.
    pub max_matrix_cells: usize,
    /// Requests doing graph work at once; beyond, a request waits for a
    /// permit only as long as its graph answer can still come within its
    /// budget, else it is answered from the heuristic tier with reason
    /// `overloaded`.
    pub graph_concurrency: usize,
    /// Hard cap on answer requests (ETA, matrix, route) in flight at once,
    /// counted from the moment their body is read: a bound on memory, not a
    /// load signal (admission is by deadline, see
    /// [`crate::admission`]). Beyond it a request is still parsed
    /// and validated, then answered at once from the heuristic tier with
    /// reason `overloaded`.
    pub max_in_flight: usize,
    /// Accepted for old configuration files and ignored: the scheduling
    /// lag now counts against each request's own budget instead of a fixed
    /// bound (see [`crate::admission`]).
    pub max_queue_ms: u64,
    /// Accepted for old configuration files and ignored: admission no
    /// longer reads the CPU wait of the request threads (it also rose when
    /// other processes kept the machine busy, and shed healthy load).
    pub max_cpu_wait: f64,
    /// Accepted for old configuration files and ignored: every profile of
    /// the serving table is kept customized (see `profiles`).
    pub bucket_cache: usize,
    /// Representative hour-of-week profiles the historical table is grouped
    /// into (1..=168); one customized metric each, all kept in memory, so
    /// every departure hour has a graph answer at once.
    pub profiles: usize,
}

impl Default for QueryConfig {
    fn default() -> Self {
        Self {
            default_budget_ms: 100,
            max_budget_ms: 2000,
            max_snap_m: 500.0,
            max_matrix_cells: 250_000,
            graph_concurrency: 8,
            max_in_flight: 4096,
            max_queue_ms: 0,
            max_cpu_wait: 0.0,
            bucket_cache: 2,
            profiles: 4,
        }
    }
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct LiveConfig {
    /// Age at which a live reading counts half against the historical one.
    pub half_life_s: f64,
    /// Age after which a live reading is ignored.
    pub ttl_s: f64,
    /// Shortest interval between two live re-customizations.
    pub recustomize_ms: u64,
    /// Largest accepted clock skew for `observed_at` in the future.
    pub max_future_skew_s: f64,
    /// Seconds between scans of the regions' watched directories.
    pub watch_interval_s: f64,
}

impl Default for LiveConfig {
    fn default() -> Self {
        Self {
            half_life_s: 300.0,
            ttl_s: 900.0,
            recustomize_ms: 250,
            max_future_skew_s: 60.0,
            watch_interval_s: 1.0,
        }
    }
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct TableConfig {
    /// Rows faster than this are rejected as implausible.
    pub max_speed_kmh: f64,
    /// A table whose share of bad rows exceeds this is rejected whole.
    pub max_bad_share: f64,
}

impl Default for TableConfig {
    fn default() -> Self {
        Self {
            max_speed_kmh: 200.0,
            max_bad_share: 0.05,
        }
    }
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct FallbackConfig {
    /// Circuity used outside every region (network ÷ great-circle
    /// distance). 1.3: urban practice is 1.2–1.4 and Ballou, Rahardja &
    /// Sakai (2002) give about 1.2 for the US (from memory).
    pub circuity: f64,
    /// Speed used outside every region, km/h: a mixed urban average (common
    /// practice, from memory).
    pub speed_kmh: f64,
}

impl Default for FallbackConfig {
    fn default() -> Self {
        Self {
            circuity: 1.3,
            speed_kmh: 30.0,
        }
    }
}

/// One region served.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RegionConfig {
    pub name: String,
    /// Artifact written by `hodos build`.
    pub artifact: PathBuf,
    /// IANA time zone for hour-of-week buckets, e.g. "Europe/Berlin".
    #[serde(default = "utc")]
    pub time_zone: String,
    /// Where requests must fall to be served by this region.
    pub coverage: Coverage,
    /// Historical profile CSV loaded at start and on reload (optional).
    #[serde(default)]
    pub historical: Option<PathBuf>,
    /// Directory watched for live-observation CSV files (optional).
    #[serde(default)]
    pub live_dir: Option<PathBuf>,
    /// Correction model written by `hodos train` (optional): loaded at
    /// start unless an uploaded model is saved in `state_dir`.
    #[serde(default)]
    pub model: Option<PathBuf>,
    /// Where accepted tables and the live write-ahead log are kept across
    /// restarts. Required: without it an acknowledged upload could not
    /// survive a restart.
    pub state_dir: PathBuf,
}

fn utc() -> String {
    "UTC".into()
}

/// A region's coverage: a bounding box or a polygon (lat/lon degrees).
#[derive(Debug, Clone, Deserialize, PartialEq)]
#[serde(deny_unknown_fields, rename_all = "snake_case")]
pub enum Coverage {
    /// `[min_lat, min_lon, max_lat, max_lon]`.
    Bbox([f64; 4]),
    /// Ring of `[lat, lon]` vertices (closed implicitly).
    Polygon(Vec<[f64; 2]>),
}

impl Coverage {
    pub fn contains(&self, p: LatLon) -> bool {
        match self {
            Coverage::Bbox([a, b, c, d]) => {
                p.lat >= *a && p.lat <= *c && p.lon >= *b && p.lon <= *d
            }
            Coverage::Polygon(ring) => {
                // Even-odd ray casting.
                let mut inside = false;
                let n = ring.len();
                for i in 0..n {
                    let (yi, xi) = (ring[i][0], ring[i][1]);
                    let (yj, xj) = (ring[(i + n - 1) % n][0], ring[(i + n - 1) % n][1]);
                    if (yi > p.lat) != (yj > p.lat)
                        && p.lon < (xj - xi) * (p.lat - yi) / (yj - yi) + xi
                    {
                        inside = !inside;
                    }
                }
                inside
            }
        }
    }
}
