//! The built-in demo: the fictional city of Quellhaven, served on loopback
//! with a historical profile that has rush hours and a simulated live feed
//! in which one bridge slows down and recovers, over and over.
//!
//! Everything here is invented for the demo; none of it is used by tests as
//! a reference.
//!
//! # Layout
//!
//! - this file: the files ([`prepare`]), the historical profile, the live
//!   feed and the curl lines;
//! - `trips`: completed trips with true durations from speeds hodos does
//!   not see exactly (the demo's ground truth for `hodos eval` and
//!   `hodos train`).

pub mod trips;

use crate::config::Config;
use crate::engine::build::{build, Progress, Source};
use crate::engine::graph::{RoadClass, RoadGraph};
use crate::engine::import::synthetic::{generate_with_info, CityInfo};
use chrono::Utc;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::Duration;

/// Intersections in the demo city.
pub const DEMO_NODES: usize = 30_000;
pub const DEMO_SEED: u64 = 7;

/// Why the demo could not be prepared.
#[derive(Debug, thiserror::Error)]
pub enum DemoError {
    #[error(transparent)]
    Build(#[from] crate::engine::build::BuildError),
    #[error(transparent)]
    Artifact(#[from] crate::engine::artifact::ArtifactError),
    /// The cause is in the message, so it is no `source()` (a chain
    /// printer would repeat it).
    #[error("demo files: {0}")]
    Io(std::io::Error),
    #[error("demo configuration: {0}")]
    Config(crate::config::ConfigParseError),
}

impl From<std::io::Error> for DemoError {
    fn from(e: std::io::Error) -> Self {
        DemoError::Io(e)
    }
}

/// Files the demo prepared.
#[derive(Debug, Clone)]
pub struct DemoFiles {
    pub dir: PathBuf,
    pub artifact: PathBuf,
    pub historical: PathBuf,
    /// Completed trips of the last four weeks (our trips CSV).
    pub trips: PathBuf,
    /// The hidden world the trips are driven in (the live feed's probes
    /// and trips come from it too).
    pub truth: Arc<trips::Truth>,
    pub config: Config,
    /// The bridge the live feed slows down: its name and directed edges as
    /// (tail, head) external node ids.
    pub bridge: (String, Vec<(u64, u64)>),
    /// Sample coordinates on either bank.
    pub south: crate::engine::geo::LatLon,
    pub north: crate::engine::geo::LatLon,
}

/// Hour-of-week speed factor for arterial roads: weekday rush hours
/// 07–09 and 16–18 slow to 55–70% of free-flow (the demo's own invention).
fn rush_factor(hour_of_week: u32) -> Option<f32> {
    let (day, hour) = (hour_of_week / 24, hour_of_week % 24);
    if day >= 5 {
        return None;
    }
    match hour {
        7 | 17 => Some(0.55),
        8 | 16 => Some(0.7),
        _ => None,
    }
}

fn is_arterial(c: RoadClass) -> bool {
    matches!(
        c,
        RoadClass::Motorway
            | RoadClass::MotorwayLink
            | RoadClass::Primary
            | RoadClass::PrimaryLink
            | RoadClass::Secondary
            | RoadClass::SecondaryLink
    )
}

/// The demo's historical profile as CSV, one row per arterial segment and
/// rush hour, naming the segment by its id in `g` (the artifact's graph)
/// with its way id beside it as a check.
pub fn historical_csv(g: &RoadGraph) -> String {
    let mut out = String::from("segment,way,hour_of_week,kmh\n");
    for e in 0..g.num_edges() {
        if !is_arterial(g.edge_class[e]) {
            continue;
        }
        let way = g.edge_way[e];
        for h in 0..168 {
            if let Some(f) = rush_factor(h) {
                let _ = writeln!(out, "{e},{way},{h},{:.1}", g.edge_speed_kmh[e] * f);
            }
        }
    }
    out
}

/// Builds the city, writes the artifact, the profile and a configuration
/// into `dir`. `listen`/`admin` are the listener addresses to configure.
pub fn prepare(
    dir: &Path,
    listen: std::net::SocketAddr,
    admin: std::net::SocketAddr,
    token: &str,
    progress: &mut dyn Progress,
) -> Result<DemoFiles, DemoError> {
    std::fs::create_dir_all(dir)?;
    let (raw, info) = generate_with_info(DEMO_NODES, DEMO_SEED);
    let art = build(
        &Source::Synthetic {
            nodes: DEMO_NODES,
            seed: DEMO_SEED,
        },
        progress,
    )?;
    let artifact = dir.join("quellhaven.hodos");
    art.save(&artifact)?;
    let historical = dir.join("quellhaven-historical.csv");
    crate::serving::speeds::write_atomic(&historical, historical_csv(&art.graph).as_bytes())?;
    let bridge = central_bridge(&raw, &info);
    let truth = trips::Truth::new(&art, &bridge.1, DEMO_SEED);
    let trips = dir.join("quellhaven-trips.csv");
    let csv = trips::completed_trips_csv(&truth, trips::DEMO_TRIPS, 28, Utc::now(), DEMO_SEED);
    crate::serving::speeds::write_atomic(&trips, csv.as_bytes())?;
    let (lo, hi) = art.graph.bbox();
    let pad = 0.01;
    let text = format!(
        r#"
[server]
listen = "{listen}"
[admin]
listen = "{admin}"
token = "{token}"
[[region]]
name = "quellhaven"
artifact = "{artifact}"
time_zone = "UTC"
historical = "{historical}"
state_dir = "{state}"
coverage = {{ bbox = [{a}, {b}, {c}, {d}] }}
"#,
        artifact = artifact.display(),
        historical = historical.display(),
        state = dir.join("state").display(),
        a = lo.lat - pad,
        b = lo.lon - pad,
        c = hi.lat + pad,
        d = hi.lon + pad,
    );
    let config = Config::parse(&text).map_err(DemoError::Config)?;
    let (south, north) = banks(&art.graph, &info);
    Ok(DemoFiles {
        dir: dir.to_path_buf(),
        artifact,
        historical,
        trips,
        truth: Arc::new(truth),
        config,
        bridge,
        south,
        north,
    })
}

/// The middle bridge (west to east order) as external-id edge pairs.
fn central_bridge(raw: &RoadGraph, info: &CityInfo) -> (String, Vec<(u64, u64)>) {
    let Some(b) = info.bridges.get(info.bridges.len() / 2) else {
        return ("none".into(), Vec::new());
    };
    let edges = b
        .edges
        .iter()
        .map(|&e| {
            (
                raw.node_ext[raw.edge_tail[e as usize] as usize],
                raw.node_ext[raw.edge_head[e as usize] as usize],
            )
        })
        .collect();
    (b.name.clone(), edges)
}

/// A node well south and one well north of the river, near the centre.
fn banks(
    g: &RoadGraph,
    info: &CityInfo,
) -> (crate::engine::geo::LatLon, crate::engine::geo::LatLon) {
    let c = info.center;
    let mut south = (f64::INFINITY, c);
    let mut north = (f64::INFINITY, c);
    for v in 0..g.num_nodes() as u32 {
        let p = g.node_pos(v);
        let want_s = crate::engine::geo::LatLon::new(c.lat - 0.012, c.lon - 0.01);
        let want_n = crate::engine::geo::LatLon::new(c.lat + 0.012, c.lon + 0.012);
        let ds = crate::engine::geo::haversine_m(p, want_s);
        let dn = crate::engine::geo::haversine_m(p, want_n);
        if ds < south.0 && info.north_of_river(p) == Some(false) {
            south = (ds, p);
        }
        if dn < north.0 && info.north_of_river(p) == Some(true) {
            north = (dn, p);
        }
    }
    (south.1, north.1)
}

/// Probe vehicles observe this share of the segments each round.
const PROBE_SHARE: f64 = 0.25;
/// Trips completed each round.
const TRIPS_PER_ROUND: usize = 40;

/// Posts a simulated live feed until `stop` resolves: every 2 s, the bridge
/// at 8 km/h for a minute, then at its free-flow speed for a minute; every
/// 10 s, probe vehicles' true speeds on a quarter of the segments (the
/// live tier), and 40 trips completed in the hidden world
/// ([`trips::Truth`]), leaving now, answered and scored as
/// `POST /admin/trips` scores them (`hodos_trip_*` by tier).
pub async fn live_feed(
    service: Arc<crate::serving::service::Service>,
    truth: Arc<trips::Truth>,
    bridge: Vec<(u64, u64)>,
    stop: impl std::future::Future<Output = ()>,
) {
    use rand::{Rng, SeedableRng};
    tokio::pin!(stop);
    let Some(region) = service.regions.first().cloned() else {
        return;
    };
    let started = std::time::Instant::now();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(DEMO_SEED);
    let mut round = 0u64;
    loop {
        let jammed = (started.elapsed().as_secs() / 60) % 2 == 0;
        let speed = if jammed { trips::JAM_KMH } else { 45.0 };
        let now = Utc::now();
        let stamp = now.to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
        let batch: Vec<serde_json::Value> = bridge
            .iter()
            .map(|(a, b)| serde_json::json!({"tail": a, "head": b, "kmh": speed, "observed_at": stamp, "samples": 5}))
            .collect();
        if let Ok(body) = serde_json::to_vec(&batch) {
            if let Err(e) = region.put_live(&body, false).await {
                tracing::warn!(error = %e, "demo live feed batch refused");
            }
        }
        if round % 5 == 0 {
            let speeds = truth.speeds_at(now, jammed);
            let mut probes: Vec<serde_json::Value> = Vec::new();
            for (e, &v) in speeds.iter().enumerate() {
                if rng.random::<f64>() >= PROBE_SHARE {
                    continue;
                }
                let noise = 1.0 + 0.1 * (rng.random::<f64>() - 0.5);
                let kmh = (f64::from(v) * noise).max(1.0);
                probes.push(serde_json::json!({"segment": e, "kmh": (kmh * 10.0).round() / 10.0, "observed_at": stamp, "samples": 2}));
            }
            if let Ok(body) = serde_json::to_vec(&probes) {
                if let Err(e) = region.put_live(&body, false).await {
                    tracing::warn!(error = %e, "demo probe batch refused");
                }
            }
            let done = {
                let truth = truth.clone();
                let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(DEMO_SEED + round);
                tokio::task::spawn_blocking(move || {
                    let mut q = truth.query();
                    let mut out = Vec::new();
                    while out.len() < TRIPS_PER_ROUND {
                        let (a, b) = truth.ends(&mut rng);
                        if let Some((duration_s, meters)) =
                            truth.drive(&mut q, &mut rng, a, b, now, jammed)
                        {
                            out.push(crate::truth::trips::TripRecord {
                                trip_id: None,
                                from: a,
                                to: b,
                                leaving: now.fixed_offset(),
                                duration_s,
                                distance_m: Some(meters),
                                vehicle: None,
                                served: None,
                            });
                        }
                    }
                    out
                })
                .await
            };
            if let Ok(done) = done {
                crate::truth::online::record(&service.catalog, &done).await;
            }
        }
        round += 1;
        tokio::select! {
            _ = &mut stop => break,
            _ = tokio::time::sleep(Duration::from_secs(2)) => {},
        }
    }
}

/// Ready-to-paste curl lines for every endpoint.
pub fn curl_lines(
    files: &DemoFiles,
    public: std::net::SocketAddr,
    admin: std::net::SocketAddr,
    token: &str,
) -> String {
    let (s, n) = (files.south, files.north);
    let region = "quellhaven";
    let mut out = String::new();
    let p = format!("http://{public}");
    let a = format!("http://{admin}");
    let eta = format!(
        r#"{{"from":{{"lat":{:.6},"lon":{:.6}}},"to":{{"lat":{:.6},"lon":{:.6}}}}}"#,
        s.lat, s.lon, n.lat, n.lon
    );
    let _ = writeln!(out, "# ETA across the river (POST and GET)");
    let _ = writeln!(
        out,
        "curl -s -X POST {p}/v1/eta -H 'content-type: application/json' -d '{eta}'"
    );
    let _ = writeln!(
        out,
        "curl -s '{p}/v1/eta?from={:.6},{:.6}&to={:.6},{:.6}'",
        s.lat, s.lon, n.lat, n.lon
    );
    let _ = writeln!(
        out,
        "# the same trip at a weekday rush hour: answered from that hour's profile, which names\n# itself; `sources` gives the shares of the time on live, historical and free-flow speeds"
    );
    let _ = writeln!(
        out,
        "curl -s '{p}/v1/eta?from={:.6},{:.6}&to={:.6},{:.6}&leaving=2026-12-07T08:15:00Z'",
        s.lat, s.lon, n.lat, n.lon
    );
    let _ = writeln!(out, "# a 2x3 matrix");
    let _ = writeln!(
        out,
        r#"curl -s -X POST {p}/v1/eta/matrix -H 'content-type: application/json' -d '{{"from":[{{"lat":{:.6},"lon":{:.6}}},{{"lat":{:.6},"lon":{:.6}}}],"to":[{{"lat":{:.6},"lon":{:.6}}},{{"lat":{:.6},"lon":{:.6}}},{{"lat":{:.6},"lon":{:.6}}}]}}'"#,
        s.lat,
        s.lon,
        n.lat,
        n.lon,
        n.lat,
        n.lon,
        s.lat,
        s.lon,
        (s.lat + n.lat) / 2.0,
        (s.lon + n.lon) / 2.0
    );
    let _ = writeln!(out, "# the route as GeoJSON");
    let _ = writeln!(
        out,
        "curl -s -X POST {p}/v1/route -H 'content-type: application/json' -d '{eta}'"
    );
    let _ = writeln!(out, "# a bad request (RFC 9457 problem details)");
    let _ = writeln!(out, "curl -s '{p}/v1/eta?from=95,0&to=45,-30'");
    let _ = writeln!(out, "# health, readiness, metrics, API description");
    let _ = writeln!(out, "curl -s {p}/healthz; curl -s {p}/readyz");
    let _ = writeln!(out, "curl -s {p}/metrics | grep ^hodos_");
    let _ = writeln!(out, "curl -s {p}/openapi.json | head -c 300");
    let _ = writeln!(out, "# admin API (bearer token)");
    let _ = writeln!(
        out,
        "curl -s {a}/admin/status -H 'authorization: Bearer {token}'"
    );
    let _ = writeln!(
        out,
        "curl -s -X PUT {a}/admin/regions/{region}/historical -H 'authorization: Bearer {token}' -H 'content-type: text/csv' --data-binary @{}",
        files.historical.display()
    );
    let (fa, fb) = files.bridge.1.first().copied().unwrap_or((1, 2));
    let _ = writeln!(
        out,
        r#"curl -s -X POST {a}/admin/regions/{region}/live -H 'authorization: Bearer {token}' -H 'content-type: application/json' -d '[{{"tail":{fa},"head":{fb},"kmh":12,"observed_at":"'$(date -u +%Y-%m-%dT%H:%M:%SZ)'","samples":3}}]'"#
    );
    let _ = writeln!(
        out,
        "curl -s -X POST {a}/admin/regions/{region}/reload -H 'authorization: Bearer {token}'"
    );
    let (d, t) = (files.dir.display(), files.trips.display());
    let (art, hist) = (files.artifact.display(), files.historical.display());
    let _ = writeln!(
        out,
        "# completed trips of the last four weeks, with true durations the graph does not know
# (from the source tree, `cargo run --release --` in place of `hodos`):
# measure the answers, learn a correction, serve it, and post trips to be scored online"
    );
    let _ = writeln!(
        out,
        "hodos eval --trips {t} --artifact {art} --historical {hist} --out {d}/eval"
    );
    let _ = writeln!(
        out,
        "hodos train --trips {t} --artifact {art} --historical {hist} --out {d}/quellhaven.model --report {d}/eval-corrected"
    );
    let _ = writeln!(
        out,
        "curl -s -X PUT {a}/admin/regions/{region}/model -H 'authorization: Bearer {token}' -H 'content-type: application/octet-stream' --data-binary @{d}/quellhaven.model"
    );
    let _ = writeln!(
        out,
        "curl -s -X POST {a}/admin/trips -H 'authorization: Bearer {token}' -H 'content-type: text/csv' --data-binary @{t}"
    );
    out
}
