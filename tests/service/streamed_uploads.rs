//! Uploads parsed as streams, through a real server on 127.0.0.1 port 0:
//! a live batch over `admin.max_live_batch_bytes` gets 413 naming the
//! setting (declared by `Content-Length`, or found mid-stream in a chunked
//! body) and changes nothing; a batch of a few MB with tens of thousands
//! of rows is accepted with exactly the counts its construction implies
//! (rows, bad rows by kind at their index or line, superseded rows, edges
//! held), in JSON and in CSV; duplicate keys are still refused; a table
//! streamed in chunks gets the version of its bytes (CRC-32/ISO-HDLC and
//! length, as `crc32fast` computes it).
//!
//! The expected figures come from how the test builds each batch, not
//! from the parser: segment `i mod E` at a time that gets older each
//! round through the E segments, so every row after the first round is
//! superseded; bad rows at chosen positions.

use hodos::config::Config;
use hodos::http::{bind, AppState};
use hodos::server::run as serve;
use hodos_test_service::service::{city, config_text, TOKEN};
use serde_json::{json, Value};
use std::net::SocketAddr;
use std::time::Duration;
use tokio::io::{AsyncReadExt, AsyncWriteExt};

/// The live-batch limit of these tests: 4 MiB.
const LIMIT: usize = 4 * 1024 * 1024;

struct Server {
    admin: SocketAddr,
    stop: Option<tokio::sync::oneshot::Sender<()>>,
    task: tokio::task::JoinHandle<()>,
}

async fn start(state_dir: &std::path::Path) -> Server {
    let text = config_text(&city().artifact, state_dir, "").replace(
        "[admin]\n",
        &format!("[admin]\nmax_live_batch_bytes = {LIMIT}\n"),
    );
    let cfg = Config::parse(&text).unwrap();
    cfg.validate().unwrap();
    let state = AppState::open(cfg).await;
    assert!(
        state.service.degraded().is_empty(),
        "{:?}",
        state.service.degraded()
    );
    let p = bind("127.0.0.1:0".parse().unwrap()).await.unwrap();
    let a = bind("127.0.0.1:0".parse().unwrap()).await.unwrap();
    let admin = a.local_addr().unwrap();
    let (tx, rx) = tokio::sync::oneshot::channel::<()>();
    let task = tokio::spawn(async move {
        serve(state, p, a, async move {
            let _ = rx.await;
        })
        .await
        .unwrap();
    });
    Server {
        admin,
        stop: Some(tx),
        task,
    }
}

impl Server {
    async fn stop(mut self) {
        if let Some(tx) = self.stop.take() {
            let _ = tx.send(());
        }
        tokio::time::timeout(Duration::from_secs(20), self.task)
            .await
            .expect("drains in time")
            .unwrap();
    }

    async fn post(&self, path: &str, ct: &str, body: Vec<u8>) -> (u16, Value) {
        let r = client()
            .post(format!("http://{}{path}", self.admin))
            .bearer_auth(TOKEN)
            .header("content-type", ct)
            .body(body)
            .send()
            .await
            .unwrap();
        let status = r.status().as_u16();
        (status, r.json().await.unwrap())
    }

    /// The region's fresh live edges once the serving snapshot shows
    /// `want` of them (live batches reach the snapshot on the next live
    /// refresh, not with the upload's answer); what it shows after 30 s
    /// otherwise.
    async fn live_edges_become(&self, want: u64) -> u64 {
        let deadline = tokio::time::Instant::now() + Duration::from_secs(30);
        loop {
            let got = self.live_edges().await;
            if got == want || tokio::time::Instant::now() > deadline {
                return got;
            }
            tokio::time::sleep(Duration::from_millis(100)).await;
        }
    }

    async fn live_edges(&self) -> u64 {
        let s: Value = client()
            .get(format!("http://{}/admin/status", self.admin))
            .bearer_auth(TOKEN)
            .send()
            .await
            .unwrap()
            .json()
            .await
            .unwrap();
        s["regions"][0]["live_edges"].as_u64().unwrap()
    }

