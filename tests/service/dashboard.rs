//! The dashboard in a real browser: a server on 127.0.0.1 port 0 (the test
//! city) answers ETAs (some outside every region, so with a fallback
//! reason) and a matrix, and scores completed trips; headless Chromium
//! (Debian's package) loads `/dashboard`, runs its polling script for a
//! few seconds of virtual time, and its DOM must show the same totals as
//! `/metrics` (parsed with `prometheus-parse`): answers, answers with a
//! fallback reason, `/v1` requests and trips scored, plus a fallback-rate
//! headline and chart canvases. A screenshot is written to
//! `target/dashboard.png` for a person to look at. Without Chromium the
//! test prints SKIPPED, unless `HODOS_REQUIRE_CHROMIUM=1` (set by
//! `.ci/run`).

use hodos_test_service::running::{client, start};
use hodos_test_service::service::{at, city, config_text, TOKEN};
use serde_json::json;
use std::path::Path;
use std::time::Duration;

/// Chromium with a few seconds of virtual time, for the page to poll.
fn chromium(args: &[&str], profile: &Path) -> std::process::Output {
    let mut all = vec!["--virtual-time-budget=7000"];
    all.extend_from_slice(args);
    hodos_testkit::chromium::run(&all, profile)
}

/// The text of the element with `id` in `dom`.
fn text_of(dom: &str, id: &str) -> String {
    let key = format!("id=\"{id}\">");
    let i = dom
        .find(&key)
        .unwrap_or_else(|| panic!("no #{id} in the page"))
        + key.len();
    dom[i..i + dom[i..].find('<').unwrap()].to_string()
}

