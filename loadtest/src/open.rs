//! The server of a command and what keeps it alive: a `hodos serve` child
//! process, hodos served in this process on port 0, or an already running
//! server at a loopback address; and stopping it at the end.

use crate::cli::ServerArgs;
use crate::guard;
use crate::server::{self, ServerInfo};
use crate::suite::Drawn;
use anyhow::bail;
use std::path::Path;
use std::time::Duration;

/// The server of a command, and what keeps it alive.
pub enum Held {
    Spawned(server::Spawned),
    InProcess(server::InProcess),
    External,
}

/// The server named on the command line: started as a separate process
/// (`--hodos-bin`), served in this process (`--in-process`), or an
/// already running one at a loopback address (`--target`).
pub async fn open_server(
    a: &ServerArgs,
    d: &Drawn,
    out: &Path,
) -> anyhow::Result<(ServerInfo, Held)> {
    let env_token = std::env::var(hodos::config::ADMIN_TOKEN_ENV)
        .ok()
        .filter(|t| !t.is_empty());
    if let Some(bin) = &a.hodos_bin {
        eprintln!(
            "starting {} serve (loading {}) ...",
            bin.display(),
            a.artifact.display()
        );
        let s = server::spawn_external(
            bin,
            &a.artifact,
            d.lo,
            d.hi,
            &a.time_zone,
            a.live_ttl_s,
            &a.server_env,
            out,
        )
        .await?;
        eprintln!(
            "server pid {} on {} (config {})",
            s.child_id(),
            s.info.public,
            s.config_path.display()
        );
        return Ok((s.info.clone(), Held::Spawned(s)));
    }
    if a.in_process {
        let state = out.join("server-state");
        let _ = std::fs::remove_dir_all(&state);
        let artifact = std::fs::canonicalize(&a.artifact)?;
        let p = serve_in_process(&artifact, &state, d, &a.time_zone, a.live_ttl_s).await?;
        return Ok((p.info.clone(), Held::InProcess(p)));
    }
    let Some(t) = &a.target else {
        bail!(
            "say which server: --hodos-bin PATH (preferred), --in-process, or --target HOST:PORT"
        );
    };
    let public = guard::resolve_loopback(t).await?;
    let admin = match &a.admin {
        Some(x) => Some(guard::resolve_loopback(x).await?),
        None => None,
    };
    server::wait_ready(public, Duration::from_secs(10)).await?;
    Ok((
        ServerInfo {
            public,
            admin,
            token: a.admin_token.clone().or(env_token),
            region: server::REGION.into(),
            pid: a.server_pid,
            in_process: false,
            live_ttl_s: a.live_ttl_s,
        },
        Held::External,
    ))
}

/// Stops the server if this command started it.
pub async fn close(held: Held) {
    match held {
        Held::Spawned(mut s) => s.stop(),
        Held::InProcess(p) => p.stop().await,
        Held::External => {}
    }
}

/// hodos served in this process on two free loopback ports, with a random
/// admin token, for the artifact at `artifact` (state in `state`).
pub async fn serve_in_process(
    artifact: &Path,
    state: &Path,
    d: &Drawn,
    time_zone: &str,
    live_ttl_s: f64,
) -> anyhow::Result<server::InProcess> {
    let token = server::random_token();
    let text = server::config_text(
        "127.0.0.1:0".parse()?,
        "127.0.0.1:0".parse()?,
        artifact,
        state,
        d.lo,
        d.hi,
        time_zone,
        live_ttl_s,
    );
    let mut cfg = hodos::config::Config::parse(&text).map_err(anyhow::Error::msg)?;
    cfg.admin.token = token.clone();
    cfg.validate()
        .map_err(|(k, m)| anyhow::anyhow!("{k}: {m}"))?;
    server::start_in_process(cfg, token).await
}
