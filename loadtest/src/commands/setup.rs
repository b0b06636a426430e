//! What every measuring command does first: parse the time zone, draw the
//! request pools from the artifact, open the server, wait for a quiet
//! machine, start the baseline, and build the suite's state.

use crate::baseline;
use crate::cli::{LoadArgs, ServerArgs};
use crate::draw::draw_from;
use crate::noise::QUIET_CORES;
use crate::open::{open_server, Held};
use crate::server;
use crate::suite::Ctx;
use anyhow::Context;
use std::time::Duration;

/// The state of a command and its server; `need_baseline` starts the
/// baseline, `cold_first` skips the quiet wait (the suite measures the
/// cold start first).
pub async fn make_ctx(
    sa: &ServerArgs,
    la: &LoadArgs,
    need_baseline: bool,
    cold_first: bool,
) -> anyhow::Result<(Ctx, Held)> {
    let tz: chrono_tz::Tz = sa
        .time_zone
        .parse()
        .map_err(|_| anyhow::anyhow!("unknown IANA time zone {:?}", sa.time_zone))?;
    std::fs::create_dir_all(&la.out).with_context(|| format!("creating {}", la.out.display()))?;
    eprintln!("drawing trips from {} ...", sa.artifact.display());
    let d = draw_from(&sa.artifact, la.seed)?;
    eprintln!(
        "{} nodes, {} edges; trip mix of the ETA pool: {}",
        d.nodes,
        d.edges.len(),
        d.w.eta
            .mix_check()
            .iter()
            .map(|(b, s)| format!("{b} {:.0}%", 100.0 * s))
            .collect::<Vec<_>>()
            .join(", ")
    );
    let (info, held) = open_server(sa, &d, &la.out).await?;
    if la.wait_quiet_s > 0 && !cold_first {
        let busy = server::wait_quiet(Duration::from_secs(la.wait_quiet_s), QUIET_CORES).await;
        eprintln!("machine busy over the last second before measuring: {busy:.2} cores");
    }
    let baseline = if need_baseline {
        Some(baseline::Baseline::start()?)
    } else {
        None
    };
    let ctx = Ctx::new(info, baseline, d, la.settings(tz), la.out.clone());
    Ok((ctx, held))
}
