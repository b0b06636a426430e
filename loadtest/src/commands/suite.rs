//! `suite`: every scenario back to back with the baseline, then, on a
//! fresh server process, the memory phase; then the goals and the output
//! folder.

use crate::cli::{LoadArgs, ServerArgs};
use crate::commands::setup::make_ctx;
use crate::open::{close, open_server};
use crate::output::write_outputs;
use crate::server;

/// Runs the suite against the server named by `sa`.
pub async fn run(sa: ServerArgs, la: LoadArgs) -> anyhow::Result<()> {
    let start_load = server::loadavg_1m();
    let (mut ctx, held) = make_ctx(&sa, &la, true, true).await?;
    ctx.suite().await;
    close(held).await;
    if sa.hodos_bin.is_some() {
        // Memory on a fresh process: the load run's allocator history and
        // caches would blur what the region and its metrics need.
        let d = ctx.drawn();
        match open_server(&sa, &d, &ctx.out.clone()).await {
            Ok((info, held)) => {
                ctx.server = info;
                ctx.memory_phase().await;
                close(held).await;
            }
            Err(e) => eprintln!("warning: the memory phase could not start a server: {e:#}"),
        }
    }
    ctx.finish_goals();
    write_outputs(&ctx, start_load, &ctx.out.clone())
}
