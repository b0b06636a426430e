//! What the correction model costs: the model alone (features and trees)
//! per answer, one ETA and a 100×100 coordinate matrix through the serving
//! answer path with and without a model, side by side in one run.
//!
//! Graph: USA-road-d.NY from `$HODOS_DATA_DIR` (default ../shared/data), or
//! a 300,000-node synthetic city when the data is absent, as
//! benches/engine.rs. The model has `TrainOptions::default()`'s size (its
//! trees fitted on a synthetic sample: cost depends on the number and depth
//! of the trees, not on what they learned). Goals (BENCHMARKS.md): ≤ 2 µs
//! per single answer, ≤ 20 % on a 100×100 matrix; nothing here asserts a
//! speed.

mod common;

use criterion::{criterion_group, criterion_main, Criterion};
use hodos::engine::build::{build_from_graph, Quiet};
use hodos::engine::geo::LatLon;
use hodos::learn::train::{conformal, fit_booster, forest_of, TrainOptions};
use hodos::serving::admission::Admit;
use hodos::serving::answer::{matrix_trip, trip, Catalog, MatrixQuery, TripQuery};
use hodos::serving::correction::features::N;
use hodos::serving::correction::model::CorrectionModel;
use hodos::serving::correction::{correct, Query};
use hodos::serving::settings::{Coverage, CustomizePriority, RegionConfig, ServingSettings};
use hodos::serving::snapshot::{RegionUpdater, UpdateSettings};
use hodos::serving::tier::Tier;
use hodos_testkit::SplitMix64;
use std::hint::black_box;
use std::sync::OnceLock;

struct Fixture {
    name: String,
    rt: tokio::runtime::Runtime,
    plain: Catalog,
    corrected: Catalog,
    points: Vec<LatLon>,
    model: CorrectionModel,
    _dir: tempfile::TempDir,
}

fn unit(rng: &mut SplitMix64) -> f64 {
    (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64
}

/// A model of the default size, fitted on a synthetic sample.
fn model() -> CorrectionModel {
    let opts = TrainOptions::default();
    let mut rng = SplitMix64::new(3);
    let rows: Vec<[f32; N]> = (0..4000)
        .map(|_| std::array::from_fn(|_| (unit(&mut rng) * 1000.0) as f32))
        .collect();
    let y: Vec<f64> = rows
        .iter()
        .map(|x| (f64::from(x[0]) / 200.0).sin() + f64::from(x[5]) / 1000.0)
        .collect();
    let refs: Vec<&[f32]> = rows.iter().map(|r| &r[..]).collect();
    let forest = forest_of(&fit_booster(&refs, &y, &opts).expect("fit")).expect("convert");
    let g: Vec<f64> = rows.iter().map(|x| f64::from(x[0])).collect();
    let r: Vec<f64> = (0..rows.len())
        .map(|i| (i % 100) as f64 / 100.0 - 0.5)
        .collect();
    let mut m = CorrectionModel {
        meta: hodos::serving::correction::model::ModelMeta {
            model_version: 1,
            trained_at: String::new(),
            features: hodos::serving::correction::features::NAMES
                .iter()
                .map(|s| s.to_string())
                .collect(),
            target: String::new(),
            method: String::new(),
            train_window: [String::new(), String::new()],
            calibration_window: [String::new(), String::new()],
            test_window: None,
            figures: vec![],
        },
        forest,
        interval: conformal(&g, &r, opts.interval, opts.bands),
        compiled: Default::default(),
    };
    m.check().expect("a valid model");
    m.meta.model_version = 2;
    m
}

fn fixture() -> &'static Fixture {
    static F: OnceLock<Fixture> = OnceLock::new();
    F.get_or_init(|| {
        let (name, raw) = common::bench_graph();
        let art = build_from_graph(name.clone(), raw, 0.0, &mut Quiet).expect("build");
        let (lo, hi) = art.graph.bbox();
        let dir = tempfile::tempdir().expect("tempdir");
        let artifact = dir.path().join("bench.hodos");
        art.save(&artifact).expect("save");
        drop(art);
        let settings = ServingSettings {
            customize_priority: CustomizePriority::Normal,
            ..ServingSettings::default()
        };
        let rt = tokio::runtime::Builder::new_multi_thread()
            .worker_threads(2)
            .enable_all()
            .build()
            .expect("runtime");
        let open = |sub: &str| {
            let cfg = RegionConfig {
                name: "bench".into(),
                artifact: artifact.clone(),
                time_zone: "America/New_York".into(),
                coverage: Coverage::Bbox([lo.lat, lo.lon, hi.lat, hi.lon]),
                historical: None,
                live_dir: None,
                model: None,
                state_dir: dir.path().join(sub),
            };
            let h = rt.block_on(RegionUpdater::open(
                cfg,
                UpdateSettings::from_settings(&settings),
            ));
            (Catalog::new(settings.clone(), vec![h.reader().clone()]), h)
        };
        let (plain, _plain_region) = open("plain");
        let (corrected, region) = open("corrected");
        let model = model();
        // Installed as an upload is: checked, saved, then served.
        rt.block_on(region.put_model(hodos::serving::correction::file::encode(&model)))
            .expect("model accepted");
        // Points in the middle 60 % of the box: most snap to a road.
        let mut rng = SplitMix64::new(11);
        let points = (0..400)
            .map(|_| {
                let f = |a: f64, b: f64, u: f64| a + (b - a) * (0.2 + 0.6 * u);
                LatLon::new(
                    f(lo.lat, hi.lat, unit(&mut rng)),
                    f(lo.lon, hi.lon, unit(&mut rng)),
                )
            })
            .collect();
        Fixture {
            name,
            rt,
            plain,
            corrected,
            points,
            model,
            _dir: dir,
        }
    })
}