    /// One request with a chunked body (no `Content-Length`), written by
    /// hand (RFC 9112 §7.1); the status code and body of the answer.
    async fn post_chunked(&self, path: &str, ct: &str, body: &[u8]) -> (u16, String) {
        let mut s = tokio::net::TcpStream::connect(self.admin).await.unwrap();
        let head = format!(
            "POST {path} HTTP/1.1\r\nHost: {}\r\nAuthorization: Bearer {TOKEN}\r\n\
             Content-Type: {ct}\r\nTransfer-Encoding: chunked\r\nConnection: close\r\n\r\n",
            self.admin
        );
        s.write_all(head.as_bytes()).await.unwrap();
        for c in body.chunks(64 * 1024) {
            s.write_all(format!("{:x}\r\n", c.len()).as_bytes())
                .await
                .unwrap();
            s.write_all(c).await.unwrap();
            s.write_all(b"\r\n").await.unwrap();
        }
        s.write_all(b"0\r\n\r\n").await.unwrap();
        let mut out = Vec::new();
        tokio::time::timeout(Duration::from_secs(60), s.read_to_end(&mut out))
            .await
            .expect("answered in time")
            .unwrap();
        let text = String::from_utf8_lossy(&out).into_owned();
        let status = text
            .split(' ')
            .nth(1)
            .and_then(|c| c.parse().ok())
            .unwrap_or(0);
        let body = text.split("\r\n\r\n").nth(1).unwrap_or("").to_string();
        (status, body)
    }
}

fn client() -> reqwest::Client {
    reqwest::Client::builder()
        .timeout(Duration::from_secs(60))
        .build()
        .unwrap()
}

/// Number of segments (edges) of the test city.
fn segments() -> usize {
    city().edges.len()
}

/// Time of round `r` through the segments: a second older each round.
fn at(round: usize) -> String {
    (chrono::Utc::now() - chrono::Duration::seconds(60 + round as i64))
        .to_rfc3339_opts(chrono::SecondsFormat::Millis, true)
}

/// A JSON batch of `n` rows, segment `i mod E`; the rows at `bad` are
/// replaced by the given raw elements.
fn json_batch(n: usize, bad: &[(usize, String)]) -> Vec<u8> {
    let e = segments();
    let mut out = String::from("[");
    for i in 0..n {
        if i > 0 {
            out.push(',');
        }
        if let Some((_, raw)) = bad.iter().find(|(j, _)| *j == i) {
            out.push_str(raw);
            continue;
        }
        // Every seventh row spells its sample count as 3.0, an integer
        // by JSON Schema's rule (2020-12 validation §6.1.1).
        let samples = if i % 7 == 0 { "3.0" } else { "3" };
        out.push_str(&format!(
            r#"{{"segment":{},"kmh":{:.1},"observed_at":"{}","samples":{samples}}}"#,
            i % e,
            20.0 + (i % 40) as f64,
            at(i / e)
        ));
    }
    out.push(']');
    out.into_bytes()
}

/// The JSON batch's rows as CSV (header line 1, row `i` on line `i + 2`).
fn csv_batch(n: usize, bad: &[(usize, String)]) -> Vec<u8> {
    let e = segments();
    let mut out = String::from("segment,kmh,observed_at,samples\n");
    for i in 0..n {
        if let Some((_, raw)) = bad.iter().find(|(j, _)| *j == i) {
            out.push_str(raw);
        } else {
            out.push_str(&format!(
                "{},{:.1},{},3",
                i % e,
                20.0 + (i % 40) as f64,
                at(i / e)
            ));
        }
        out.push('\n');
    }
    out.into_bytes()
}

