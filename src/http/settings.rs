//! The settings the HTTP layer reads: the `[server]` and `[admin]`
//! sections of the configuration file, and [`Settings`], everything
//! [`super::AppState::open`] needs.

use hodos_serving::settings::{CustomizePriority, RegionConfig, ServingSettings};
use serde::Deserialize;
use std::net::SocketAddr;

/// Everything the service needs to open: its own sections, the serving
/// layer's, and the regions. The configuration file (`hodos::config::Config`) converts into it.
#[derive(Debug, Clone, Default)]
pub struct Settings {
    pub server: ServerConfig,
    pub admin: AdminConfig,
    pub serving: ServingSettings,
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
    /// When `/readyz` answers 200 (else 503, so a readiness probe takes the
    /// instance out of rotation): every region serving normally, or at
    /// least one.
    pub ready_when: ReadyWhen,
    /// Milliseconds a client has to send a request's complete headers,
    /// counted from its first byte. A client that trickles headers would
    /// otherwise hold a connection (and a file descriptor) forever.
    /// Applies to both listeners.
    pub header_timeout_ms: u64,
    /// Milliseconds a public request's body has to arrive completely,
    /// counted from its headers; a late body gets 408 and the connection
    /// is closed. (The admin listener has `admin.body_timeout_ms`: uploads
    /// are large.)
    pub body_timeout_ms: u64,
    /// Milliseconds a connection may sit with no request in progress and
    /// nothing sent before it is closed (keep-alive idle, or opened and
    /// never used). Applies to both listeners.
    pub idle_timeout_ms: u64,
    /// Most connections the public listener holds at once; beyond it new
    /// connections wait in the kernel's accept backlog. 0: derived from the
    /// file-descriptor limit (soft limit, less 128 for files and the admin
    /// listener's share), so the service never runs out of descriptors
    /// for its own files.
    pub max_connections: usize,
    /// Compress public responses (gzip or brotli) when the client's
    /// `Accept-Encoding` allows: a large matrix is mostly repeated digits.
    pub compression: bool,
}

/// `server.ready_when`: which regions must be `serving` for `/readyz` to
/// answer 200. A region that is loading, degraded (a refused saved file or
/// table) or answering only estimates (no graph) is not serving.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum ReadyWhen {
    /// Every configured region serves: the strict choice, for a fleet
    /// where each instance is expected to answer for every region.
    #[default]
    AllRegions,
    /// At least one region serves: for instances whose regions fail
    /// independently and partial service beats none.
    AnyRegion,
}

impl ReadyWhen {
    pub fn as_str(self) -> &'static str {
        match self {
            ReadyWhen::AllRegions => "all_regions",
            ReadyWhen::AnyRegion => "any_region",
        }
    }
}

impl Default for ServerConfig {
    fn default() -> Self {
        Self {
            listen: "127.0.0.1:8080".parse().expect("literal address"),
            max_body_bytes: 256 * 1024,
            drain_seconds: 10,
            customize_priority: CustomizePriority::Idle,
            ready_when: ReadyWhen::AllRegions,
            header_timeout_ms: 10_000,
            body_timeout_ms: 30_000,
            idle_timeout_ms: 60_000,
            max_connections: 0,
            compression: true,
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
    /// Largest historical table upload, bytes.
    pub max_upload_bytes: usize,
    /// Largest live batch (JSON or CSV), bytes; over it the batch gets 413
    /// and nothing of it is applied. Batches are parsed as they arrive, so
    /// a batch costs about 30 bytes of memory per valid observation, not
    /// its size.
    pub max_live_batch_bytes: usize,
    /// Milliseconds an admin request's body (a table upload of up to
    /// `max_upload_bytes`) has to arrive completely; a late body gets 408.
    pub body_timeout_ms: u64,
    /// Most connections the admin listener holds at once; beyond it new
    /// connections wait in the accept backlog.
    pub max_connections: usize,
}

impl Default for AdminConfig {
    fn default() -> Self {
        Self {
            listen: "127.0.0.1:8081".parse().expect("literal address"),
            token: String::new(),
            max_upload_bytes: 512 * 1024 * 1024,
            max_live_batch_bytes: 128 * 1024 * 1024,
            body_timeout_ms: 300_000,
            max_connections: 64,
        }
    }
}
