//! The server under test: a separate `hodos serve` process the tool starts
//! and stops itself (the real measurement: resident memory and CPU are the
//! server's alone), hodos started in this process through
//! `hodos::http::serve` on port 0 (smoke runs: nothing to clean up), or
//! one already running at a given loopback address.
//!
//! Also: one-off HTTP calls (readiness, admin uploads) and `/proc` readings
//! of resident memory and CPU time.

use anyhow::{bail, Context};
use bytes::Bytes;
use http_body_util::{BodyExt, Full};
use hyper_util::rt::TokioIo;
use std::net::SocketAddr;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::atomic::{AtomicU32, Ordering};
use std::time::{Duration, Instant};

/// The region name the tool's configurations use.
pub const REGION: &str = "ny";

/// Pid of a server process this tool started, so the watchdog can stop it.
pub static CHILD_PID: AtomicU32 = AtomicU32::new(0);

/// Pid of a noisy-neighbour process this tool started (`beside`), so the
/// watchdog and the signal handler can stop it too.
pub static NEIGHBOUR_PID: AtomicU32 = AtomicU32::new(0);

/// Connections the public listener of a server this tool configures holds
/// at once: room for the held-sockets run (200 stalled bodies and 500 idle
/// sockets beside a 32-connection pool) and the 64-connection overload pool,
/// independent of the machine's descriptor limit (the server raises its
/// soft limit to the hard one at start).
pub const MAX_CONNECTIONS: usize = 2048;

/// Where the server is and what is known about it.
#[derive(Debug, Clone)]
pub struct ServerInfo {
    pub public: SocketAddr,
    pub admin: Option<SocketAddr>,
    pub token: Option<String>,
    pub region: String,
    /// Process whose memory and CPU are read (the server's, or ours when in
    /// process).
    pub pid: Option<u32>,
    pub in_process: bool,
    /// Age after which the server ignores a live observation (s).
    pub live_ttl_s: f64,
}

/// One HTTP/1.1 exchange on a fresh connection.
pub async fn call(
    addr: SocketAddr,
    method: &str,
    path: &str,
    token: Option<&str>,
    content_type: &str,
    body: Bytes,
    timeout: Duration,
) -> anyhow::Result<(u16, Bytes)> {
    let fut = async {
        let stream = tokio::net::TcpStream::connect(addr).await?;
        let _ = stream.set_nodelay(true);
        let (mut sender, conn) =
            hyper::client::conn::http1::handshake(TokioIo::new(stream)).await?;
        tokio::spawn(async move {
            let _ = conn.await;
        });
        let mut req = hyper::Request::builder()
            .method(method)
            .uri(path)
            .header(hyper::header::HOST, addr.to_string())
            .header(hyper::header::CONTENT_TYPE, content_type);
        if let Some(t) = token {
            req = req.header(hyper::header::AUTHORIZATION, format!("Bearer {t}"));
        }
        let resp = sender.send_request(req.body(Full::new(body))?).await?;
        let status = resp.status().as_u16();
        let bytes = resp.into_body().collect().await?.to_bytes();
        Ok::<_, anyhow::Error>((status, bytes))
    };
    tokio::time::timeout(timeout, fut)
        .await
        .map_err(|_| anyhow::anyhow!("{method} {path} on {addr}: no answer within {timeout:?}"))?
}

/// Waits until `GET /readyz` answers 200.
pub async fn wait_ready(public: SocketAddr, limit: Duration) -> anyhow::Result<()> {
    let until = Instant::now() + limit;
    loop {
        if let Ok((200, _)) = call(
            public,
            "GET",
            "/readyz",
            None,
            "text/plain",
            Bytes::new(),
            Duration::from_secs(2),
        )
        .await
        {
            return Ok(());
        }
        if Instant::now() > until {
            bail!("the server on {public} was not ready within {limit:?}");
        }
        tokio::time::sleep(Duration::from_millis(200)).await;
    }
}