fn bench_correction(c: &mut Criterion) {
    let f = fixture();
    let mut group = c.benchmark_group(format!("{}/correction", f.name));
    eprintln!(
        "model: {} trees, {} nodes",
        f.model.forest.roots.len(),
        f.model.forest.nodes.len()
    );
    let queries: Vec<Query> = f
        .points
        .chunks(2)
        .enumerate()
        .map(|(i, p)| Query {
            from: p[0],
            to: p[1],
            graph_s: 60.0 + (i as f64) * 7.0,
            graph_m: 1000.0 + (i as f64) * 90.0,
            hour_of_week: Some((i % 168) as u8),
            tier: Tier::FreeFlow,
            sources: None,
        })
        .collect();
    let mut k = 0;
    group.bench_function("model_only", |b| {
        b.iter(|| {
            k = (k + 1) % queries.len();
            black_box(correct(&f.model, black_box(&queries[k])))
        })
    });
    for (label, cat) in [("eta_plain", &f.plain), ("eta_corrected", &f.corrected)] {
        let mut k = 0;
        group.bench_function(label, |b| {
            b.iter(|| {
                k = (k + 2) % (f.points.len() - 1);
                let (a, z) = (f.points[k], f.points[k + 1]);
                black_box(f.rt.block_on(trip(
                    cat,
                    &TripQuery {
                        from: a,
                        to: z,
                        depart: None,
                        budget_ms: None,
                        geometry: false,
                    },
                    Admit::Uncounted,
                )))
            })
        });
    }
    let (from, to) = (f.points[..100].to_vec(), f.points[100..200].to_vec());
    for (label, cat) in [
        ("matrix100x100_plain", &f.plain),
        ("matrix100x100_corrected", &f.corrected),
    ] {
        group.bench_function(label, |b| {
            b.iter(|| {
                black_box(f.rt.block_on(matrix_trip(
                    cat,
                    MatrixQuery {
                        from: from.clone(),
                        to: to.clone(),
                        depart: None,
                        budget_ms: Some(60_000),
                    },
                    Admit::Uncounted,
                )))
            })
        });
    }
    group.finish();
}

criterion_group!(benches, bench_correction);
criterion_main!(benches);
