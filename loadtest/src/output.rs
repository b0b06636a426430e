//! The output folder of a command: `results.json` (environment, server,
//! trip mix, goals, capacity searches, memory readings, admin reports and
//! one summary per run), `table.txt`, and the SVG plots.

use crate::plot;
use crate::server;
use crate::suite::Ctx;
use crate::workload;
use serde::Serialize;
use std::path::Path;

/// The machine and the command a result came from.
#[derive(Serialize)]
struct Environment {
    date_utc: String,
    command: Vec<String>,
    cpu: String,
    cores: usize,
    memory_gb: f64,
    loadavg_1m_start: f64,
    loadavg_1m_end: f64,
    tool_version: &'static str,
}

/// Reads the machine: CPU model, cores, memory, load average.
fn environment(start_load: f64) -> Environment {
    let cpu = std::fs::read_to_string("/proc/cpuinfo")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("model name"))
                .and_then(|l| l.split_once(':'))
                .map(|(_, v)| v.trim().to_string())
        })
        .unwrap_or_default();
    let mem = std::fs::read_to_string("/proc/meminfo")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("MemTotal:"))
                .and_then(|l| {
                    l.split_whitespace()
                        .nth(1)
                        .and_then(|v| v.parse::<f64>().ok())
                })
        })
        .unwrap_or(0.0)
        / 1024.0
        / 1024.0;
    Environment {
        date_utc: chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
        command: std::env::args().collect(),
        cpu,
        cores: std::thread::available_parallelism()
            .map(|n| n.get())
            .unwrap_or(0),
        memory_gb: mem,
        loadavg_1m_start: start_load,
        loadavg_1m_end: server::loadavg_1m(),
        tool_version: env!("CARGO_PKG_VERSION"),
    }
}

/// Everything `results.json` holds.
#[derive(Serialize)]
struct Results<'a> {
    environment: Environment,
    server: serde_json::Value,
    trip_mix: serde_json::Value,
    goals: &'a [crate::suite::Goal],
    probes: &'a [crate::suite::Probe],
    memory: &'a [crate::suite::Memory],
    live_batch: &'a Option<crate::suite::LiveBatch>,
    admin: serde_json::Value,
    runs: &'a [crate::model::Summary],
}

/// Writes `results.json`, `table.txt` and the plots of `ctx` into `out`.
pub fn write_outputs(ctx: &Ctx, start_load: f64, out: &Path) -> anyhow::Result<()> {
    std::fs::create_dir_all(out)?;
    let mix: Vec<_> = [&ctx.w.eta, &ctx.w.m1x50]
        .iter()
        .map(|w| serde_json::json!({"workload": w.kind.label(), "bands": w.mix_check(), "assumed": workload::TRIP_MIX}))
        .collect();
    let res = Results {
        environment: environment(start_load),
        server: serde_json::json!({
            "public": ctx.server.public.to_string(),
            "pid": ctx.server.pid,
            "in_process": ctx.server.in_process,
            "live_ttl_s": ctx.server.live_ttl_s,
        }),
        trip_mix: serde_json::Value::Array(mix),
        goals: &ctx.goals,
        live_batch: &ctx.live_batch,
        probes: &ctx.probes,
        memory: &ctx.memory,
        admin: serde_json::to_value(&ctx.admin)?,
        runs: &ctx.runs,
    };
    let json = out.join("results.json");
    std::fs::write(&json, serde_json::to_vec_pretty(&res)?)?;
    std::fs::write(out.join("table.txt"), ctx.table.join("\n") + "\n")?;
    let lines: Vec<(String, Vec<(f64, f64)>)> = ctx
        .runs
        .iter()
        .map(|s| {
            (
                format!("{} {} {:.0}/s", s.system, s.scenario, s.target_rate),
                s.curve.clone(),
            )
        })
        .collect();
    plot::percentiles(
        &out.join("latency-percentiles.svg"),
        "hodos-load: latency by percentile (from scheduled send)",
        &lines,
    )
    .map_err(anyhow::Error::msg)?;
    for s in &ctx.runs {
        let name = format!(
            "timeline-{}-{}.svg",
            s.system,
            s.scenario.replace(['@', '/'], "_")
        );
        plot::timeline(&out.join(name), s).map_err(anyhow::Error::msg)?;
    }
    eprintln!(
        "wrote {}, table.txt and SVG plots in {}",
        json.display(),
        out.display()
    );
    Ok(())
}