/// Resident memory and CPU time of a process.
#[derive(Debug, Clone, Copy)]
pub struct ProcStat {
    pub rss_kb: u64,
    /// Peak resident set ("high water mark").
    pub hwm_kb: u64,
    /// User + system CPU seconds.
    pub cpu_s: f64,
}

/// Reads `/proc/<pid>/status` (VmRSS, VmHWM) and `/proc/<pid>/stat`
/// (utime, stime: fields 14 and 15, in clock ticks; proc(5)).
pub fn proc_stat(pid: u32) -> Option<ProcStat> {
    let status = std::fs::read_to_string(format!("/proc/{pid}/status")).ok()?;
    let field = |name: &str| -> Option<u64> {
        status
            .lines()
            .find(|l| l.starts_with(name))
            .and_then(|l| l.split_whitespace().nth(1))
            .and_then(|v| v.parse().ok())
    };
    let stat = std::fs::read_to_string(format!("/proc/{pid}/stat")).ok()?;
    // The command name (field 2) may hold spaces: count after its ')'.
    let rest = &stat[stat.rfind(')')? + 2..];
    let f: Vec<&str> = rest.split_whitespace().collect();
    // `rest` starts at field 3 (state), so field n is f[n - 3].
    let ticks = f.get(11)?.parse::<u64>().ok()? + f.get(12)?.parse::<u64>().ok()?;
    // SAFETY: sysconf only reads a system constant.
    let hz = unsafe { libc::sysconf(libc::_SC_CLK_TCK) }.max(1) as f64;
    Some(ProcStat {
        rss_kb: field("VmRSS:")?,
        hwm_kb: field("VmHWM:")?,
        cpu_s: ticks as f64 / hz,
    })
}

/// A free loopback port (bound and released; a tiny race is accepted).
fn free_port() -> anyhow::Result<u16> {
    let l = std::net::TcpListener::bind("127.0.0.1:0")?;
    Ok(l.local_addr()?.port())
}

/// A random admin token for a server this tool starts.
pub fn random_token() -> String {
    use rand::Rng;
    let mut r = rand::rng();
    format!("load-{:016x}{:016x}", r.random::<u64>(), r.random::<u64>())
}

/// The service configuration the tool writes for one region.
#[allow(clippy::too_many_arguments)]
pub fn config_text(
    public: SocketAddr,
    admin: SocketAddr,
    artifact: &Path,
    state_dir: &Path,
    lo: hodos::engine::geo::LatLon,
    hi: hodos::engine::geo::LatLon,
    time_zone: &str,
    live_ttl_s: f64,
) -> String {
    let region = hodos_test_support::region_table(REGION, artifact, state_dir, lo, hi, 0.01);
    format!(
        r#"# Written by hodos-load for one run; defaults everywhere else.
[server]
listen = "{public}"
# 200 stalled bodies + 500 idle sockets beside the load's own pool fit.
max_connections = {MAX_CONNECTIONS}
[admin]
listen = "{admin}"
# token: from the HODOS_ADMIN_TOKEN environment variable
[live]
ttl_s = {live_ttl_s}
{region}time_zone = "{time_zone}"
"#
    )
}

/// A `hodos serve` child process; stopped (SIGTERM, then SIGKILL) on drop.
pub struct Spawned {
    child: Child,
    pub info: ServerInfo,
    pub config_path: PathBuf,
    pub log_path: PathBuf,
}

