//! Service configuration: a TOML file (see `config/hodos.toml`, every option
//! commented there) with environment overrides for secrets.
//!
//! Parsing is strict: unknown keys are errors, so a typo never silently
//! falls back to a default. [`Config::validate`] checks ranges and
//! cross-field rules and names the offending key.

use crate::geo::LatLon;
use serde::Deserialize;
use std::net::SocketAddr;
use std::path::{Path, PathBuf};

/// Environment variable that overrides `admin.token`.
pub const ADMIN_TOKEN_ENV: &str = "HODOS_ADMIN_TOKEN";

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Config {
    #[serde(default)]
    pub server: ServerConfig,
    #[serde(default)]
    pub admin: AdminConfig,
    #[serde(default)]
    pub query: QueryConfig,
    #[serde(default)]
    pub live: LiveConfig,
    #[serde(default)]
    pub tables: TableConfig,
    #[serde(default)]
    pub fallback: FallbackConfig,
    #[serde(default, rename = "region")]
    pub regions: Vec<RegionConfig>,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct ServerConfig {
    /// Public API listener.
    pub listen: SocketAddr,
    /// Largest request body accepted, bytes.
    pub max_body_bytes: usize,
    /// Seconds to let in-flight requests finish on shutdown.
    pub drain_seconds: u64,
    /// CPU priority of the thread that customizes metrics (live blends,
    /// historical buckets). Customization is seconds of CPU per minute under
    /// a busy feed; below the request workers' priority it takes only the
    /// CPU they leave, so queries keep their latency during reloads.
    pub customize_priority: CustomizePriority,
}

/// CPU priority of background customization (see
/// [`ServerConfig::customize_priority`]).
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

impl Default for ServerConfig {
    fn default() -> Self {
        Self {
            listen: "127.0.0.1:8080".parse().expect("literal address"),
            max_body_bytes: 256 * 1024,
            drain_seconds: 10,
            customize_priority: CustomizePriority::Idle,
        }
    }
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct AdminConfig {
    /// Admin listener; keep it on loopback or a private interface.
    pub listen: SocketAddr,
    /// Bearer token; prefer the HODOS_ADMIN_TOKEN environment variable.
    pub token: String,
    /// Largest upload (historical table), bytes.
    pub max_upload_bytes: usize,
}

impl Default for AdminConfig {
    fn default() -> Self {
        Self {
            listen: "127.0.0.1:8081".parse().expect("literal address"),
            token: String::new(),
            max_upload_bytes: 512 * 1024 * 1024,
        }
    }
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
    /// Requests doing graph work at once; beyond, answers come from the
    /// heuristic tier with reason `overloaded`.
    pub graph_concurrency: usize,
    /// Answer requests (ETA, matrix, route) in flight at once, counted from
    /// the moment their headers are read. Beyond it a request is still
    /// parsed and validated, then answered at once from the heuristic tier
    /// with reason `overloaded`: under overload the server sheds graph work
    /// instead of queueing it, so every caller gets an answer quickly.
    pub max_in_flight: usize,
    /// Scheduling lag (how late a task that is ready to run gets a CPU)
    /// above which answer requests are shed the same way: the queueing
    /// delay a request arriving now would see. 0 disables this signal.
    pub max_queue_ms: u64,
    /// Share of time the request threads may spend waiting for a CPU
    /// (per worker, over the last 100 ms) before answer requests are shed
    /// the same way: the signal for a machine whose cores are all busy
    /// while the backlog sits in the callers' connection pools. Linux
    /// only; 0 disables this signal.
    pub max_cpu_wait: f64,
    /// Historical bucket metrics kept customized (besides the warm ones).
    pub bucket_cache: usize,
}

impl Default for QueryConfig {
    fn default() -> Self {
        Self {
            default_budget_ms: 100,
            max_budget_ms: 2000,
            max_snap_m: 500.0,
            max_matrix_cells: 250_000,
            graph_concurrency: 8,
            max_in_flight: 32,
            max_queue_ms: 5,
            max_cpu_wait: 0.4,
            bucket_cache: 2,
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
    /// Where accepted tables are kept across restarts.
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

/// Why a configuration was refused.
#[derive(Debug, thiserror::Error)]
pub enum ConfigError {
    #[error("{}: {source}", path.display())]
    Io {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error("{}: {msg}", path.display())]
    Parse { path: PathBuf, msg: String },
    #[error("{}: {key}: {msg}", path.display())]
    Invalid {
        path: PathBuf,
        key: String,
        msg: String,
    },
}

impl Config {
    /// Reads, applies environment overrides, validates. Relative paths in
    /// regions are resolved against the config file's directory.
    pub fn load(path: &Path) -> Result<Config, ConfigError> {
        let text = std::fs::read_to_string(path).map_err(|source| ConfigError::Io {
            path: path.to_path_buf(),
            source,
        })?;
        let mut cfg = Config::parse(&text).map_err(|msg| ConfigError::Parse {
            path: path.to_path_buf(),
            msg,
        })?;
        let base = path.parent().unwrap_or(Path::new("."));
        for r in &mut cfg.regions {
            for p in [
                Some(&mut r.artifact),
                r.historical.as_mut(),
                r.live_dir.as_mut(),
                Some(&mut r.state_dir),
            ]
            .into_iter()
            .flatten()
            {
                if p.is_relative() {
                    *p = base.join(&*p);
                }
            }
        }
        cfg.apply_env();
        cfg.validate().map_err(|(key, msg)| ConfigError::Invalid {
            path: path.to_path_buf(),
            key,
            msg,
        })?;
        Ok(cfg)
    }

    /// Parses TOML text (no env overrides, no validation).
    pub fn parse(text: &str) -> Result<Config, String> {
        toml::from_str(text).map_err(|e| e.to_string())
    }

    /// Environment overrides for secrets.
    pub fn apply_env(&mut self) {
        if let Ok(t) = std::env::var(ADMIN_TOKEN_ENV) {
            if !t.is_empty() {
                self.admin.token = t;
            }
        }
    }

    /// Range and consistency checks; the error names the key.
    pub fn validate(&self) -> Result<(), (String, String)> {
        let bad = |k: &str, m: &str| Err((k.to_string(), m.to_string()));
        let q = &self.query;
        if q.max_budget_ms == 0 || q.default_budget_ms == 0 {
            return bad("query.default_budget_ms", "budgets must be positive");
        }
        if q.default_budget_ms > q.max_budget_ms {
            return bad(
                "query.default_budget_ms",
                "must not exceed query.max_budget_ms",
            );
        }
        if !(q.max_snap_m.is_finite() && q.max_snap_m > 0.0) {
            return bad("query.max_snap_m", "must be a positive number of metres");
        }
        if q.max_matrix_cells == 0 {
            return bad("query.max_matrix_cells", "must be positive");
        }
        if !(q.max_cpu_wait.is_finite() && q.max_cpu_wait >= 0.0) {
            return bad(
                "query.max_cpu_wait",
                "must be a share of time, 0 or more (0 disables)",
            );
        }
        let l = &self.live;
        if !(l.half_life_s > 0.0
            && l.ttl_s > 0.0
            && l.half_life_s.is_finite()
            && l.ttl_s.is_finite())
        {
            return bad(
                "live.half_life_s",
                "half-life and TTL must be positive seconds",
            );
        }
        if l.recustomize_ms == 0 {
            return bad("live.recustomize_ms", "must be positive");
        }
        if !(l.watch_interval_s.is_finite() && l.watch_interval_s > 0.0) {
            return bad("live.watch_interval_s", "must be positive");
        }
        let t = &self.tables;
        if !(t.max_speed_kmh.is_finite() && t.max_speed_kmh > 0.0) {
            return bad("tables.max_speed_kmh", "must be positive");
        }
        if !(0.0..=1.0).contains(&t.max_bad_share) {
            return bad("tables.max_bad_share", "must be within 0..1");
        }
        let f = &self.fallback;
        if !(f.circuity >= 1.0 && f.circuity.is_finite()) {
            return bad("fallback.circuity", "must be at least 1");
        }
        if !(f.speed_kmh > 0.0 && f.speed_kmh.is_finite()) {
            return bad("fallback.speed_kmh", "must be positive");
        }
        let mut names = std::collections::HashSet::new();
        for (i, r) in self.regions.iter().enumerate() {
            let key = |k: &str| format!("region[{i}].{k}");
            if r.name.is_empty()
                || !r
                    .name
                    .chars()
                    .all(|c| c.is_ascii_alphanumeric() || c == '-' || c == '_')
            {
                return Err((key("name"), "use letters, digits, '-' and '_'".into()));
            }
            if !names.insert(r.name.clone()) {
                return Err((key("name"), format!("duplicate region name {:?}", r.name)));
            }
            if r.time_zone.parse::<chrono_tz::Tz>().is_err() {
                return Err((
                    key("time_zone"),
                    format!("unknown IANA time zone {:?}", r.time_zone),
                ));
            }
            match &r.coverage {
                Coverage::Bbox([a, b, c, d]) => {
                    if !(a < c
                        && b < d
                        && LatLon::new(*a, *b).is_valid()
                        && LatLon::new(*c, *d).is_valid())
                    {
                        return Err((
                            key("coverage.bbox"),
                            "expected [min_lat, min_lon, max_lat, max_lon]".into(),
                        ));
                    }
                }
                Coverage::Polygon(ring) => {
                    if ring.len() < 3 || ring.iter().any(|p| !LatLon::new(p[0], p[1]).is_valid()) {
                        return Err((
                            key("coverage.polygon"),
                            "needs at least 3 valid [lat, lon] vertices".into(),
                        ));
                    }
                }
            }
        }
        Ok(())
    }
}