/// Rows of the large batches: at least four rounds through the segments
/// and 40,000 rows (about 3 MB of JSON).
fn rows() -> usize {
    (4 * segments()).max(40_000)
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn large_json_batch_streams_with_exact_counts() {
    let dir = tempfile::tempdir().unwrap();
    let srv = start(dir.path()).await;
    let (n, e) = (rows(), segments());
    let (i1, i2, i3) = (n / 3, n / 2, 2 * n / 3);
    assert!(i1 >= e, "bad rows lie after the first round");
    let t = at(9);
    let bad = vec![
        (
            i1,
            format!(r#"{{"segment":1,"kmh":-4,"observed_at":"{t}","samples":1}}"#),
        ),
        (
            i2,
            format!(r#"{{"segment":1,"kmh":5,"kmh":500,"observed_at":"{t}","samples":1}}"#),
        ),
        (
            i3,
            format!(
                r#"{{"segment":{},"kmh":30,"observed_at":"{t}","samples":1}}"#,
                e + 10
            ),
        ),
    ];
    let body = json_batch(n, &bad);
    assert!(
        body.len() > 2_000_000 && body.len() < LIMIT,
        "{}",
        body.len()
    );
    let (status, v) = srv
        .post("/admin/regions/testcity/live", "application/json", body)
        .await;
    assert_eq!(status, 200, "{v}");
    let r = &v["report"];
    assert_eq!(r["rows"], n as u64, "{r}");
    assert_eq!(r["bad"], 3, "{r}");
    assert_eq!(r["accepted"], (n - 3) as u64, "{r}");
    // Every row after the first round names a segment that already holds
    // a newer observation; the three bad rows are among them.
    assert_eq!(r["superseded"], (n - e - 3) as u64, "{r}");
    assert_eq!(
        r["bad_by_kind"],
        json!({"nonpositive_speed": 1, "malformed_row": 1, "unknown_edge": 1})
    );
    let errs = r["first_errors"].as_array().unwrap();
    let at_index: Vec<(u64, &str)> = errs
        .iter()
        .map(|x| (x["index"].as_u64().unwrap(), x["kind"].as_str().unwrap()))
        .collect();
    assert_eq!(
        at_index,
        vec![
            (i1 as u64, "nonpositive_speed"),
            (i2 as u64, "malformed_row"),
            (i3 as u64, "unknown_edge")
        ]
    );
    assert!(
        errs[1]["message"]
            .as_str()
            .unwrap()
            .contains("duplicate key `kmh`"),
        "{}",
        errs[1]
    );
    assert_eq!(srv.live_edges_become(e as u64).await, e as u64);
    srv.stop().await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn large_csv_batch_reports_bad_rows_by_line() {
    let dir = tempfile::tempdir().unwrap();
    let srv = start(dir.path()).await;
    let (n, e) = (rows(), segments());
    let (i1, i2) = (n / 3, n / 2);
    let bad = vec![
        (i1, format!("1,31.5,{}", at(9))),
        (i2, format!("1,abc,{},3", at(9))),
    ];
    // Sent chunked: the parser meets the rows as they arrive.
    let (status, text) = srv
        .post_chunked(
            "/admin/regions/testcity/live",
            "text/csv",
            &csv_batch(n, &bad),
        )
        .await;
    assert_eq!(status, 200, "{text}");
    let v: Value = serde_json::from_str(&text).unwrap();
    let r = &v["report"];
    assert_eq!(r["rows"], n as u64, "{r}");
    assert_eq!(r["bad"], 2, "{r}");
    assert_eq!(r["superseded"], (n - e - 2) as u64, "{r}");
    let lines: Vec<(u64, &str)> = r["first_errors"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| (x["line"].as_u64().unwrap(), x["kind"].as_str().unwrap()))
        .collect();
    // Header = line 1, row i on line i + 2.
    assert_eq!(
        lines,
        vec![
            (i1 as u64 + 2, "malformed_row"),
            (i2 as u64 + 2, "malformed_row")
        ]
    );
    assert_eq!(srv.live_edges_become(e as u64).await, e as u64);
    srv.stop().await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn batch_over_the_limit_gets_413_and_changes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let srv = start(dir.path()).await;
    let e = segments();
    let n = LIMIT / 70;
    let body = json_batch(n, &[]);
    assert!(body.len() > LIMIT, "{}", body.len());
    let check = |status: u16, detail: &str| {
        assert_eq!(status, 413, "{detail}");
        assert!(
            detail.contains("admin.max_live_batch_bytes") && detail.contains(&LIMIT.to_string()),
            "names the setting and the limit: {detail}"
        );
    };
    // Declared by Content-Length: refused before any of the body is sent.
    let (status, text) = srv.declared_too_long(LIMIT + 1).await;
    check(status, &text);
    // Chunked: found as the bytes pass the limit.
    let (status, text) = srv
        .post_chunked("/admin/regions/testcity/live", "application/json", &body)
        .await;
    check(status, &text);
    assert_eq!(srv.live_edges().await, 0);
    // A batch under the limit still goes through.
    let (status, v) = srv
        .post(
            "/admin/regions/testcity/live",
            "application/json",
            json_batch(e, &[]),
        )
        .await;
    assert_eq!(status, 200, "{v}");
    assert_eq!(srv.live_edges_become(e as u64).await, e as u64);
    srv.stop().await;
}

/// A historical table streamed in chunks is saved and versioned by its
/// bytes, exactly as one sent whole.
#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn historical_table_streamed_in_chunks() {
    let dir = tempfile::tempdir().unwrap();
    let srv = start(dir.path()).await;
    let table = hodos_test_service::tables::every_edge_at_ten(27.0);
    let (status, text) = srv
        .post_chunked_put("/admin/regions/testcity/historical", table.as_bytes())
        .await;
    assert_eq!(status, 200, "{text}");
    let v: Value = serde_json::from_str(&text).unwrap();
    let want = format!("{:08x}-{}", crc32fast::hash(table.as_bytes()), table.len());
    assert_eq!(v["version"], want.as_str(), "{v}");
    // The saved copy holds the same bytes (its envelope is checked on
    // load: length and CRC-32).
    let saved = hodos::serving::speeds::open_historical(&dir.path().join("historical.table"))
        .unwrap()
        .expect("saved");
    assert_eq!(saved.csv, table.as_bytes());
    srv.stop().await;
}

impl Server {
    /// A live batch whose `Content-Length` says `len`, with no body sent.
    async fn declared_too_long(&self, len: usize) -> (u16, String) {
        let mut s = tokio::net::TcpStream::connect(self.admin).await.unwrap();
        let head = format!(
            "POST /admin/regions/testcity/live HTTP/1.1\r\nHost: {}\r\nAuthorization: Bearer {TOKEN}\r\n\
             Content-Type: application/json\r\nContent-Length: {len}\r\nConnection: close\r\n\r\n",
            self.admin
        );
        s.write_all(head.as_bytes()).await.unwrap();
        let mut out = Vec::new();
        tokio::time::timeout(Duration::from_secs(20), s.read_to_end(&mut out))
            .await
            .expect("answered at once")
            .unwrap();
        let text = String::from_utf8_lossy(&out).into_owned();
        let status = text
            .split(' ')
            .nth(1)
            .and_then(|c| c.parse().ok())
            .unwrap_or(0);
        (
            status,
            text.split("\r\n\r\n").nth(1).unwrap_or("").to_string(),
        )
    }

    async fn post_chunked_put(&self, path: &str, body: &[u8]) -> (u16, String) {
        // The same framing as `post_chunked`, with PUT.
        let mut s = tokio::net::TcpStream::connect(self.admin).await.unwrap();
        let head = format!(
            "PUT {path} HTTP/1.1\r\nHost: {}\r\nAuthorization: Bearer {TOKEN}\r\n\
             Content-Type: text/csv\r\nTransfer-Encoding: chunked\r\nConnection: close\r\n\r\n",
            self.admin
        );
        s.write_all(head.as_bytes()).await.unwrap();
        for c in body.chunks(1000) {
            s.write_all(format!("{:x}\r\n", c.len()).as_bytes())
                .await
                .unwrap();
            s.write_all(c).await.unwrap();
            s.write_all(b"\r\n").await.unwrap();
        }
        s.write_all(b"0\r\n\r\n").await.unwrap();
        let mut out = Vec::new();
        tokio::time::timeout(Duration::from_secs(60), s.read_to_end(&mut out))
            .await
            .expect("answered in time")
            .unwrap();
        let text = String::from_utf8_lossy(&out).into_owned();
        let status = text
            .split(' ')
            .nth(1)
            .and_then(|c| c.parse().ok())
            .unwrap_or(0);
        (
            status,
            text.split("\r\n\r\n").nth(1).unwrap_or("").to_string(),
        )
    }
}