/// Starts `bin serve --config <written config>` on two free loopback
/// ports, with a fresh state directory under `out`, and waits until ready.
#[allow(clippy::too_many_arguments)]
pub async fn spawn_external(
    bin: &Path,
    artifact: &Path,
    lo: hodos::engine::geo::LatLon,
    hi: hodos::engine::geo::LatLon,
    time_zone: &str,
    live_ttl_s: f64,
    env: &[(String, String)],
    out: &Path,
) -> anyhow::Result<Spawned> {
    let public: SocketAddr = ([127, 0, 0, 1], free_port()?).into();
    let admin: SocketAddr = ([127, 0, 0, 1], free_port()?).into();
    // Absolute: relative paths in a configuration are read against the
    // configuration file's own folder.
    let out =
        &std::fs::canonicalize(out).with_context(|| format!("output folder {}", out.display()))?;
    let state = out.join("server-state");
    let _ = std::fs::remove_dir_all(&state);
    std::fs::create_dir_all(&state).with_context(|| format!("creating {}", state.display()))?;
    let artifact = std::fs::canonicalize(artifact)
        .with_context(|| format!("artifact {}", artifact.display()))?;
    let config_path = out.join("hodos-server.toml");
    std::fs::write(
        &config_path,
        config_text(
            public, admin, &artifact, &state, lo, hi, time_zone, live_ttl_s,
        ),
    )?;
    let log_path = out.join("hodos-server.log");
    let log = std::fs::File::create(&log_path)?;
    let token = random_token();
    let mut cmd = Command::new(bin);
    for (k, v) in env {
        cmd.env(k, v);
    }
    let child = cmd
        .arg("serve")
        .arg("--config")
        .arg(&config_path)
        .arg("--strict")
        .env("HODOS_ADMIN_TOKEN", &token)
        .env("HODOS_LOG", "warn")
        .stdin(Stdio::null())
        .stdout(log.try_clone()?)
        .stderr(log)
        .spawn()
        .with_context(|| format!("starting {}", bin.display()))?;
    CHILD_PID.store(child.id(), Ordering::SeqCst);
    let mut s = Spawned {
        info: ServerInfo {
            public,
            admin: Some(admin),
            token: Some(token),
            region: REGION.into(),
            pid: Some(child.id()),
            in_process: false,
            live_ttl_s,
        },
        child,
        config_path,
        log_path,
    };
    let until = Instant::now() + Duration::from_secs(300);
    loop {
        if let Some(st) = s.child.try_wait()? {
            bail!(
                "{} exited with {st} before becoming ready; see {}",
                bin.display(),
                s.log_path.display()
            );
        }
        if wait_ready(public, Duration::from_millis(1)).await.is_ok() {
            break;
        }
        if Instant::now() > until {
            bail!(
                "{} not ready within 300 s; see {}",
                bin.display(),
                s.log_path.display()
            );
        }
        tokio::time::sleep(Duration::from_millis(250)).await;
    }
    Ok(s)
}

impl Spawned {
    /// The child's pid (0 if unknown).
    pub fn child_id(&self) -> u32 {
        self.info.pid.unwrap_or(0)
    }

    /// SIGTERM, up to 15 s for the drain, then SIGKILL.
    pub fn stop(&mut self) {
        if let Ok(Some(_)) = self.child.try_wait() {
            CHILD_PID.store(0, Ordering::SeqCst);
            return;
        }
        let pid = self.child.id() as libc::pid_t;
        // SAFETY: kill(2) on the pid of our own child process.
        unsafe {
            libc::kill(pid, libc::SIGTERM);
        }
        let until = Instant::now() + Duration::from_secs(15);
        while Instant::now() < until {
            if let Ok(Some(_)) = self.child.try_wait() {
                CHILD_PID.store(0, Ordering::SeqCst);
                return;
            }
            std::thread::sleep(Duration::from_millis(50));
        }
        let _ = self.child.kill();
        let _ = self.child.wait();
        CHILD_PID.store(0, Ordering::SeqCst);
    }
}

impl Drop for Spawned {
    fn drop(&mut self) {
        self.stop();
    }
}

/// hodos served from inside this process on 127.0.0.1 port 0.
pub struct InProcess {
    pub info: ServerInfo,
    stop: Option<tokio::sync::oneshot::Sender<()>>,
    task: Option<tokio::task::JoinHandle<()>>,
}

