//! The correction model, end to end on the test city:
//!
//! - the trees hodos copies out of the training library predict what the
//!   library itself predicts (forust-ml's `GradientBooster::predict`, the
//!   reference), missing values included;
//! - split-conformal intervals cover fresh draws of an exchangeable sample
//!   at their nominal rate (Lei et al., "Distribution-free predictive
//!   inference for regression", JASA 2018, Theorem 2.2: coverage ≥ 1 − α,
//!   and ≤ 1 − α + 1/(n+1) without ties), within a binomial tolerance;
//! - the service on 127.0.0.1 port 0: without a model answers say so
//!   (`model_version` null, `graph_eta_s` = `eta_s`); an uploaded model
//!   serves at once on single ETAs and on each matrix cell, estimates
//!   included; a damaged upload is refused with 422 naming the checksum and
//!   the model before it keeps serving; the accepted model survives a
//!   restart; a region configured with `model = ...` starts with it.

use hodos::learn::train::{booster_predict, conformal, fit_booster, forest_of, TrainOptions};
use hodos::serving::correction::features::{N, NAMES};
use hodos::serving::correction::file;
use hodos::serving::correction::model::{
    Compiled, CorrectionModel, Forest, Interval, ModelMeta, Node,
};
use hodos_test_service::running::{client, start, Running};
use hodos_test_service::service::{at, city, config_text, TOKEN};
use hodos_test_support::SplitMix64;
use serde_json::{json, Value};

