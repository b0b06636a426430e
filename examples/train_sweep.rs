//! Chooses training options without looking at the test trips: the
//! shared NYC TLC sample on USA-road-d.NY is split as `hodos train` splits
//! it, the latest quarter (the test set) is dropped, and each option set is
//! trained on the rest with its own latest 20 % as the validation set
//! (nested time split). Prints validation MAPE, RMSLE and coverage.
//!
//! `cargo run --release --example train_sweep` (needs `$HODOS_DATA_DIR`).

use hodos::learn::train::{split_by_time, train, TrainOptions};
use hodos_test_replay::replayed_tlc_on_ny;

fn main() {
    let dir = tempfile::tempdir().unwrap();
    let outcomes = replayed_tlc_on_ny(dir.path()).expect("the NY data and trips");
    let d = TrainOptions::default();
    let split = split_by_time(&outcomes, d.test_share, d.calibration_share);
    let mut window: Vec<_> = split
        .fit
        .iter()
        .chain(&split.calibration)
        .map(|&i| outcomes[i].clone())
        .collect();
    window.sort_by_key(|o| o.leaving.timestamp_millis());
    let sets: Vec<(&str, TrainOptions)> = vec![
        ("default", d.clone()),
        (
            "depth4",
            TrainOptions {
                max_depth: 4,
                ..d.clone()
            },
        ),
        (
            "depth6",
            TrainOptions {
                max_depth: 6,
                ..d.clone()
            },
        ),
        (
            "leaf50",
            TrainOptions {
                min_leaf_weight: 50.0,
                ..d.clone()
            },
        ),
        (
            "trees200_lr05",
            TrainOptions {
                iterations: 200,
                learning_rate: 0.05,
                ..d.clone()
            },
        ),
        (
            "trees60_lr15",
            TrainOptions {
                iterations: 60,
                learning_rate: 0.15,
                ..d.clone()
            },
        ),
        (
            "bands1",
            TrainOptions {
                bands: 1,
                ..d.clone()
            },
        ),
        (
            "bands2",
            TrainOptions {
                bands: 2,
                ..d.clone()
            },
        ),
        (
            "cal30",
            TrainOptions {
                calibration_share: 0.3,
                ..d.clone()
            },
        ),
        (
            "t60_lr15_d4",
            TrainOptions {
                iterations: 60,
                learning_rate: 0.15,
                max_depth: 4,
                ..d.clone()
            },
        ),
        (
            "t40_lr2_d4",
            TrainOptions {
                iterations: 40,
                learning_rate: 0.2,
                max_depth: 4,
                ..d.clone()
            },
        ),
        (
            "t30_lr25_d3",
            TrainOptions {
                iterations: 30,
                learning_rate: 0.25,
                max_depth: 3,
                ..d.clone()
            },
        ),
        (
            "t20_lr3_d3",
            TrainOptions {
                iterations: 20,
                learning_rate: 0.3,
                max_depth: 3,
                ..d.clone()
            },
        ),
    ];
    for (name, o) in sets {
        let o = TrainOptions {
            test_share: 0.2,
            ..o
        };
        let (_, rep) = train(&window, &o).unwrap();
        let v = rep.figure("test", "corrected").unwrap();
        let c = rep.figure("test", "constant_mape").unwrap();
        println!(
            "{name:<16} validation MAPE {:.1}% RMSLE {:.3} coverage {:.1}% (constant {:.1}%)",
            v.mape,
            v.rmsle,
            v.coverage.unwrap() * 100.0,
            c.mape
        );
    }
}
