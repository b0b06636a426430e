//! The baseline: a minimal axum server inside the load tool, on
//! 127.0.0.1 port 0, that parses and validates the same request JSON as
//! hodos (through hodos' own request types) and returns a fixed answer of
//! the same shape, without any graph work. Driven by the same generator on
//! the same machine in the same run, it is the ceiling that HTTP, JSON and
//! this machine allow; hodos is reported as a ratio to it.
//!
//! It runs on its own two-thread tokio runtime (the default hodos server
//! has one worker per core, two here), on its own OS threads, so its
//! scheduling resembles the real server's even though it shares this
//! process with the generator.

use axum::body::Bytes;
use axum::extract::State;
use axum::response::{IntoResponse, Response};
use axum::routing::post;
use axum::{Json, Router};
use hodos::http::dto::{
    parse_json, EtaRequest, EtaResponse, LineString, MatrixRequest, MatrixResponse, ProfileRef,
    RouteResponse, SnapshotRef, SourcesDto,
};
use hodos::http::problem::ApiError;
use std::net::SocketAddr;

/// The fixed answer's sources: all of its time on historical speeds.
const ALL_HISTORICAL: SourcesDto = SourcesDto {
    live: 0.0,
    historical: 1.0,
    free_flow: 0.0,
};

/// The fixed answer every trip gets.
fn fixed_eta() -> EtaResponse {
    EtaResponse {
        eta_s: 600.0,
        meters: 5000.0,
        tier: "historical",
        fallback_reason: Some("no_live_data"),
        speeds_age_s: None,
        sources: Some(ALL_HISTORICAL),
        snapshot: Some(SnapshotRef {
            region: "baseline".into(),
            generation: 1,
        }),
        from_snap_m: Some(3.0),
        to_snap_m: Some(4.0),
        hour_of_week: Some(0),
        profile: Some(ProfileRef {
            index: 0,
            representative_hour: 0,
        }),
        graph_eta_s: 600.0,
        eta_low_s: None,
        eta_high_s: None,
        model_version: None,
    }
}

#[derive(Clone)]
struct Limits {
    max_cells: usize,
}

async fn eta(body: Bytes) -> Result<Response, ApiError> {
    parse_json::<EtaRequest>(&body)?.validate()?;
    Ok(Json(fixed_eta()).into_response())
}

async fn route(body: Bytes) -> Result<Response, ApiError> {
    let t = parse_json::<EtaRequest>(&body)?.validate()?;
    Ok(Json(RouteResponse {
        eta: fixed_eta(),
        geometry: LineString::new([t.from, t.to]),
    })
    .into_response())
}

async fn matrix(State(l): State<Limits>, body: Bytes) -> Result<Response, ApiError> {
    let m = parse_json::<MatrixRequest>(&body)?.validate(l.max_cells)?;
    let (r, c) = (m.from.len(), m.to.len());
    Ok(Json(MatrixResponse {
        eta_s: vec![vec![600.0; c]; r],
        meters: vec![vec![5000.0; c]; r],
        tier: vec![vec!["historical"; c]; r],
        fallback_reason: vec![vec![Some("no_live_data"); c]; r],
        sources: vec![vec![Some(ALL_HISTORICAL); c]; r],
        snapshot: Some(SnapshotRef {
            region: "baseline".into(),
            generation: 1,
        }),
        graph_eta_s: vec![vec![600.0; c]; r],
        eta_low_s: vec![vec![None; c]; r],
        eta_high_s: vec![vec![None; c]; r],
        model_version: vec![vec![None; c]; r],
    })
    .into_response())
}

/// A running baseline server; stops when dropped.
pub struct Baseline {
    pub addr: SocketAddr,
    stop: Option<tokio::sync::oneshot::Sender<()>>,
    thread: Option<std::thread::JoinHandle<()>>,
}

impl Baseline {
    /// Starts the server on 127.0.0.1 port 0 with its own runtime.
    pub fn start() -> std::io::Result<Baseline> {
        // Bound here so the address is known at once; the runtime is built
        // on its own thread (a runtime cannot be entered from inside
        // another one).
        let std_listener = std::net::TcpListener::bind(("127.0.0.1", 0))?;
        std_listener.set_nonblocking(true)?;
        let addr = std_listener.local_addr()?;
        let rt = tokio::runtime::Builder::new_multi_thread()
            .worker_threads(2)
            .thread_name("baseline")
            .enable_all()
            .build()?;
        let (tx, rx) = tokio::sync::oneshot::channel::<()>();
        let app = Router::new()
            .route("/v1/eta", post(eta))
            .route("/v1/route", post(route))
            .route("/v1/eta/matrix", post(matrix))
            .with_state(Limits { max_cells: 250_000 });
        let thread = std::thread::Builder::new()
            .name("baseline-main".into())
            .spawn(move || {
                rt.block_on(async move {
                    let Ok(listener) = tokio::net::TcpListener::from_std(std_listener) else {
                        return;
                    };
                    let (gtx, grx) = tokio::sync::oneshot::channel::<()>();
                    let srv = tokio::spawn(async move {
                        let _ = axum::serve(listener, app)
                            .with_graceful_shutdown(async move {
                                let _ = grx.await;
                            })
                            .await;
                    });
                    let _ = rx.await;
                    let _ = gtx.send(());
                    // Idle keep-alive connections could hold a graceful
                    // shutdown open; three seconds is plenty for real work.
                    let _ = tokio::time::timeout(std::time::Duration::from_secs(3), srv).await;
                });
                rt.shutdown_timeout(std::time::Duration::from_secs(2));
            })?;
        Ok(Baseline {
            addr,
            stop: Some(tx),
            thread: Some(thread),
        })
    }
}

impl Drop for Baseline {
    fn drop(&mut self) {
        if let Some(tx) = self.stop.take() {
            let _ = tx.send(());
        }
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}