fn number(s: &str) -> f64 {
    s.replace(',', "")
        .trim()
        .parse()
        .unwrap_or_else(|_| panic!("not a number: {s:?}"))
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn the_dashboard_shows_what_metrics_says() {
    // Reads the process-wide metrics: alone in a child process.
    if !hodos_testkit::child::alone(module_path!(), "the_dashboard_shows_what_metrics_says") {
        return;
    }
    if !hodos_testkit::chromium::available() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let server = start(&config_text(
        &city().artifact,
        &dir.path().join("state"),
        "",
    ))
    .await;
    let (public, admin) = (server.public, server.admin);
    let client = client();
    let pt = |p: hodos::engine::geo::LatLon| json!({"lat": p.lat, "lon": p.lon});
    for k in 0..24 {
        let from = at(0.1 + 0.03 * k as f64, 0.2);
        // Every fourth trip ends far outside the region: an estimate.
        let to = if k % 4 == 0 {
            json!({"lat": 1.0, "lon": 1.0})
        } else {
            pt(at(0.8, 0.1 + 0.03 * k as f64))
        };
        let r = client
            .post(format!("http://{public}/v1/eta"))
            .json(&json!({"from": pt(from), "to": to}))
            .send()
            .await
            .unwrap();
        assert_eq!(r.status().as_u16(), 200);
    }
    let r = client
        .post(format!("http://{public}/v1/eta/matrix"))
        .json(&json!({"from": [pt(at(0.2, 0.2)), pt(at(0.3, 0.6))], "to": [pt(at(0.7, 0.7)), pt(at(0.5, 0.1)), pt(at(0.9, 0.9))]}))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 200);
    let leaving = chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    let (x, y) = (at(0.2, 0.3), at(0.7, 0.6));
    let trips = format!(
        "id,from_lat,from_lon,to_lat,to_lon,leaving,duration_s,distance_m,vehicle,served_eta_s,served_tier,served_snapshot\n\
         a,{},{},{},{},{leaving},900,,,,,\nb,{},{},{},{},{leaving},400,,,,,\n",
        x.lat, x.lon, y.lat, y.lon, y.lat, y.lon, x.lat, x.lon
    );
    let r = client
        .post(format!("http://{admin}/admin/trips"))
        .bearer_auth(TOKEN)
        .header("content-type", "text/csv")
        .body(trips)
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 200);

    let url = format!("http://{public}/dashboard");
    let profile = tempfile::tempdir().unwrap();
    let out = tokio::task::spawn_blocking({
        let url = url.clone();
        let profile = profile.path().to_path_buf();
        move || chromium(&["--dump-dom", &url], &profile)
    })
    .await
    .unwrap();
    let dom = String::from_utf8_lossy(&out.stdout).to_string();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = client
        .get(format!("http://{public}/metrics"))
        .send()
        .await
        .unwrap()
        .text()
        .await
        .unwrap();
    // The screenshot with traffic arriving while the page polls (bounded:
    // at most 3,000 requests, stopped once the picture is taken).
    let stop = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
    let load = {
        let (client, stop) = (client.clone(), stop.clone());
        tokio::spawn(async move {
            for k in 0..3000u32 {
                if stop.load(std::sync::atomic::Ordering::Relaxed) {
                    break;
                }
                let f = at(0.1 + 0.8 * f64::from(k % 17) / 17.0, 0.3);
                let t = if k % 5 == 0 {
                    json!({"lat": 1.0, "lon": 1.0})
                } else {
                    pt(at(0.75, 0.1 + 0.8 * f64::from(k % 13) / 13.0))
                };
                let _ = client
                    .post(format!("http://{public}/v1/eta"))
                    .json(&json!({"from": pt(f), "to": t}))
                    .send()
                    .await;
                tokio::time::sleep(Duration::from_millis(2)).await;
            }
        })
    };
    let shot = Path::new(env!("CARGO_MANIFEST_DIR")).join("target/dashboard.png");
    let profile2 = tempfile::tempdir().unwrap();
    let out2 = tokio::task::spawn_blocking({
        let url = url.clone();
        let shot = shot.clone();
        let profile = profile2.path().to_path_buf();
        move || {
            chromium(
                &[
                    "--window-size=1400,1000",
                    &format!("--screenshot={}", shot.display()),
                    &url,
                ],
                &profile,
            )
        }
    })
    .await
    .unwrap();
    assert!(
        out2.status.success() && shot.exists(),
        "{}",
        String::from_utf8_lossy(&out2.stderr)
    );

    stop.store(true, std::sync::atomic::Ordering::Relaxed);
    load.await.unwrap();
    server.stop().await;
    let scrape = prometheus_parse::Scrape::parse(text.lines().map(|l| Ok(l.to_string()))).unwrap();
    let total = |name: &str, keep: &dyn Fn(&prometheus_parse::Sample) -> bool| -> f64 {
        scrape
            .samples
            .iter()
            .filter(|s| s.metric == name && keep(s))
            .map(|s| match &s.value {
                prometheus_parse::Value::Counter(v) | prometheus_parse::Value::Untyped(v) => *v,
                prometheus_parse::Value::Histogram(h) => {
                    h.iter().map(|b| b.count).fold(0.0, f64::max)
                }
                _ => 0.0,
            })
            .sum()
    };
    let answers = total("hodos_answers_total", &|_| true);
    let fallbacks = total("hodos_fallbacks_total", &|_| true);
    let requests = total("hodos_request_duration_seconds", &|s| {
        s.labels.get("route").is_some_and(|r| r.starts_with("/v1/"))
    });
    let trips = total("hodos_trip_abs_pct_error", &|s| {
        s.labels.get("source") == Some("replayed")
    });
    // 24 ETAs and 6 matrix cells (scored trips are not answers served).
    assert_eq!(answers, 24.0 + 6.0, "{text}");
    assert!(fallbacks >= 6.0);
    assert_eq!(number(&text_of(&dom, "total-answers")), answers, "{dom}");
    assert_eq!(number(&text_of(&dom, "total-fallbacks")), fallbacks);
    assert_eq!(number(&text_of(&dom, "total-requests")), requests);
    assert_eq!(number(&text_of(&dom, "total-trips")), trips);
    assert_eq!(trips, 2.0);
    let headline = text_of(&dom, "fallback-rate");
    assert!(
        headline.ends_with('%') || headline == "no answers",
        "{headline}"
    );
    assert!(dom.matches("<canvas").count() >= 3, "charts drawn");
    eprintln!("screenshot: {}", shot.display());
}
