//! A service running on 127.0.0.1 port 0 (both listeners) for black-box
//! tests, stopped through its shutdown future, plus a client with a
//! bounded timeout.

use hodos::config::Config;
use hodos::http::{bind, AppState};
use hodos::server::run as serve;
use std::net::SocketAddr;
use std::time::Duration;

pub struct Running {
    pub public: SocketAddr,
    pub admin: SocketAddr,
    stop: Option<tokio::sync::oneshot::Sender<()>>,
    task: tokio::task::JoinHandle<()>,
}

/// Parses and validates `text`, opens its regions and serves them.
pub async fn start(text: &str) -> Running {
    let cfg = Config::parse(text).unwrap();
    cfg.validate().unwrap();
    let state = AppState::open(cfg).await;
    let p = bind("127.0.0.1:0".parse().unwrap()).await.unwrap();
    let a = bind("127.0.0.1:0".parse().unwrap()).await.unwrap();
    let (public, admin) = (p.local_addr().unwrap(), a.local_addr().unwrap());
    let (tx, rx) = tokio::sync::oneshot::channel::<()>();
    let task = tokio::spawn(async move {
        serve(state, p, a, async move {
            let _ = rx.await;
        })
        .await
        .unwrap();
    });
    Running {
        public,
        admin,
        stop: Some(tx),
        task,
    }
}

impl Running {
    /// Shuts down and waits (at most 20 s) for the drain.
    pub async fn stop(mut self) {
        if let Some(tx) = self.stop.take() {
            let _ = tx.send(());
        }
        tokio::time::timeout(Duration::from_secs(20), self.task)
            .await
            .expect("drains in time")
            .unwrap();
    }
}

/// A client whose every request gives up after 30 s.
pub fn client() -> reqwest::Client {
    reqwest::Client::builder()
        .timeout(Duration::from_secs(30))
        .build()
        .unwrap()
}
