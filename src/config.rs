//! Service configuration: a TOML file (see `config/hodos.toml`, every option
//! commented there) with environment overrides for secrets.
//!
//! Parsing is strict: unknown keys are errors, so a typo never silently
//! falls back to a default. [`Config::validate`] checks ranges and
//! cross-field rules and names the offending key.

use crate::engine::geo::LatLon;
use crate::http::settings::Settings;
pub use crate::http::settings::{AdminConfig, ServerConfig};
pub use crate::serving::settings::{
    Coverage, CustomizePriority, FallbackConfig, LiveConfig, QueryConfig, RegionConfig,
    ServingSettings, TableConfig,
};
use serde::Deserialize;
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

/// Why a configuration was refused.
///
/// A `cause` is written into the message and is not a `source()`: a
/// chain printer (anyhow's `{:#}`) would otherwise print it twice.
#[derive(Debug, thiserror::Error)]
pub enum ConfigError {
    #[error("{}: {cause}", path.display())]
    Io {
        path: PathBuf,
        cause: std::io::Error,
    },
    #[error("{}: {cause}", path.display())]
    Parse {
        path: PathBuf,
        cause: ConfigParseError,
    },
    #[error("{}: {key}: {msg}", path.display())]
    Invalid {
        path: PathBuf,
        key: String,
        msg: String,
    },
}

/// Why a configuration's TOML text does not parse (its syntax, an unknown
/// key, a value of the wrong type): the TOML reader's message.
///
/// The cause is written into the message and is not a `source()`.
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
pub struct ConfigParseError(toml::de::Error);

impl Config {
    /// Reads, applies environment overrides, validates. Relative paths in
    /// regions are resolved against the config file's directory.
    pub fn load(path: &Path) -> Result<Config, ConfigError> {
        let text = std::fs::read_to_string(path).map_err(|source| ConfigError::Io {
            path: path.to_path_buf(),
            cause: source,
        })?;
        let mut cfg = Config::parse(&text).map_err(|cause| ConfigError::Parse {
            path: path.to_path_buf(),
            cause,
        })?;
        let base = path.parent().unwrap_or(Path::new("."));
        for r in &mut cfg.regions {
            for p in [
                Some(&mut r.artifact),
                r.historical.as_mut(),
                r.live_dir.as_mut(),
                r.model.as_mut(),
                Some(&mut r.state_dir),
            ]
            .into_iter()
            .flatten()
            {
                // An empty path stays empty, for `validate` to refuse.
                if p.is_relative() && !p.as_os_str().is_empty() {
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
    pub fn parse(text: &str) -> Result<Config, ConfigParseError> {
        toml::from_str(text).map_err(ConfigParseError)
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
        let sv = &self.server;
        for (k, v) in [
            ("server.header_timeout_ms", sv.header_timeout_ms),
            ("server.body_timeout_ms", sv.body_timeout_ms),
            ("server.idle_timeout_ms", sv.idle_timeout_ms),
            ("admin.body_timeout_ms", self.admin.body_timeout_ms),
        ] {
            if v == 0 {
                return bad(k, "must be a positive number of milliseconds");
            }
        }
        if self.admin.max_live_batch_bytes == 0 {
            return bad("admin.max_live_batch_bytes", "must be positive");
        }
        if self.admin.max_connections == 0 {
            return bad("admin.max_connections", "must be positive");
        }
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
        if !(1..=168).contains(&q.profiles) {
            return bad("query.profiles", "must be 1 to 168 hour-of-week profiles");
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
            // Required (TOML parsing refuses a region without it); an empty
            // path would silently mean the config file's own folder.
            if r.state_dir.as_os_str().is_empty() {
                return Err((
                    key("state_dir"),
                    "required: a directory for saved tables and the live log".into(),
                ));
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

impl Config {
    /// The serving layer's part of the configuration.
    pub fn serving(&self) -> ServingSettings {
        ServingSettings {
            query: self.query.clone(),
            live: self.live.clone(),
            tables: self.tables.clone(),
            fallback: self.fallback.clone(),
            customize_priority: self.server.customize_priority,
        }
    }
}

impl From<Config> for Settings {
    fn from(cfg: Config) -> Settings {
        Settings {
            serving: cfg.serving(),
            server: cfg.server,
            admin: cfg.admin,
            regions: cfg.regions,
        }
    }
}
