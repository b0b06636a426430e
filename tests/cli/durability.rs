//! Crash and restart behaviour of the real binary (`hodos serve` on
//! 127.0.0.1 port 0, stopped by its PID): acknowledged live batches and
//! table uploads survive `kill -9` and SIGTERM; which historical table
//! serves (the newer of the configured file and the last upload) holds
//! across reloads and restarts; a damaged saved table is refused loudly
//! and the configured file serves instead. Every wait here is bounded.
//!
//! Checks are against the documented file format (written out by hand
//! here), the CRC-32 of the table bytes (the published CRC-32/ISO-HDLC, as
//! `crc32fast` computes it) and counts of what the test itself posted.

use hodos_test_service::service::{city, config_text, TOKEN};
use hodos_test_service::tables::every_edge_at_ten;
use hodos_testkit::observation;
use serde_json::Value;
use std::io::{BufRead, BufReader};
use std::net::SocketAddr;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::{mpsc, Arc, Mutex};
use std::time::{Duration, Instant};

/// A running `hodos serve`.
struct Proc {
    child: Child,
    public: SocketAddr,
    admin: SocketAddr,
    /// Every stderr line so far (ANSI colours stripped).
    logs: Arc<Mutex<Vec<String>>>,
}

fn strip_ansi(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    let mut it = s.chars().peekable();
    while let Some(c) = it.next() {
        if c == '\u{1b}' {
            for d in it.by_ref() {
                if d.is_ascii_alphabetic() {
                    break;
                }
            }
        } else {
            out.push(c);
        }
    }
    out
}

fn addr_after(line: &str, key: &str) -> Option<SocketAddr> {
    let at = line.find(key)? + key.len();
    let s: String = line[at..]
        .chars()
        .take_while(|c| c.is_ascii_digit() || *c == '.' || *c == ':')
        .collect();
    s.parse().ok()
}

/// Writes the configuration for one region over the fixture city with
/// state in `state` and, if given, the configured historical file.
fn write_config(dir: &Path, state: &Path, historical: Option<&Path>) -> PathBuf {
    let mut text = config_text(&city().artifact, state, "")
        .replace(
            "[server]\n",
            "[server]\nlisten = \"127.0.0.1:0\"\ndrain_seconds = 2\n",
        )
        .replace("[admin]\n", "[admin]\nlisten = \"127.0.0.1:0\"\n");
    if let Some(h) = historical {
        text.push_str(&format!("historical = \"{}\"\n", h.display()));
    }
    let path = dir.join("hodos.toml");
    std::fs::write(&path, text).unwrap();
    path
}

/// Starts the binary and waits (at most 120 s) for its "serving" line.
async fn start(config: &Path) -> Proc {
    let mut child = Command::new(env!("CARGO_BIN_EXE_hodos"))
        .args(["serve", "--config", config.to_str().unwrap()])
        .env("HODOS_LOG", "info")
        .env("NO_COLOR", "1")
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let logs = Arc::new(Mutex::new(Vec::new()));
    let (tx, rx) = mpsc::channel();
    let (err, sink) = (child.stderr.take().unwrap(), logs.clone());
    std::thread::spawn(move || {
        for line in BufReader::new(err).lines() {
            let Ok(line) = line else { break };
            let line = strip_ansi(&line);
            if line.contains("serving") {
                if let (Some(p), Some(a)) =
                    (addr_after(&line, "public="), addr_after(&line, "admin="))
                {
                    let _ = tx.send((p, a));
                }
            }
            sink.lock().unwrap().push(line);
        }
    });
    match tokio::task::block_in_place(|| rx.recv_timeout(Duration::from_secs(120))) {
        Ok((public, admin)) => {
            let p = Proc {
                child,
                public,
                admin,
                logs,
            };
            p.wait_loaded().await;
            p
        }
        Err(_) => {
            let _ = child.kill();
            let _ = child.wait();
            panic!("no serving line: {:?}", logs.lock().unwrap());
        }
    }
}