/// Opens the configured regions and serves them on two port-0 listeners.
pub async fn start_in_process(
    cfg: hodos::config::Config,
    token: String,
) -> anyhow::Result<InProcess> {
    let ttl = cfg.live.ttl_s;
    let state = hodos::http::AppState::open(cfg).await;
    if let Some((name, why)) = state.service.degraded().first() {
        bail!("region {name} failed to load: {why}");
    }
    let region = state
        .catalog
        .regions
        .first()
        .map(|r| r.name.clone())
        .unwrap_or_default();
    let p = hodos::http::bind(([127, 0, 0, 1], 0).into()).await?;
    let a = hodos::http::bind(([127, 0, 0, 1], 0).into()).await?;
    let (public, admin) = (p.local_addr()?, a.local_addr()?);
    let (tx, rx) = tokio::sync::oneshot::channel::<()>();
    let task = tokio::spawn(async move {
        let _ = hodos::server::run(state, p, a, async move {
            let _ = rx.await;
        })
        .await;
    });
    wait_ready(public, Duration::from_secs(30)).await?;
    Ok(InProcess {
        info: ServerInfo {
            public,
            admin: Some(admin),
            token: Some(token),
            region,
            pid: Some(std::process::id()),
            in_process: true,
            live_ttl_s: ttl,
        },
        stop: Some(tx),
        task: Some(task),
    })
}

impl InProcess {
    /// Signals shutdown and waits (bounded) for the drain.
    pub async fn stop(mut self) {
        if let Some(tx) = self.stop.take() {
            let _ = tx.send(());
        }
        if let Some(t) = self.task.take() {
            let _ = tokio::time::timeout(Duration::from_secs(15), t).await;
        }
    }
}

/// CPU seconds of the whole machine so far from `/proc/stat`'s first line
/// (proc(5)): busy (user, nice, system, irq, softirq; guest time is inside
/// user) and stolen (time the hypervisor ran something else while this
/// machine's virtual CPUs wanted to run).
pub fn machine_cpu() -> Option<(f64, f64)> {
    let s = std::fs::read_to_string("/proc/stat").ok()?;
    let line = s.lines().next()?;
    let v: Vec<u64> = line
        .split_whitespace()
        .skip(1)
        .filter_map(|x| x.parse().ok())
        .collect();
    if v.len() < 8 {
        return None;
    }
    let busy = v[0] + v[1] + v[2] + v[5] + v[6];
    // SAFETY: sysconf only reads a system constant.
    let hz = unsafe { libc::sysconf(libc::_SC_CLK_TCK) }.max(1) as f64;
    Some((busy as f64 / hz, v[7] as f64 / hz))
}

/// Busy plus stolen CPU seconds so far.
pub fn machine_busy_s() -> Option<f64> {
    machine_cpu().map(|(b, s)| b + s)
}

/// The 1-minute load average.
pub fn loadavg_1m() -> f64 {
    std::fs::read_to_string("/proc/loadavg")
        .ok()
        .and_then(|s| s.split_whitespace().next().and_then(|v| v.parse().ok()))
        .unwrap_or(f64::NAN)
}

/// Sum and count of one labelled series of a Prometheus histogram, read
/// from `/metrics` text: `(sum, count)` of `name` with `label` in its label
/// set.
pub fn prom_sum_count(text: &str, name: &str, label: &str) -> (f64, f64) {
    let pick = |suffix: &str| -> f64 {
        text.lines()
            .filter(|l| l.starts_with(&format!("{name}{suffix}")) && l.contains(label))
            .filter_map(|l| l.rsplit_once(' ').and_then(|(_, v)| v.parse::<f64>().ok()))
            .sum()
    };
    (pick("_sum"), pick("_count"))
}

/// Waits (at most `limit`) for a one-second window in which the machine's
/// busy CPU stays under `cores` cores; returns the last window's figure.
pub async fn wait_quiet(limit: Duration, cores: f64) -> f64 {
    let until = Instant::now() + limit;
    loop {
        let (a, t) = (machine_busy_s().unwrap_or(0.0), Instant::now());
        tokio::time::sleep(Duration::from_secs(1)).await;
        let busy = (machine_busy_s().unwrap_or(0.0) - a) / t.elapsed().as_secs_f64();
        if busy < cores || Instant::now() >= until {
            return busy;
        }
    }
}
