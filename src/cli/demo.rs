//! `hodos demo`: the fictional demo city built and served on 127.0.0.1
//! with a simulated live feed, from a folder of its own removed at exit;
//! `--once` builds it, answers one sample ETA and exits.

use super::info::print_summary;
use super::process::{init_tracing, runtime, shutdown_signal};
use super::progress::bars;
use anyhow::Context;
use hodos::engine::artifact::Artifact;
use hodos::engine::build::{build, Source};
use hodos::engine::cch::CchQuery;
use hodos::engine::geo::LatLon;
use hodos::engine::region::{Region, DEFAULT_MAX_SNAP_M};

pub fn run_once() -> anyhow::Result<()> {
    let dir = std::env::temp_dir().join("hodos-demo");
    std::fs::create_dir_all(&dir).with_context(|| format!("creating {}", dir.display()))?;
    let out = dir.join("quellhaven.hodos");
    let (_, city) = hodos::engine::import::synthetic::generate_with_info(30_000, 7);
    println!(
        "building the demo city {} (about 30,000 intersections)",
        city.name
    );
    let art = build(
        &Source::Synthetic {
            nodes: 30_000,
            seed: 7,
        },
        &mut bars(),
    )?;
    art.save(&out)?;
    print_summary(&art);
    let region = Region::from_artifact(Artifact::load(&out)?);
    let metric = region.free_flow();
    let mut q = CchQuery::new(&region.cch);
    let (lo, hi) = region.graph.bbox();
    let from = LatLon::new(
        lo.lat + (hi.lat - lo.lat) * 0.2,
        lo.lon + (hi.lon - lo.lon) * 0.2,
    );
    let to = LatLon::new(
        lo.lat + (hi.lat - lo.lat) * 0.8,
        lo.lon + (hi.lon - lo.lon) * 0.75,
    );
    let eta = region.eta(&metric, &mut q, from, to, DEFAULT_MAX_SNAP_M)?;
    println!();
    println!("sample ETA across {} (free-flow):", city.name);
    println!(
        "  from {from} to {to}: {:.0} s over {:.0} m",
        eta.time_s, eta.meters
    );
    println!(
        "try: cargo run --release -- eta {} --from {from} --to {to}",
        out.display()
    );
    Ok(())
}

pub fn run(port: u16) -> anyhow::Result<()> {
    hodos::serving::os::tune_allocator();
    init_tracing();
    hodos::serving::os::raise_nofile();
    // A folder of this run's own (artifact, table, state), removed at
    // exit: a demo always starts clean, never serving what an earlier one
    // was sent.
    let dir = std::env::temp_dir().join(format!("hodos-demo-{}", std::process::id()));
    let token = format!("demo-{:016x}", rand_token());
    let admin_port = match port {
        0 => 0,
        p => p
            .checked_add(1)
            .with_context(|| format!("port {p}: the admin API needs the next port"))?,
    };
    let result = runtime()?.block_on(async {
        let public = hodos::http::bind(([127, 0, 0, 1], port).into())
            .await
            .with_context(|| {
                format!("port {port} (public API) is not free; choose another with --port, or --port 0 for any free ports")
            })?;
        let admin = hodos::http::bind(([127, 0, 0, 1], admin_port).into())
            .await
            .with_context(|| {
                format!("port {admin_port} (admin API, --port + 1) is not free; choose another with --port, or --port 0 for any free ports")
            })?;
        let (pa, aa) = (public.local_addr()?, admin.local_addr()?);
        let _ = std::fs::remove_dir_all(&dir);
        println!("demo files in {} (removed at exit)", dir.display());
        println!(
            "building the demo city {} ({} intersections)...",
            hodos::engine::import::synthetic::CITY_NAME,
            hodos::demo::DEMO_NODES
        );
        let files = {
            let dir = dir.clone();
            let token = token.clone();
            tokio::task::spawn_blocking(move || {
                hodos::demo::prepare(&dir, pa, aa, &token, &mut bars())
            })
            .await??
        };
        let state = hodos::http::AppState::open(files.config.clone()).await;
        if let Some((name, why)) = state.service.degraded().first() {
            anyhow::bail!("demo region {name} failed to load: {why}");
        }
        let (tx, rx) = tokio::sync::watch::channel(false);
        let mut rx2 = rx.clone();
        let feed = tokio::spawn(hodos::demo::live_feed(
            state.service.clone(),
            files.truth.clone(),
            files.bridge.1.clone(),
            async move {
                let _ = rx2.wait_for(|v| *v).await;
            },
        ));
        let stop = shutdown_signal();
        println!();
        println!(
            "serving {} on http://{pa} (admin on http://{aa}, token {token})",
            hodos::engine::import::synthetic::CITY_NAME
        );
        println!(
            "live feed: {} slows to 8 km/h for a minute, then recovers, repeatedly; probe vehicles\nreport a quarter of the segments and 40 simulated trips complete every 10 s (their error:\ncurl -s http://{pa}/metrics | grep hodos_trip_abs_pct_error_sum)",
            files.bridge.0
        );
        println!("Ctrl-C to stop. Try:");
        println!();
        print!("{}", hodos::demo::curl_lines(&files, pa, aa, &token));
        hodos::server::run(state, public, admin, async move {
            stop.await;
            let _ = tx.send(true);
        })
        .await?;
        let _ = feed.await;
        Ok(())
    });
    if dir.exists() {
        if let Err(e) = std::fs::remove_dir_all(&dir) {
            eprintln!("could not remove {}: {e}", dir.display());
        }
    }
    if result.is_ok() {
        println!("stopped");
    }
    result
}

/// A token for the demo's admin API (not a secret worth more than a demo).
fn rand_token() -> u64 {
    use std::hash::{BuildHasher, Hasher};
    let mut h = std::collections::hash_map::RandomState::new().build_hasher();
    h.write_u128(
        std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map(|d| d.as_nanos())
            .unwrap_or(0),
    );
    h.finish()
}