impl Proc {
    /// The listeners open before the regions load: waits (at most 120 s)
    /// until `/readyz` no longer reports a region `loading`.
    async fn wait_loaded(&self) {
        let deadline = Instant::now() + Duration::from_secs(120);
        loop {
            let (_, v) = self.ready().await;
            let loading = v["regions"]
                .as_array()
                .unwrap()
                .iter()
                .any(|r| r["state"] == "loading");
            if !loading {
                return;
            }
            assert!(Instant::now() < deadline, "regions still loading: {v}");
            tokio::time::sleep(Duration::from_millis(50)).await;
        }
    }

    fn pid(&self) -> i32 {
        self.child.id() as i32
    }

    /// `kill -9` of this process, then waits for it.
    fn kill9(mut self) {
        self.child.kill().unwrap();
        self.child.wait().unwrap();
    }

    /// SIGTERM, then waits (at most 30 s) for a clean exit.
    fn sigterm(mut self) {
        // SAFETY: plain kill(2) on the PID of our own child.
        assert_eq!(unsafe { libc::kill(self.pid(), libc::SIGTERM) }, 0);
        let deadline = Instant::now() + Duration::from_secs(30);
        loop {
            if let Some(st) = self.child.try_wait().unwrap() {
                assert!(st.success(), "clean exit after SIGTERM: {st}");
                return;
            }
            if Instant::now() > deadline {
                let _ = self.child.kill();
                panic!("did not stop within 30 s of SIGTERM");
            }
            std::thread::sleep(Duration::from_millis(20));
        }
    }

    fn logs(&self) -> Vec<String> {
        self.logs.lock().unwrap().clone()
    }

    async fn admin(&self, method: &str, path: &str, body: Option<(&str, Vec<u8>)>) -> (u16, Value) {
        let url = format!("http://{}{path}", self.admin);
        let c = client();
        let mut req = match method {
            "GET" => c.get(url),
            "PUT" => c.put(url),
            _ => c.post(url),
        }
        .bearer_auth(TOKEN);
        if let Some((ct, b)) = body {
            req = req.header("content-type", ct).body(b);
        }
        let r = req.send().await.unwrap();
        let code = r.status().as_u16();
        (code, r.json().await.unwrap_or(Value::Null))
    }

    async fn status(&self) -> Value {
        let (code, v) = self.admin("GET", "/admin/status", None).await;
        assert_eq!(code, 200);
        v["regions"][0].clone()
    }

    async fn ready(&self) -> (u16, Value) {
        let r = client()
            .get(format!("http://{}/readyz", self.public))
            .send()
            .await
            .unwrap();
        (r.status().as_u16(), r.json().await.unwrap())
    }

    async fn metrics(&self) -> String {
        client()
            .get(format!("http://{}/metrics", self.public))
            .send()
            .await
            .unwrap()
            .text()
            .await
            .unwrap()
    }

    async fn upload(&self, csv: &str) -> Value {
        let (code, v) = self
            .admin(
                "PUT",
                "/admin/regions/testcity/historical",
                Some(("text/csv", csv.as_bytes().to_vec())),
            )
            .await;
        assert_eq!(code, 200, "upload accepted: {v}");
        v
    }

    async fn post_live(&self, batch: &[Value]) {
        let (code, v) = self
            .admin(
                "POST",
                "/admin/regions/testcity/live",
                Some(("application/json", serde_json::to_vec(batch).unwrap())),
            )
            .await;
        assert_eq!(code, 200, "live batch accepted: {v}");
    }

    async fn reload(&self) -> Value {
        let (code, v) = self
            .admin("POST", "/admin/regions/testcity/reload", None)
            .await;
        assert_eq!(code, 200, "{v}");
        v
    }
}

impl Drop for Proc {
    fn drop(&mut self) {
        if let Ok(None) = self.child.try_wait() {
            let _ = self.child.kill();
            let _ = self.child.wait();
        }
    }
}

fn client() -> reqwest::Client {
    reqwest::Client::builder()
        .timeout(Duration::from_secs(30))
        .build()
        .unwrap()
}

/// The version the service gives a table: CRC-32 of its bytes and their
/// length (CRC-32/ISO-HDLC, check value cbf43926 for "123456789").
fn version_of(bytes: &[u8]) -> String {
    assert_eq!(crc32fast::hash(b"123456789"), 0xcbf4_3926);
    format!("{:08x}-{}", crc32fast::hash(bytes), bytes.len())
}

