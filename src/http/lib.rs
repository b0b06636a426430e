#![forbid(unsafe_code)]
#![recursion_limit = "256"]
//! The HTTP service: public API and admin API (axum on tokio).
//!
//! - [`app`] builds the public router from [`routes::PUBLIC`] (`/v1/eta`,
//!   `/v1/eta/matrix`, `/v1/route`, `/healthz`, `/readyz`, `/metrics`,
//!   `/openapi.json`) so tests can drive it with `oneshot`; [`admin_app`]
//!   builds the admin router from [`routes::ADMIN`] for its own listener.
//! - [`serve`] runs both listeners until the `shutdown` future resolves,
//!   then drains in-flight requests. It starts no background task of the
//!   service: [`hodos_serving::service::Service::start`] does, and the
//!   caller runs both.
//!
//! **Architecture Invariant:** handlers parse into [`dto`] types, call
//! [`hodos_serving::answer`] / [`hodos_serving::snapshot`], and convert the results back to
//! DTOs; engine and serving types never reach the wire.
//!
//! # Layout
//!
//! - [`routes`]: the route table (routers, metric labels, OpenAPI paths);
//!   `table`: its types and the answer templates.
//! - [`handlers`]: public handlers; [`admin`]: admin handlers and token.
//! - [`dto`]: request and response shapes, conversions from serving types.
//! - [`openapi`]: the OpenAPI document; [`problem`]: RFC 9457 errors.
//! - [`exporter`]: the Prometheus recorder; [`settings`]: `[server]`/`[admin]`.
//! - [`listener`]: the accept loop and per-connection limits (header and
//!   idle timeouts, connection cap); [`body_deadline`]: the body timeout.
//! - [`upload`]: an admin upload's body as a blocking reader for the parser
//!   thread, under a byte limit.

pub mod admin;
pub mod body_deadline;
pub mod dashboard;
pub mod dto;
pub mod exporter;
pub mod handlers;
pub mod listener;
pub mod openapi;
pub mod problem;
pub mod routes;
pub mod settings;
mod table;
pub mod trips;
pub mod upload;

use axum::extract::{MatchedPath, Request};
use axum::middleware::Next;
use axum::response::Response;
use axum::Router;
use hodos_serving::answer::Catalog;
use hodos_serving::service::Service;
use metrics_exporter_prometheus::PrometheusHandle;
use std::future::Future;
use std::net::SocketAddr;
use std::sync::Arc;
use std::time::Instant;

/// Shared state: a cheap `Clone` handle of `Arc`s.
#[derive(Clone)]
pub struct AppState {
    /// What the answer routes read (the regions' read sides).
    pub catalog: Arc<Catalog>,
    /// The service: the regions' updaters, for the admin routes.
    pub service: Arc<Service>,
    /// The `[server]` and `[admin]` sections (body limits, drain, token).
    pub settings: Arc<settings::Settings>,
    pub prometheus: PrometheusHandle,
    /// Both OpenAPI documents, made once from the route table.
    pub docs: Arc<openapi::Documents>,
}

impl AppState {
    /// Opens every configured region (degraded ones included).
    pub async fn open(settings: impl Into<settings::Settings>) -> AppState {
        let state = Self::unloaded(settings);
        state.service.load_regions().await;
        state
    }

    /// The state with every region created but not loaded (see
    /// [`Service::new`]); load them with [`Service::load_regions`].
    pub fn unloaded(settings: impl Into<settings::Settings>) -> AppState {
        let settings: settings::Settings = settings.into();
        // The recorder first: loading a region already records series.
        let prometheus = exporter::handle();
        let service = Arc::new(Service::new(settings.serving.clone(), &settings.regions));
        let names: Vec<String> = service.regions.iter().map(|r| r.name.clone()).collect();
        hodos_serving::metrics::register_zero(&routes::answer_paths(), &names);
        AppState {
            catalog: service.catalog.clone(),
            service,
            settings: Arc::new(settings),
            prometheus,
            docs: Arc::new(openapi::Documents::new(routes::PUBLIC, routes::ADMIN)),
        }
    }
}

/// Labels an answer handler leaves on its response for the latency
/// histogram: the answering tier and region (closed sets).
#[derive(Debug, Clone)]
pub struct AnswerLabels {
    pub tier: &'static str,
    pub region: ::metrics::SharedString,
}

/// Records latency by matched route (never the raw URI), tier and region
/// (`none` for routes that give no answer).
async fn track(matched: Option<MatchedPath>, req: Request, next: Next) -> Response {
    // The templates are a closed set: label with a static string (no
    // allocation per request).
    let route: &'static str = match matched.as_ref().map(|m| m.as_str()) {
        Some(p) => routes::label(p),
        None => "unmatched",
    };
    let start = Instant::now();
    let resp = next.run(req).await;
    let none = ::metrics::SharedString::const_str(hodos_serving::metrics::NO_REGION);
    let (tier, region) = match resp.extensions().get::<AnswerLabels>() {
        Some(l) => (l.tier, l.region.clone()),
        None => ("none", none),
    };
    ::metrics::histogram!(hodos_serving::metrics::REQUEST_DURATION, "route" => route, "tier" => tier, "region" => region)
        .record(start.elapsed().as_secs_f64());
    resp
}

