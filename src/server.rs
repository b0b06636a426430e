//! Running the whole service: the serving layer's background tasks
//! ([`Service::start`](crate::serving::service::Service::start): live loops,
//! watched folders, the admission probe) beside both HTTP listeners, until
//! `shutdown`; then the listeners drain and the tasks stop. `hodos serve`,
//! `hodos demo`, the load tool and the black-box tests all start the
//! service through [`run`].

use crate::http::{serve, AppState};
use std::future::Future;
use std::time::Duration;
use tokio::net::TcpListener;

/// Starts the service's background tasks, serves `public` and `admin`
/// until `shutdown` resolves, drains, then stops the tasks (within the
/// drain time, `server.drain_seconds`).
pub async fn run(
    state: AppState,
    public: TcpListener,
    admin: TcpListener,
    shutdown: impl Future<Output = ()> + Send + 'static,
) -> std::io::Result<()> {
    let tasks = state.service.start();
    let drain = Duration::from_secs(state.settings.server.drain_seconds);
    let served = serve(state, public, admin, shutdown).await;
    if !tasks.stop(drain).await {
        tracing::warn!("background tasks did not stop within {:?}", drain);
    }
    served
}