/// Observations now on distinct (from, to) pairs of the city, split in
/// two disjoint batches of `n` each.
fn two_batches(n: usize) -> (Vec<Value>, Vec<Value>) {
    let now = chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    let mut seen = std::collections::HashSet::new();
    let pairs: Vec<(u64, u64)> = city()
        .edges
        .iter()
        .copied()
        .filter(|p| seen.insert(*p))
        .take(2 * n)
        .collect();
    let obs = |ps: &[(u64, u64)]| -> Vec<Value> {
        ps.iter()
            .map(|&(f, t)| observation(f, t, 9.0, &now, 3))
            .collect()
    };
    (obs(&pairs[..n]), obs(&pairs[n..]))
}

/// Waits (at most 10 s) until the serving live blend holds at least `n`
/// fresh edges; returns how many it holds.
async fn live_edges_at_least(p: &Proc, n: u64) -> u64 {
    let deadline = Instant::now() + Duration::from_secs(10);
    loop {
        let got = p.status().await["live_edges"].as_u64().unwrap();
        if got >= n || Instant::now() > deadline {
            return got;
        }
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
}

/// Observation 8: batch A is saved with the live layer; batch B, answered
/// 200 right after, is within the 2 s save interval and so only in the
/// write-ahead log when the process dies.
async fn live_batch_survives(stop: impl FnOnce(Proc)) {
    let dir = tempfile::tempdir().unwrap();
    let state = dir.path().join("state");
    let cfg = write_config(dir.path(), &state, None);
    let (a, b) = two_batches(40);
    let p = start(&cfg).await;
    p.post_live(&a).await;
    let n_a = live_edges_at_least(&p, a.len() as u64).await;
    assert!(n_a >= a.len() as u64, "batch A blended: {n_a}");
    p.post_live(&b).await;
    stop(p);
    let p = start(&cfg).await;
    let n = live_edges_at_least(&p, n_a + b.len() as u64).await;
    assert!(
        n >= n_a + b.len() as u64,
        "both acknowledged batches served after restart: {n} < {n_a} + {}",
        b.len()
    );
    let (code, ready) = p.ready().await;
    assert_eq!(
        (code, ready["regions"][0]["state"].as_str()),
        (200, Some("serving"))
    );
    p.kill9();
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn live_batch_survives_kill_9() {
    live_batch_survives(Proc::kill9).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn live_batch_survives_sigterm() {
    live_batch_survives(Proc::sigterm).await;
}

/// A crash while a batch was being logged leaves a torn last record: it is
/// ignored with a log line, and what was acknowledged before it serves.
#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn torn_log_tail_is_ignored_with_a_log_line() {
    let dir = tempfile::tempdir().unwrap();
    let state = dir.path().join("state");
    let cfg = write_config(dir.path(), &state, None);
    let (a, b) = two_batches(30);
    let p = start(&cfg).await;
    p.post_live(&a).await;
    let n_a = live_edges_at_least(&p, a.len() as u64).await;
    p.post_live(&b).await;
    p.kill9();
    // Half a record header: a length with no checksum or payload.
    let log = state.join("live.wal");
    let mut bytes = std::fs::read(&log).expect("the log holds batch B");
    bytes.extend_from_slice(&[200, 0, 0]);
    std::fs::write(&log, bytes).unwrap();
    let p = start(&cfg).await;
    let n = live_edges_at_least(&p, n_a + b.len() as u64).await;
    assert!(n >= n_a + b.len() as u64, "{n}");
    assert!(
        p.logs()
            .iter()
            .any(|l| l.contains("WARN") && l.contains("torn last record ignored")),
        "{:?}",
        p.logs()
    );
    p.kill9();
}

/// An uploaded table answered 200 survives `kill -9` right after.
#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn table_upload_survives_kill_9() {
    let dir = tempfile::tempdir().unwrap();
    let state = dir.path().join("state");
    let cfg = write_config(dir.path(), &state, None);
    let t = every_edge_at_ten(23.0);
    let p = start(&cfg).await;
    let v = p.upload(&t).await;
    assert_eq!(v["version"], version_of(t.as_bytes()));
    p.kill9();
    let p = start(&cfg).await;
    let s = p.status().await;
    assert_eq!(s["historical_version"], version_of(t.as_bytes()));
    assert_eq!(s["historical_source"], "upload");
    p.kill9();
}

/// Observation 6: the newer of the configured file and the last upload
/// serves, on reload and across restarts; a reload that changes nothing
/// says so and keeps the table's age.
#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn newer_of_configured_file_and_upload_serves() {
    let dir = tempfile::tempdir().unwrap();
    let state = dir.path().join("state");
    let configured = dir.path().join("historical.csv");
    let (ta, tb, tc, td) = (
        every_edge_at_ten(20.0),
        every_edge_at_ten(25.0),
        every_edge_at_ten(30.0),
        every_edge_at_ten(35.0),
    );
    std::fs::write(&configured, &ta).unwrap();
    let cfg = write_config(dir.path(), &state, Some(&configured));
    let p = start(&cfg).await;
    let s = p.status().await;
    assert_eq!(s["historical_version"], version_of(ta.as_bytes()));
    p.upload(&tb).await;
    assert_eq!(
        p.status().await["historical_version"],
        version_of(tb.as_bytes())
    );
    // The operator edits the configured file after the upload.
    std::thread::sleep(Duration::from_millis(20));
    std::fs::write(&configured, &tc).unwrap();
    let r = p.reload().await;
    let s = p.status().await;
    assert_eq!(s["historical_version"], version_of(tc.as_bytes()), "{s}");
    assert_eq!(r["outcome"], "accepted", "{r}");
    assert_eq!(s["historical_source"], "configured");
    assert_eq!(s["historical_path"], configured.display().to_string());
    let (age1, gen1) = (
        s["historical_age_s"].as_f64().unwrap(),
        s["generation"].as_u64().unwrap(),
    );
    tokio::time::sleep(Duration::from_millis(300)).await;
    let r = p.reload().await;
    assert_eq!(r["outcome"], "unchanged", "{r}");
    let s = p.status().await;
    assert!(
        s["historical_age_s"].as_f64().unwrap() >= age1 + 0.25,
        "age kept: {s}"
    );
    assert_eq!(s["generation"].as_u64().unwrap(), gen1, "nothing published");
    // Across a restart the same rule: the edited file is newer.
    p.sigterm();
    let p = start(&cfg).await;
    let s = p.status().await;
    assert_eq!(s["historical_version"], version_of(tc.as_bytes()), "{s}");
    assert_eq!(s["historical_source"], "configured");
    // A bad edit of the configured file: refused, the other candidate (the
    // earlier upload) serves and the region reports itself degraded.
    std::thread::sleep(Duration::from_millis(20));
    std::fs::write(&configured, hodos_test_service::tables::corrupt()).unwrap();
    p.reload().await;
    let s = p.status().await;
    assert_eq!(s["historical_version"], version_of(tb.as_bytes()), "{s}");
    assert_eq!(s["historical_source"], "upload");
    assert_eq!(s["historical_problems"].as_array().unwrap().len(), 1, "{s}");
    let (code, ready) = p.ready().await;
    assert_eq!(
        (code, ready["regions"][0]["state"].as_str()),
        (503, Some("degraded"))
    );
    // A later upload is newer than the file, also after a crash.
    p.upload(&td).await;
    assert_eq!(p.ready().await.0, 200);
    p.kill9();
    let p = start(&cfg).await;
    let s = p.status().await;
    assert_eq!(s["historical_version"], version_of(td.as_bytes()), "{s}");
    assert_eq!(s["historical_source"], "upload");
    p.kill9();
}

