//! `smoke`: a short low-rate run for CI. Small runs of every query
//! workload and of the baseline, one reload-storm round trip when an admin
//! listener and token are known; fails only if a request or admin call went
//! unanswered or the tool itself failed. Asserts nothing about speed.
//!
//! Without `--target` it builds a 3,000-node synthetic city with the
//! project's demo generator and serves it in this process on port 0, so
//! there is nothing to clean up afterwards.

use crate::baseline;
use crate::cli::LoadArgs;
use crate::draw::{draw, draw_from};
use crate::guard;
use crate::open::{close, serve_in_process, Held};
use crate::output::write_outputs;
use crate::server::{self, ServerInfo};
use crate::suite::{Ctx, Drawn, System, Wire};
use anyhow::bail;
use std::path::{Path, PathBuf};
use std::time::Duration;

/// The smoke: small runs of every query workload, one admin round trip,
/// the baseline; fails if any request went unanswered.
pub async fn run(
    target: Option<String>,
    admin: Option<String>,
    admin_token: Option<String>,
    artifact: Option<PathBuf>,
    rate: f64,
    seconds: f64,
    out: PathBuf,
) -> anyhow::Result<()> {
    let start_load = server::loadavg_1m();
    std::fs::create_dir_all(&out)?;
    let tmp = tempfile::tempdir()?;
    let (d, info, held) = match target {
        Some(t) => external(&t, admin, admin_token, artifact).await?,
        None => synthetic(tmp.path()).await?,
    };
    let mut ctx = smoke_ctx(info, d, &out)?;
    ctx.header();
    query_runs(&mut ctx, rate, seconds).await;
    storm_check(&mut ctx, rate, seconds).await;
    close(held).await;
    drop(ctx.baseline.take());
    write_outputs(&ctx, start_load, &out)?;
    let bad = failures(&ctx);
    if bad.is_empty() {
        let answered: u64 = ctx.runs.iter().map(|s| s.ok).sum();
        println!(
            "smoke: {} runs, {answered} requests, every one answered",
            ctx.runs.len()
        );
        Ok(())
    } else {
        bail!("smoke failed:\n  {}", bad.join("\n  "))
    }
}

/// An already running server at `target` (loopback only), serving the
/// artifact the trips are drawn from.
async fn external(
    target: &str,
    admin: Option<String>,
    admin_token: Option<String>,
    artifact: Option<PathBuf>,
) -> anyhow::Result<(Drawn, ServerInfo, Held)> {
    let Some(art) = artifact else {
        bail!("--target needs --artifact (the served artifact, to draw trips from)");
    };
    let d = draw_from(&art, 7)?;
    let public = guard::resolve_loopback(target).await?;
    let admin = match admin {
        Some(a) => Some(guard::resolve_loopback(&a).await?),
        None => None,
    };
    server::wait_ready(public, Duration::from_secs(10)).await?;
    let token = admin_token.or_else(|| std::env::var(hodos::config::ADMIN_TOKEN_ENV).ok());
    let info = ServerInfo {
        public,
        admin,
        token,
        region: server::REGION.into(),
        pid: None,
        in_process: false,
        live_ttl_s: 900.0,
    };
    Ok((d, info, Held::External))
}

/// A small synthetic city of the project's demo generator, built into
/// `tmp` and served here on port 0.
async fn synthetic(tmp: &Path) -> anyhow::Result<(Drawn, ServerInfo, Held)> {
    eprintln!("building a 3,000-node synthetic city for the smoke ...");
    let art = tokio::task::spawn_blocking(|| {
        hodos::engine::build::build(
            &hodos::engine::build::Source::Synthetic {
                nodes: 3_000,
                seed: 5,
            },
            &mut hodos::engine::build::Quiet,
        )
    })
    .await??;
    let path = tmp.join("smoke.hodos");
    art.save(&path)?;
    let d = draw(&art.graph, 7, 20);
    drop(art);
    let p = serve_in_process(&path, &tmp.join("state"), &d, "UTC", 900.0).await?;
    Ok((d, p.info.clone(), Held::InProcess(p)))
}

/// The suite's state with the default settings, no quiet waits or redone
/// runs, and small admin batches.
fn smoke_ctx(info: ServerInfo, d: Drawn, out: &Path) -> anyhow::Result<Ctx> {
    let la = LoadArgs::parse_from_defaults(out);
    let baseline = Some(baseline::Baseline::start()?);
    let mut ctx = Ctx::new(
        info,
        baseline,
        d,
        la.settings(chrono_tz::UTC),
        out.to_path_buf(),
    );
    ctx.s.quiet_per_run = Duration::ZERO;
    ctx.s.retry_noisy = false;
    ctx.s.live_batch = 200;
    ctx.s.table_edges = 200;
    Ok(ctx)
}

/// Every query workload on hodos, and single ETAs on the baseline.
async fn query_runs(ctx: &mut Ctx, rate: f64, seconds: f64) {
    let dur = Duration::from_secs_f64(seconds.clamp(0.5, 60.0));
    let short = Duration::from_secs_f64((seconds / 2.0).clamp(0.5, 30.0));
    let wire = Wire {
        connections: 4,
        drain: Duration::from_secs(10),
    };
    let w = ctx.w.clone();
    let plans = [
        ("smoke-eta", System::Hodos, &w.eta, rate, dur),
        (
            "smoke-matrix1x50",
            System::Hodos,
            &w.m1x50,
            (rate / 5.0).max(1.0),
            short,
        ),
        (
            "smoke-matrix20x20",
            System::Hodos,
            &w.m20x20,
            (rate / 10.0).max(1.0),
            short,
        ),
        (
            "smoke-route",
            System::Hodos,
            &w.route,
            (rate / 2.5).max(1.0),
            short,
        ),
        ("smoke-eta", System::Baseline, &w.eta, rate, short),
    ];
    for (name, sys, wl, r, t) in plans {
        let s = ctx.drive(name, sys, wl, r, t, wire).await;
        ctx.runs.push(s);
    }
}

/// A short reload storm, when an admin listener and token are known.
async fn storm_check(ctx: &mut Ctx, rate: f64, seconds: f64) {
    let short = Duration::from_secs_f64((seconds / 2.0).clamp(0.5, 30.0));
    if ctx.server.admin.is_some() && ctx.server.token.is_some() {
        ctx.s.live_every = Duration::from_millis(100);
        ctx.s.table_every = Duration::from_secs(1);
        if let Some(s) = ctx.reload_storm(rate, short).await {
            for n in &s.notes {
                println!("  {n}");
            }
            ctx.runs.push(s);
        }
    } else {
        println!("(no admin listener or token: the storm check is skipped)");
    }
}

/// Every run with an unanswered request and every admin stream with an
/// unaccepted call.
fn failures(ctx: &Ctx) -> Vec<String> {
    let mut bad = Vec::new();
    for s in &ctx.runs {
        if s.scheduled == 0 || s.ok < s.scheduled {
            bad.push(format!(
                "{} ({}): {} of {} answered, errors {:?}",
                s.scenario, s.system, s.ok, s.scheduled, s.errors
            ));
        }
    }
    for (name, r) in &ctx.admin {
        if r.calls == 0 || r.accepted < r.calls {
            bad.push(format!(
                "{name}: {} of {} admin calls accepted ({:?})",
                r.accepted, r.calls, r.failed
            ));
        }
    }
    bad
}