/// The public router, built from [`routes::PUBLIC`]. Answer handlers
/// admit their requests themselves, once their body is read (one
/// admission point: `handlers::enter`).
pub fn app(state: AppState) -> Router {
    routes::PUBLIC
        .iter()
        .fold(Router::new(), |router, r| {
            router.route(r.path, r.method_router())
        })
        .fallback(handlers::not_found)
        .layer(axum::middleware::map_response(problem::method_not_allowed))
        .layer(axum::extract::DefaultBodyLimit::disable())
        .layer(axum::middleware::from_fn(track))
        .layer(axum::middleware::from_fn_with_state(
            body_deadline::BodyTimeout(ms(state.settings.server.body_timeout_ms)),
            body_deadline::body_deadline,
        ))
        .layer(compression(state.settings.server.compression))
        .layer(tower_http::trace::TraceLayer::new_for_http())
        .with_state(state)
}

/// Response compression (gzip or brotli, as `Accept-Encoding` allows);
/// with `on == false` it passes every response through unchanged.
fn compression(on: bool) -> tower_http::compression::CompressionLayer {
    let layer = tower_http::compression::CompressionLayer::new();
    if on {
        layer
    } else {
        layer.no_gzip().no_br()
    }
}

fn ms(v: u64) -> std::time::Duration {
    std::time::Duration::from_millis(v)
}

/// The admin router (bearer token on every route).
pub fn admin_app(state: AppState) -> Router {
    let limit = body_deadline::BodyTimeout(ms(state.settings.admin.body_timeout_ms));
    routes::ADMIN
        .iter()
        .fold(Router::new(), |r, route| {
            r.route(route.path, route.method_router())
        })
        .fallback(|| async { problem::ApiError::NotFound("no such admin endpoint".into()) })
        .layer(axum::middleware::map_response(problem::method_not_allowed))
        .layer(axum::extract::DefaultBodyLimit::disable())
        .layer(axum::middleware::from_fn_with_state(
            state.clone(),
            admin::require_token,
        ))
        .with_state(state)
        .layer(axum::middleware::from_fn_with_state(
            limit,
            body_deadline::body_deadline,
        ))
}

/// Runs both listeners (and the exporter's upkeep) until `shutdown`
/// resolves, then drains. The service's own background tasks are not
/// started here: the caller starts them ([`Service::start`]) beside this.
pub async fn serve(
    state: AppState,
    public: tokio::net::TcpListener,
    admin: tokio::net::TcpListener,
    shutdown: impl Future<Output = ()> + Send + 'static,
) -> std::io::Result<()> {
    let (tx, rx) = tokio::sync::watch::channel(false);
    let conn_rx = rx.clone();
    let stop = move || {
        let mut rx = rx.clone();
        async move {
            let _ = rx.wait_for(|v| *v).await;
        }
    };
    let mut loops = Vec::new();
    // The exporter keeps histogram samples until upkeep folds them in; run it
    // every few seconds so memory does not grow between scrapes.
    {
        let prometheus = state.prometheus.clone();
        let stop_upkeep = stop();
        loops.push(tokio::spawn(async move {
            tokio::pin!(stop_upkeep);
            loop {
                tokio::select! {
                    _ = &mut stop_upkeep => break,
                    _ = tokio::time::sleep(std::time::Duration::from_secs(5)) => prometheus.run_upkeep(),
                }
            }
        }));
    }
    let drain = std::time::Duration::from_secs(state.settings.server.drain_seconds);
    let (public_limits, admin_limits) = connection_limits(&state.settings);
    tracing::info!(
        public = public_limits.max_connections,
        admin = admin_limits.max_connections,
        "connection caps"
    );
    let a = tokio::spawn(listener::run(
        "public",
        public,
        app(state.clone()),
        public_limits,
        conn_rx.clone(),
    ));
    let b = tokio::spawn(listener::run(
        "admin",
        admin,
        admin_app(state.clone()),
        admin_limits,
        conn_rx,
    ));
    shutdown.await;
    tracing::info!("shutting down: draining in-flight requests");
    let _ = tx.send(true);
    let joined = tokio::time::timeout(drain, async {
        let _ = a.await;
        let _ = b.await;
        for l in loops {
            let _ = l.await;
        }
    })
    .await;
    if joined.is_err() {
        tracing::warn!("drain timed out after {:?}", drain);
    }
    Ok(())
}

/// Descriptors kept out of the public listener's automatic cap: the
/// artifacts, saved state, log and watched folder need their own.
const FD_RESERVE: u64 = 128;

/// Each listener's limits. The public cap, when `server.max_connections`
/// is 0, is what the descriptor limit leaves after [`FD_RESERVE`] and the
/// admin listener's cap (at least 16).
fn connection_limits(s: &settings::Settings) -> (listener::ConnLimits, listener::ConnLimits) {
    let public_max = match s.server.max_connections {
        0 => {
            let soft = listener::nofile_soft_limit().unwrap_or(1024);
            soft.saturating_sub(FD_RESERVE + s.admin.max_connections as u64)
                .max(16)
                .min(usize::MAX as u64) as usize
        }
        n => n,
    };
    let limits = |max_connections| listener::ConnLimits {
        header_timeout: ms(s.server.header_timeout_ms),
        idle_timeout: ms(s.server.idle_timeout_ms),
        max_connections,
    };
    (limits(public_max), limits(s.admin.max_connections))
}

/// Binds `addr` (port 0 picks a free one).
pub async fn bind(addr: SocketAddr) -> std::io::Result<tokio::net::TcpListener> {
    tokio::net::TcpListener::bind(addr).await
}
