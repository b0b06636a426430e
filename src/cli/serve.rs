//! `hodos serve`: the HTTP API (public and admin listeners) for the
//! regions of a configuration file, until Ctrl-C or SIGTERM.

use super::process::{init_tracing, runtime, shutdown_signal};
use anyhow::Context;

pub fn run(config: &std::path::Path, strict: bool) -> anyhow::Result<()> {
    hodos::serving::os::tune_allocator();
    init_tracing();
    hodos::serving::os::raise_nofile();
    let cfg = hodos::config::Config::load(config)?;
    if cfg.admin.token.is_empty() {
        tracing::warn!(
            "no admin token configured (set {}): the admin API refuses every request",
            hodos::config::ADMIN_TOKEN_ENV
        );
    }
    runtime()?.block_on(async move {
        let (listen, admin) = (cfg.server.listen, cfg.admin.listen);
        // Without --strict the listeners open first and regions load
        // behind them: /healthz answers and /readyz says `loading`.
        let state = hodos::http::AppState::unloaded(cfg);
        if strict {
            state.service.load_regions().await;
            let degraded = state.service.degraded();
            if !degraded.is_empty() {
                anyhow::bail!("--strict: {} region(s) failed to load: {}", degraded.len(),
                    degraded.iter().map(|(n, w)| format!("{n} ({w})")).collect::<Vec<_>>().join("; "));
            }
        }
        let public = hodos::http::bind(listen).await.with_context(|| format!("binding {listen}"))?;
        let admin_l = hodos::http::bind(admin).await.with_context(|| format!("binding {admin}"))?;
        tracing::info!(public = %public.local_addr()?, admin = %admin_l.local_addr()?, "serving");
        let loading = state.clone();
        tokio::spawn(async move {
            loading.service.load_regions().await;
            for (name, why) in loading.service.degraded() {
                tracing::warn!(region = %name, reason = %why, "region degraded: answering from the heuristic tier");
            }
            tracing::info!("regions loaded");
        });
        hodos::server::run(state, public, admin_l, shutdown_signal()).await?;
        Ok(())
    })
}
