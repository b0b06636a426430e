//! `drive`: one scenario at a fixed arrival rate (a query workload on
//! hodos or on the baseline, the reload storm, or the stale feed), with
//! memory readings before and after.

use crate::cli::{kind_of, LoadArgs, Scenario, ServerArgs};
use crate::commands::setup::make_ctx;
use crate::open::close;
use crate::output::write_outputs;
use crate::server;
use crate::suite::{pick, System};
use anyhow::bail;
use std::time::Duration;

/// Drives `sc` at `rate` for `seconds` (on the baseline with `baseline`).
pub async fn run(
    sa: ServerArgs,
    la: LoadArgs,
    sc: Scenario,
    rate: f64,
    seconds: f64,
    baseline: bool,
) -> anyhow::Result<()> {
    if !(rate > 0.0 && rate.is_finite()) {
        bail!("--per-second must be a positive number");
    }
    let start_load = server::loadavg_1m();
    let (mut ctx, held) = make_ctx(&sa, &la, baseline, false).await?;
    if ctx.wait_warm(Duration::from_secs(60)).await.is_none() {
        eprintln!("warning: no graph answer within 60 s; measuring anyway");
    }
    ctx.header();
    let dur = Duration::from_secs_f64(seconds.max(0.1));
    ctx.memory_now("before");
    let sum = match sc {
        Scenario::Storm => ctx.reload_storm(rate, dur).await,
        Scenario::Stale => ctx.stale_feed(rate, dur).await,
        _ => {
            let w = pick(&ctx.w, kind_of(sc));
            let sys = if baseline {
                System::Baseline
            } else {
                System::Hodos
            };
            let label = format!("{}-fixed", w.kind.label());
            Some(ctx.drive(&label, sys, &w, rate, dur, ctx.s.wire()).await)
        }
    };
    let Some(sum) = sum else {
        bail!("this scenario needs the admin API: give --admin and an admin token (or let the tool start the server)");
    };
    for n in &sum.notes {
        println!("  {n}");
    }
    ctx.runs.push(sum);
    ctx.memory_now("after");
    close(held).await;
    write_outputs(&ctx, start_load, &ctx.out.clone())
}