/// A uniform draw in [0, 1) (the top 53 bits).
fn unit(rng: &mut SplitMix64) -> f64 {
    (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64
}

/// A known nonlinear function of four of the features, with noise and
/// about 10% missing hours.
fn sample(n: usize, seed: u64) -> (Vec<[f32; N]>, Vec<f64>) {
    let mut rng = SplitMix64::new(seed);
    let mut rows = Vec::with_capacity(n);
    let mut y = Vec::with_capacity(n);
    for _ in 0..n {
        let mut x = [0.0f32; N];
        for v in x.iter_mut() {
            *v = (unit(&mut rng) * 100.0) as f32;
        }
        if unit(&mut rng) < 0.1 {
            x[5] = f32::NAN;
        }
        let h = f64::from(x[5]);
        let rush = if h.is_nan() {
            0.2
        } else if (30.0..50.0).contains(&h) {
            0.6
        } else {
            0.0
        };
        let t = (f64::from(x[0]) / 20.0).sin() + rush + 0.01 * f64::from(x[3]);
        y.push(t + 0.1 * (unit(&mut rng) - 0.5));
        rows.push(x);
    }
    (rows, y)
}

#[test]
fn copied_trees_predict_what_the_library_predicts() {
    let (rows, y) = sample(3000, 5);
    let refs: Vec<&[f32]> = rows.iter().map(|r| &r[..]).collect();
    let opts = TrainOptions::default();
    let b = fit_booster(&refs, &y, &opts).unwrap();
    let forest = forest_of(&b).unwrap();
    assert_eq!(forest.roots.len(), opts.iterations);
    let compiled = Compiled::of(&forest).expect("default trees compile");
    let (test, test_y) = sample(2000, 77);
    let trefs: Vec<&[f32]> = test.iter().map(|r| &r[..]).collect();
    let want = booster_predict(&b, &trefs);
    let mut missing = 0;
    for (x, w) in test.iter().zip(&want) {
        missing += usize::from(x[5].is_nan());
        let got = forest.predict(x);
        assert!((got - w).abs() < 1e-9, "hodos {got} vs forust-ml {w}");
        // The compiled layout the service applies predicts the same.
        let fast = forest.base + compiled.sum(x);
        assert!((fast - w).abs() < 1e-9, "compiled {fast} vs forust-ml {w}");
    }
    assert!(missing > 100, "the check covers missing values ({missing})");
    // And the fit is a fit: the held-out error is near the noise.
    let mse = want
        .iter()
        .zip(&test_y)
        .map(|(p, t)| (p - t).powi(2))
        .sum::<f64>()
        / want.len() as f64;
    assert!(mse < 0.05, "held-out MSE {mse}");
}

#[test]
fn conformal_intervals_cover_fresh_draws_at_their_level() {
    // Residuals ~ Laplace-like, graph times spread over two bands.
    let mut rng = SplitMix64::new(21);
    let mut draw = |n: usize| -> (Vec<f64>, Vec<f64>) {
        let mut g = Vec::new();
        let mut r = Vec::new();
        for _ in 0..n {
            let short = unit(&mut rng) < 0.5;
            g.push(if short {
                100.0 + unit(&mut rng) * 100.0
            } else {
                600.0 + unit(&mut rng) * 100.0
            });
            let u = unit(&mut rng) - 0.5;
            let scale = if short { 0.5 } else { 0.1 };
            r.push(-scale * u.signum() * (1.0 - 2.0 * u.abs()).max(1e-12).ln());
        }
        (g, r)
    };
    let (g, r) = draw(2000);
    let iv = conformal(&g, &r, [0.1, 0.9], 2);
    assert_eq!(iv.offsets.len(), 2);
    let (g2, r2) = draw(20_000);
    let band = |x: f64| usize::from(x >= iv.edges[0]);
    let inside = g2
        .iter()
        .zip(&r2)
        .filter(|(g, r)| {
            let [lo, hi] = iv.offsets[band(**g)];
            lo <= **r && **r <= hi
        })
        .count() as f64
        / g2.len() as f64;
    // Nominal 0.8; the calibration sample's own spread (n = 1000 per band)
    // moves the realised coverage by about ±0.013 (one standard deviation
    // of a Beta(k, n+1−k) coverage), so allow ±0.04.
    assert!((inside - 0.8).abs() < 0.04, "coverage {inside}");
}

/// Doubles every answer; interval ±10 % / +20 % (short) and −5 %/+5 %
/// (graph time ≥ 1000 s).
fn doubling_model(version: u64) -> CorrectionModel {
    CorrectionModel {
        meta: ModelMeta {
            model_version: version,
            trained_at: "2026-12-04T00:00:00Z".into(),
            features: NAMES.iter().map(|s| s.to_string()).collect(),
            target: "ln(actual_s / graph_s)".into(),
            method: "a constant, for the test".into(),
            train_window: ["2026-01-01T00:00:00Z".into(), "2026-01-02T00:00:00Z".into()],
            calibration_window: ["2026-01-02T00:00:00Z".into(), "2026-01-03T00:00:00Z".into()],
            test_window: None,
            figures: vec![],
        },
        forest: Forest {
            base: std::f64::consts::LN_2,
            roots: vec![0],
            nodes: vec![Node {
                threshold: 0.0,
                value: 0.0,
                feature: 0,
                leaf: true,
                left: 0,
                right: 0,
                missing: 0,
            }],
        },
        interval: Interval {
            edges: vec![1000.0],
            counts: vec![100, 100],
            levels: [0.1, 0.9],
            offsets: vec![
                [(0.9f64).ln(), (1.2f64).ln()],
                [(0.95f64).ln(), (1.05f64).ln()],
            ],
        },
        compiled: Default::default(),
    }
}

/// The calls these tests make of a running service.
trait Calls {
    async fn eta(&self, body: Value) -> Value;
    async fn matrix(&self, body: Value) -> Value;
    async fn put_model(&self, bytes: Vec<u8>) -> (u16, Value);
    async fn status(&self) -> Value;
}

impl Calls for Running {
    async fn eta(&self, body: Value) -> Value {
        let r = client()
            .post(format!("http://{}/v1/eta", self.public))
            .json(&body)
            .send()
            .await
            .unwrap();
        assert_eq!(r.status().as_u16(), 200);
        r.json().await.unwrap()
    }

    async fn matrix(&self, body: Value) -> Value {
        let r = client()
            .post(format!("http://{}/v1/eta/matrix", self.public))
            .json(&body)
            .send()
            .await
            .unwrap();
        assert_eq!(r.status().as_u16(), 200);
        r.json().await.unwrap()
    }

    async fn put_model(&self, bytes: Vec<u8>) -> (u16, Value) {
        let r = client()
            .put(format!(
                "http://{}/admin/regions/testcity/model",
                self.admin
            ))
            .bearer_auth(TOKEN)
            .header("content-type", "application/octet-stream")
            .body(bytes)
            .send()
            .await
            .unwrap();
        let status = r.status().as_u16();
        (status, r.json().await.unwrap())
    }

    async fn status(&self) -> Value {
        client()
            .get(format!("http://{}/admin/status", self.admin))
            .bearer_auth(TOKEN)
            .send()
            .await
            .unwrap()
            .json()
            .await
            .unwrap()
    }
}

fn point(p: hodos::engine::geo::LatLon) -> Value {
    json!({"lat": p.lat, "lon": p.lon})
}

fn approx(a: &Value, b: f64, tol: f64) {
    let a = a.as_f64().unwrap_or_else(|| panic!("not a number: {a}"));
    assert!((a - b).abs() <= tol, "{a} vs {b}");
}

/// Checks one corrected answer of the doubling model.
fn doubled(v: &Value, version: u64) {
    assert_eq!(v["model_version"], json!(version), "{v}");
    let g = v["graph_eta_s"].as_f64().unwrap();
    approx(&v["eta_s"], 2.0 * g, 0.002);
    let (lo, hi) = if g >= 1000.0 {
        (0.95, 1.05)
    } else {
        (0.9, 1.2)
    };
    approx(&v["eta_low_s"], 2.0 * g * lo, 0.004);
    approx(&v["eta_high_s"], 2.0 * g * hi, 0.004);
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn the_service_applies_swaps_refuses_and_keeps_models() {
    let dir = tempfile::tempdir().unwrap();
    let state = dir.path().join("state");
    let text = config_text(&city().artifact, &state, "");
    let (a, b) = (at(0.2, 0.2), at(0.8, 0.7));
    let trip = json!({"from": point(a), "to": point(b)});
    let far = json!({"from": point(a), "to": {"lat": 0.5, "lon": 0.5}});

    let s = start(&text).await;
    let plain = s.eta(trip.clone()).await;
    assert_eq!(plain["model_version"], Value::Null);
    assert_eq!(plain["eta_low_s"], Value::Null);
    assert_eq!(plain["graph_eta_s"], plain["eta_s"]);

    let (code, body) = s.put_model(file::encode(&doubling_model(41))).await;
    assert_eq!(code, 200, "{body}");
    assert_eq!(body["model_version"], json!(41));
    assert_eq!(body["features"].as_array().unwrap().len(), N);
    let v = s.eta(trip.clone()).await;
    doubled(&v, 41);
    approx(&v["graph_eta_s"], plain["eta_s"].as_f64().unwrap(), 0.001);
    // Outside every region: no model applies.
    let out = s.eta(far.clone()).await;
    assert_eq!(out["model_version"], Value::Null);

    let m = s
        .matrix(
            json!({"from": [point(a), point(b)], "to": [point(b), point(a), point(at(0.5, 0.5))]}),
        )
        .await;
    for i in 0..2 {
        for j in 0..3 {
            let cell = json!({
                "eta_s": m["eta_s"][i][j], "graph_eta_s": m["graph_eta_s"][i][j],
                "eta_low_s": m["eta_low_s"][i][j], "eta_high_s": m["eta_high_s"][i][j],
                "model_version": m["model_version"][i][j],
            });
            doubled(&cell, 41);
        }
    }

    // A damaged file: refused by name, the model before it keeps serving.
    let mut bytes = file::encode(&doubling_model(42));
    let last = bytes.len() - 1;
    bytes[last] ^= 0x01;
    let (code, body) = s.put_model(bytes).await;
    assert_eq!(code, 422, "{body}");
    assert!(
        body["detail"].as_str().unwrap().contains("checksum"),
        "{body}"
    );
    doubled(&s.eta(trip.clone()).await, 41);
    let st = s.status().await;
    assert_eq!(st["regions"][0]["model_version"], json!(41));
    assert!(st["regions"][0]["model_refused"]
        .as_str()
        .unwrap()
        .contains("checksum"));
    // Features this hodos does not compute: refused too.
    let mut other = doubling_model(43);
    other.meta.features[0] = "something_else".into();
    let (code, body) = s.put_model(file::encode(&other)).await;
    assert_eq!(code, 422, "{body}");
    assert!(
        body["detail"]
            .as_str()
            .unwrap()
            .contains("expects features"),
        "{body}"
    );
    s.stop().await;

    // The accepted model survives a restart.
    let s = start(&text).await;
    doubled(&s.eta(trip.clone()).await, 41);
    s.stop().await;

    // A region configured with a model file starts with it.
    let model_path = dir.path().join("configured.model");
    std::fs::write(&model_path, file::encode(&doubling_model(50))).unwrap();
    let text2 = config_text(&city().artifact, &dir.path().join("state2"), "").replace(
        "state_dir = ",
        &format!(
            "model = {:?}\nstate_dir = ",
            model_path.display().to_string()
        ),
    );
    assert!(text2.contains("model = "), "{text2}");
    let s = start(&text2).await;
    doubled(&s.eta(trip).await, 50);
    s.stop().await;
}

/// Completed trips posted to `/admin/trips`: each trip's duration is set
/// to twice the ETA the service gives for it, so every recorded
/// `ln(estimate / actual)` is ln ½ (and ln ¾ for the served ETA of 1.5×
/// the answer), and the histograms' sums and counts are those multiples.
#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn posted_trips_are_answered_and_their_error_recorded() {
    // Reads the process-wide metrics: alone in a child process.
    if !hodos_testkit::child::alone(
        module_path!(),
        "posted_trips_are_answered_and_their_error_recorded",
    ) {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let s = start(&config_text(
        &city().artifact,
        &dir.path().join("state"),
        "",
    ))
    .await;
    let leaving = chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    let mut csv = String::from(
        "id,from_lat,from_lon,to_lat,to_lon,leaving,duration_s,distance_m,vehicle,served_eta_s,served_tier,served_snapshot\n",
    );
    let n = 6;
    for k in 0..n {
        let (a, b) = (at(0.1 + 0.1 * k as f64, 0.2), at(0.8, 0.3 + 0.1 * k as f64));
        let v = s
            .eta(json!({"from": point(a), "to": point(b), "leaving": leaving}))
            .await;
        let eta = v["eta_s"].as_f64().unwrap();
        let tier = v["tier"].as_str().unwrap();
        csv.push_str(&format!(
            "t{k},{},{},{},{},{leaving},{},,,{},{tier},\n",
            a.lat,
            a.lon,
            b.lat,
            b.lon,
            2.0 * eta,
            1.5 * eta
        ));
    }
    csv.push_str(&format!("bad,95,0.1,1,1,{leaving},100,,,,,\n"));
    let r = client()
        .post(format!("http://{}/admin/trips", s.admin))
        .bearer_auth(TOKEN)
        .header("content-type", "text/csv")
        .body(csv)
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 200);
    let body: Value = r.json().await.unwrap();
    assert_eq!(body["rows"], json!(n + 1), "{body}");
    assert_eq!(body["recorded"], json!(n));
    assert_eq!(body["refused"], json!(1));
    assert_eq!(body["errors"][0]["line"], json!(n + 2));
    approx(&body["mape"], 50.0, 0.05);

    let text = client()
        .get(format!("http://{}/metrics", s.public))
        .send()
        .await
        .unwrap()
        .text()
        .await
        .unwrap();
    let scrape = prometheus_parse::Scrape::parse(text.lines().map(|l| Ok(l.to_string()))).unwrap();
    let value = |name: &str, source: &str| -> (f64, f64) {
        let mut sum = 0.0;
        let mut count = 0.0;
        for smp in &scrape.samples {
            if smp.labels.get("region") != Some("testcity")
                || smp.labels.get("source") != Some(source)
            {
                continue;
            }
            if smp.metric == format!("{name}_sum") {
                if let prometheus_parse::Value::Untyped(v) | prometheus_parse::Value::Counter(v) =
                    smp.value
                {
                    sum += v;
                }
            }
            if smp.metric == format!("{name}_count") {
                if let prometheus_parse::Value::Untyped(v) | prometheus_parse::Value::Counter(v) =
                    smp.value
                {
                    count += v;
                }
            }
        }
        (sum, count)
    };
    let (sum, count) = value("hodos_trip_log_error", "replayed");
    assert_eq!(count, n as f64, "{text}");
    assert!((sum - n as f64 * 0.5f64.ln()).abs() < 1e-3, "sum {sum}");
    let (sum, count) = value("hodos_trip_log_error", "served");
    assert_eq!(count, n as f64);
    assert!((sum - n as f64 * 0.75f64.ln()).abs() < 1e-3, "sum {sum}");
    let (sum, _) = value("hodos_trip_abs_pct_error", "replayed");
    assert!((sum - n as f64 * 0.5).abs() < 1e-3, "sum {sum}");
    assert!(
        text.contains("hodos_trips_recorded_total{region=\"testcity\",outcome=\"recorded\"} 6")
            || text
                .contains("hodos_trips_recorded_total{outcome=\"recorded\",region=\"testcity\"} 6"),
        "{text}"
    );

    let r = client()
        .post(format!("http://{}/admin/trips", s.admin))
        .bearer_auth(TOKEN)
        .header("content-type", "application/xml")
        .body("x")
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 415);
    s.stop().await;
}