/// The saved-file envelope as documented in `speeds::persist`, by hand.
fn envelope(kind: &str, payload: &[u8]) -> Vec<u8> {
    let mut out = format!(
        "hodos-speeds 1 {kind} {} {:08x}\n",
        payload.len(),
        crc32fast::hash(payload)
    )
    .into_bytes();
    out.extend_from_slice(payload);
    out
}

/// Observation 7: a truncated, bit-flipped, empty or wrong-kind saved
/// table (newer than the configured file) is refused: a warn log line,
/// the region status, a counter and `/readyz` (503, `degraded`) say so,
/// and the configured file serves. An upload then clears it.
#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn damaged_saved_table_is_refused_loudly() {
    let ta = every_edge_at_ten(20.0);
    let tb = every_edge_at_ten(27.0);
    let good = envelope("historical", tb.as_bytes());
    let mut flipped = good.clone();
    let mid = good.len() - tb.len() / 2;
    flipped[mid] ^= 0x04;
    let cases: Vec<(&str, Vec<u8>)> = vec![
        ("truncated", good[..good.len() - 100].to_vec()),
        ("bit-flipped", flipped),
        ("empty", Vec::new()),
        ("wrong kind", envelope("live", b"[]")),
    ];
    for (i, (case, bytes)) in cases.into_iter().enumerate() {
        let dir = tempfile::tempdir().unwrap();
        let state = dir.path().join("state");
        std::fs::create_dir_all(&state).unwrap();
        let configured = dir.path().join("historical.csv");
        std::fs::write(&configured, &ta).unwrap();
        std::thread::sleep(Duration::from_millis(20));
        std::fs::write(state.join("historical.table"), &bytes).unwrap();
        let cfg = write_config(dir.path(), &state, Some(&configured));
        let p = start(&cfg).await;
        let s = p.status().await;
        assert_eq!(
            s["historical_version"],
            version_of(ta.as_bytes()),
            "{case}: configured file serves: {s}"
        );
        assert_eq!(s["historical_source"], "configured", "{case}");
        let problems = s["historical_problems"].as_array().unwrap();
        assert!(
            problems.len() == 1 && problems[0].as_str().unwrap().contains("corrupt"),
            "{case}: {s}"
        );
        let (code, ready) = p.ready().await;
        assert_eq!(code, 503, "{case}: {ready}");
        assert_eq!(ready["regions"][0]["state"], "degraded", "{case}");
        assert!(ready["regions"][0]["reason"]
            .as_str()
            .unwrap()
            .contains("historical.table"));
        let m = p.metrics().await;
        assert!(
            m.lines()
                .any(|l| l.starts_with("hodos_state_files_refused_total")
                    && l.contains("file=\"historical\"")
                    && l.ends_with(" 1")),
            "{case}: {m}"
        );
        assert!(
            p.logs()
                .iter()
                .any(|l| l.contains("WARN") && l.contains("saved state file refused")),
            "{case}: {:?}",
            p.logs()
        );
        if i == 0 {
            // An accepted upload replaces the damaged file: serving again.
            p.upload(&tb).await;
            let (code, ready) = p.ready().await;
            assert_eq!(
                (code, ready["regions"][0]["state"].as_str()),
                (200, Some("serving"))
            );
        }
        p.kill9();
    }
}

/// Readiness while regions load: the state exists before any region is
/// loaded (what `hodos serve` listens with), and `/readyz` says `loading`
/// with 503 until the load finishes, then `serving` with 200.
#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn readiness_reports_loading_until_loaded() {
    let dir = tempfile::tempdir().unwrap();
    let st = hodos::http::AppState::unloaded(hodos_test_service::service::config(dir.path(), ""));
    let a = hodos::http::app(st.clone());
    let r = hodos_test_service::http::send(&a, "GET", "/readyz", None, vec![], None).await;
    assert_eq!(r.status, 503, "{}", r.text);
    assert_eq!(r.json()["regions"][0]["state"], "loading");
    let h = hodos_test_service::http::send(&a, "GET", "/healthz", None, vec![], None).await;
    assert_eq!(h.status, 200);
    st.service.load_regions().await;
    let r = hodos_test_service::http::send(&a, "GET", "/readyz", None, vec![], None).await;
    assert_eq!(r.status, 200, "{}", r.text);
    assert_eq!(r.json()["regions"][0]["state"], "serving");
    assert_eq!(r.json()["status"], "ready");
}
