//! What an upload costs the server in memory: starts the real `hodos serve`
//! (target/release/hodos, or `HODOS_BIN`) on 127.0.0.1 with free ports,
//! sends a live batch of about MB megabytes (JSON) and a historical table
//! of about the same size (CSV), and prints the server's resident memory
//! (`VmRSS` in /proc/<pid>/status) before, its peak during each upload
//! (`VmHWM`, reset before each upload by writing 5 to
//! /proc/<pid>/clear_refs, Linux ≥ 4.0), and 5 s after.
//!
//! `cargo build --release && cargo run --release --example upload_memory -- [MB]`
//!
//! The graph: `HODOS_ARTIFACT` (an artifact from `hodos build`, e.g. of
//! DIMACS NY) if set, else a synthetic city of 200,000 intersections built
//! here. `HODOS_BIN` picks another binary (to measure an older build with
//! the same command). Goal: peak growth of the live upload ≤ 2× the
//! batch's size, and memory given back afterwards.
use hodos::engine::artifact::Artifact;
use hodos::engine::build::{build, Quiet, Source};
use hodos_test_support::region_table;
use std::io::{BufRead, BufReader, Write};
use std::net::SocketAddr;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

const TOKEN: &str = "upload-memory-token";

/// `VmRSS` and `VmHWM` of a process, MiB.
fn mem(pid: u32) -> (f64, f64) {
    let s = std::fs::read_to_string(format!("/proc/{pid}/status")).unwrap_or_default();
    let kib = |key: &str| -> f64 {
        s.lines()
            .find(|l| l.starts_with(key))
            .and_then(|l| l.split_whitespace().nth(1))
            .and_then(|v| v.parse::<f64>().ok())
            .unwrap_or(f64::NAN)
    };
    (kib("VmRSS:") / 1024.0, kib("VmHWM:") / 1024.0)
}

/// Resets the process's peak (`VmHWM`) to its current resident size.
fn reset_peak(pid: u32) -> bool {
    std::fs::OpenOptions::new()
        .write(true)
        .open(format!("/proc/{pid}/clear_refs"))
        .and_then(|mut f| f.write_all(b"5"))
        .is_ok()
}

fn addr_after(line: &str, key: &str) -> Option<SocketAddr> {
    let at = line.find(key)? + key.len();
    let s: String = line[at..]
        .chars()
        .take_while(|c| c.is_ascii_digit() || *c == '.' || *c == ':')
        .collect();
    s.parse().ok()
}

/// Starts the server; its admin and public addresses once it serves.
fn start(bin: &Path, config: &Path) -> (Child, SocketAddr, SocketAddr) {
    let mut child = Command::new(bin)
        .args(["serve", "--config", config.to_str().unwrap()])
        .env("HODOS_LOG", "info")
        .env("NO_COLOR", "1")
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap_or_else(|e| panic!("{}: {e} (build it: cargo build --release)", bin.display()));
    let err = child.stderr.take().unwrap();
    let (tx, rx) = std::sync::mpsc::channel();
    std::thread::spawn(move || {
        for line in BufReader::new(err).lines() {
            let Ok(line) = line else { break };
            if line.contains("serving") {
                if let (Some(p), Some(a)) =
                    (addr_after(&line, "public="), addr_after(&line, "admin="))
                {
                    let _ = tx.send((p, a));
                }
            }
        }
    });
    match rx.recv_timeout(Duration::from_secs(300)) {
        Ok((p, a)) => (child, p, a),
        Err(_) => {
            let _ = child.kill();
            let _ = child.wait();
            panic!("the server did not start");
        }
    }
}

/// One admin request; status and body text.
async fn admin(
    c: &reqwest::Client,
    addr: SocketAddr,
    method: reqwest::Method,
    path: &str,
    body: Option<(&str, Vec<u8>)>,
) -> (u16, String) {
    let mut r = c
        .request(method, format!("http://{addr}{path}"))
        .bearer_auth(TOKEN);
    if let Some((ct, b)) = body {
        r = r.header("content-type", ct).body(b);
    }
    let resp = r.send().await.expect("admin request");
    (
        resp.status().as_u16(),
        resp.text().await.unwrap_or_default(),
    )
}

/// Sends one upload while a thread samples the server's RSS every 5 ms;
/// prints before / peak (`VmHWM` and sampled) / 5 s after, in MiB.
#[allow(clippy::too_many_arguments)]
async fn measure(
    what: &str,
    pid: u32,
    c: &reqwest::Client,
    addr: SocketAddr,
    method: reqwest::Method,
    path: &str,
    ct: &str,
    body: Vec<u8>,
) {
    let size_mib = body.len() as f64 / (1024.0 * 1024.0);
    let (before, _) = mem(pid);
    let peak_reset = reset_peak(pid);
    let stop = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
    let sampler = {
        let stop = stop.clone();
        std::thread::spawn(move || {
            let mut max = 0f64;
            while !stop.load(std::sync::atomic::Ordering::Relaxed) {
                max = max.max(mem(pid).0);
                std::thread::sleep(Duration::from_millis(5));
            }
            max
        })
    };
    let t = Instant::now();
    let (status, text) = admin(c, addr, method, path, Some((ct, body))).await;
    let took = t.elapsed().as_secs_f64();
    stop.store(true, std::sync::atomic::Ordering::Relaxed);
    let sampled = sampler.join().unwrap();
    let (_, hwm) = mem(pid);
    tokio::time::sleep(Duration::from_secs(5)).await;
    let (after, _) = mem(pid);
    let peak = if peak_reset { hwm } else { sampled };
    let summary: String = text.chars().take(160).collect();
    println!(
        "{what}: {size_mib:.1} MiB body, HTTP {status} in {took:.2} s; RSS before {before:.0} MiB, \
         peak {peak:.0} MiB (sampled {sampled:.0}), growth {:.0} MiB = {:.2}× the body; \
         5 s after {after:.0} MiB (+{:.0} MiB kept)",
        peak - before,
        (peak - before) / size_mib,
        after - before
    );
    println!("  answer: {summary}");
}

