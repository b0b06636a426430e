//! `probe`: capacity search for one workload on hodos (and first on the
//! baseline, from 4× the start rate, with `--with-baseline`).

use crate::cli::{kind_of, LoadArgs, Scenario, ServerArgs};
use crate::commands::setup::make_ctx;
use crate::open::close;
use crate::output::write_outputs;
use crate::server;
use crate::suite::{pick, System};
use std::time::Duration;

/// Capacity search for `sc` from `from` req/s.
pub async fn run(
    sa: ServerArgs,
    la: LoadArgs,
    sc: Scenario,
    from: f64,
    with_baseline: bool,
) -> anyhow::Result<()> {
    let start_load = server::loadavg_1m();
    let (mut ctx, held) = make_ctx(&sa, &la, with_baseline, false).await?;
    if ctx.wait_warm(Duration::from_secs(60)).await.is_none() {
        eprintln!("warning: no graph answer within 60 s; measuring anyway");
    }
    ctx.header();
    let w = pick(&ctx.w, kind_of(sc));
    let name = format!("capacity-{}", w.kind.label());
    if with_baseline {
        ctx.probe(&name, System::Baseline, &w, from * 4.0).await;
    }
    ctx.probe(&name, System::Hodos, &w, from).await;
    close(held).await;
    write_outputs(&ctx, start_load, &ctx.out.clone())
}