fn main() {
    let mb: f64 = std::env::args()
        .nth(1)
        .map_or(100.0, |s| s.parse().expect("MB: a number"));
    let bin = std::env::var_os("HODOS_BIN")
        .map(PathBuf::from)
        .unwrap_or_else(|| {
            let target = std::env::var_os("CARGO_TARGET_DIR")
                .map(PathBuf::from)
                .unwrap_or_else(|| PathBuf::from("target"));
            target.join("release/hodos")
        });
    let dir = tempfile::tempdir().unwrap();
    let (artifact, art) = match std::env::var_os("HODOS_ARTIFACT") {
        Some(p) => {
            let p = PathBuf::from(p);
            let art = Artifact::load(&p).expect("HODOS_ARTIFACT loads");
            (p, art)
        }
        None => {
            eprintln!("building a synthetic city of 200,000 intersections ...");
            let art = build(
                &Source::Synthetic {
                    nodes: 200_000,
                    seed: 5,
                },
                &mut Quiet,
            )
            .unwrap();
            let p = dir.path().join("city.hodos");
            art.save(&p).unwrap();
            (p, art)
        }
    };
    let g = &art.graph;
    let edges = g.num_edges();
    let (lo, hi) = g.bbox();
    let state = dir.path().join("state");
    let config = dir.path().join("hodos.toml");
    // Limits above the batch so the figure is the parse, not a refusal;
    // `max_upload_bytes` too (older builds apply it to live batches).
    let limit = ((mb * 1.5) as usize + 16) * 1024 * 1024;
    std::fs::write(
        &config,
        format!(
            "[server]\nlisten = \"127.0.0.1:0\"\n[admin]\nlisten = \"127.0.0.1:0\"\n\
             token = \"{TOKEN}\"\nmax_upload_bytes = {limit}\nbody_timeout_ms = 600000\n\
             {}",
            region_table("bench", &artifact, &state, lo, hi, 0.05)
        ),
    )
    .unwrap();
    // Older builds refuse an unknown key; newer ones need it for > 128 MiB.
    if mb > 120.0 {
        let text = std::fs::read_to_string(&config).unwrap().replace(
            "[admin]\n",
            &format!("[admin]\nmax_live_batch_bytes = {limit}\n"),
        );
        std::fs::write(&config, text).unwrap();
    }
    // The bodies, made before the server starts (the example's own memory
    // is not the server's).
    let now = chrono::Utc::now();
    let stamp = |s: i64| {
        (now - chrono::Duration::seconds(s)).to_rfc3339_opts(chrono::SecondsFormat::Millis, true)
    };
    let target = (mb * 1024.0 * 1024.0) as usize;
    let mut live = String::with_capacity(target + 1024);
    live.push('[');
    let mut i = 0usize;
    while live.len() < target {
        if i > 0 {
            live.push(',');
        }
        live.push_str(&format!(
            r#"{{"segment":{},"kmh":{:.1},"observed_at":"{}","samples":{}}}"#,
            i % edges,
            15.0 + (i % 50) as f64,
            stamp(30 + (i / edges) as i64),
            1 + i % 5
        ));
        i += 1;
    }
    live.push(']');
    let live_rows = i;
    let mut table = String::with_capacity(target + 1024);
    table.push_str("segment,hour_of_week,kmh\n");
    let mut j = 0usize;
    while table.len() < target {
        table.push_str(&format!(
            "{},{},{:.1}\n",
            j % edges,
            (j / edges) % 168,
            18.0 + (j % 40) as f64
        ));
        j += 1;
    }
    let table_rows = j;
    let warm = format!(
        r#"[{{"segment":0,"kmh":20,"observed_at":"{}","samples":1}}]"#,
        stamp(40)
    );
    drop(art);

    let (mut child, _public, admin_addr) = start(&bin, &config);
    let pid = child.id();
    let rt = tokio::runtime::Runtime::new().unwrap();
    rt.block_on(async {
        let c = reqwest::Client::builder()
            .timeout(Duration::from_secs(900))
            .build()
            .unwrap();
        // Wait for the region to load, then create the live layer with a
        // one-row batch and let the first blend settle.
        let deadline = Instant::now() + Duration::from_secs(600);
        loop {
            let (s, _) = admin(&c, admin_addr, reqwest::Method::POST, "/admin/regions/bench/live",
                Some(("application/json", warm.clone().into_bytes()))).await;
            if s == 200 {
                break;
            }
            assert!(Instant::now() < deadline, "region did not load");
            tokio::time::sleep(Duration::from_millis(500)).await;
        }
        tokio::time::sleep(Duration::from_secs(5)).await;
        println!(
            "binary {}; graph: {edges} segments; live batch {live_rows} rows, table {table_rows} rows",
            bin.display()
        );
        measure("live batch (JSON)", pid, &c, admin_addr, reqwest::Method::POST,
            "/admin/regions/bench/live", "application/json", live.into_bytes()).await;
        measure("historical table (CSV)", pid, &c, admin_addr, reqwest::Method::PUT,
            "/admin/regions/bench/historical", "text/csv", table.into_bytes()).await;
    });
    // SAFETY: plain kill(2) of our own child by its PID.
    unsafe {
        libc::kill(pid as i32, libc::SIGTERM);
    }
    let deadline = Instant::now() + Duration::from_secs(30);
    while child.try_wait().ok().flatten().is_none() {
        if Instant::now() > deadline {
            let _ = child.kill();
            break;
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    let _ = child.wait();
}
