//! The dependency arrows DEVELOPERS.md promises. The layers are crates, so
//! Cargo refuses a cycle; this test checks what Cargo does not:
//!
//! - each layer crate depends only on the layer crates below it, and on no
//!   external crate its layer must not know (the engine no runtime, HTTP or
//!   metrics; serving, truth and learn no HTTP stack), read from each
//!   crate's `Cargo.toml`;
//! - the dev-only crates (`hodos-testkit` and the `tests/support*` crates)
//!   are never a normal dependency of a layer, and a layer's tests use only
//!   those whose hodos crates are at or below that layer (so a change above
//!   a layer never rebuilds its tests);
//! - every crate root forbids `unsafe`, except serving's, which denies it
//!   everywhere but its `os` module;
//! - inside `hodos-engine`, modules name only modules below them (`geo` →
//!   `graph` → {`import`, `order`, `snap`, `segments`} → `cch` → `metric` →
//!   `calibration` → `artifact` → {`region`, `build`} → `testing`), checked
//!   on the source text.
//!
//! - inside `hodos-serving`, answer code (`answer/`) names no write side
//!   of a region (`RegionUpdater`, `LiveLoop`, `ModelUpdater`, the
//!   `Service`): answers read through `RegionReader` only;
//! - `hodos-http` sees only truth's public face for the service: its online
//!   scoring and the trip types (`hodos_truth::online`, `hodos_truth::trips`).
//!
//! Lines that are comments are skipped, and so is everything from the
//! first `#[cfg(test)]` of a file on, and files named `tests.rs` or
//! `testing.rs`: unit tests may reach anywhere inside their crate. So is
//! the engine's `tests/` folder: its integration tests see only the public
//! API.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// The layer crates, bottom first, with the hodos crates each may depend on.
const LAYERS: &[(&str, &str, &[&str])] = &[
    ("hodos-engine", "src/engine", &[]),
    ("hodos-serving", "src/serving", &["hodos-engine"]),
    (
        "hodos-truth",
        "src/truth",
        &["hodos-engine", "hodos-serving"],
    ),
    (
        "hodos-learn",
        "src/learn",
        &["hodos-engine", "hodos-serving", "hodos-truth"],
    ),
    (
        "hodos-http",
        "src/http",
        &["hodos-engine", "hodos-serving", "hodos-truth"],
    ),
    (
        "hodos",
        ".",
        &[
            "hodos-engine",
            "hodos-serving",
            "hodos-truth",
            "hodos-learn",
            "hodos-http",
        ],
    ),
];

/// External crates a layer must not depend on.
fn forbidden_crates(krate: &str) -> &'static [&'static str] {
    const HTTP: &[&str] = &["axum", "tower", "tower-http", "hyper", "hyper-util"];
    match krate {
        // The engine is pure computation: no runtime, no HTTP, no metrics.
        "hodos-engine" => &[
            "tokio",
            "axum",
            "tower",
            "tower-http",
            "hyper",
            "metrics",
            "arc-swap",
        ],
        // Serving records metrics but knows nothing of HTTP; nor do
        // measuring and learning.
        "hodos-serving" | "hodos-truth" | "hodos-learn" => HTTP,
        _ => &[],
    }
}

/// Dev-only crates (tests, benches, examples and the load generator) and
/// their folders.
const DEV_ONLY: &[(&str, &str)] = &[
    ("hodos-testkit", "src/testkit"),
    ("hodos-test-support", "tests/support"),
    ("hodos-test-replay", "tests/support-replay"),
    ("hodos-test-service", "tests/support-service"),
];

fn is_dev_only(name: &str) -> bool {
    DEV_ONLY.iter().any(|(n, _)| *n == name)
}

/// The layer crates a dev-only crate needs, through the dev-only crates it
/// depends on as well.
fn layers_needed(dev: &str, crates: &BTreeMap<String, (String, String)>) -> Vec<String> {
    let Some((manifest, _)) = crates.get(dev) else {
        return Vec::new();
    };
    let mut out = Vec::new();
    for d in deps(manifest).0 {
        if is_dev_only(&d) {
            out.extend(layers_needed(&d, crates));
        } else if d.starts_with("hodos") {
            out.push(d);
        }
    }
    out.sort();
    out.dedup();
    out
}

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// `[dependencies]` and `[dev-dependencies]` names of a manifest.
fn deps(manifest: &str) -> (Vec<String>, Vec<String>) {
    let v: toml::Table = toml::from_str(manifest).expect("manifest parses");
    let names = |k: &str| -> Vec<String> {
        v.get(k)
            .and_then(|t| t.as_table())
            .map(|t| t.keys().cloned().collect())
            .unwrap_or_default()
    };
    (names("dependencies"), names("dev-dependencies"))
}

/// Every violation of the crate rules, given each crate's manifest text and
/// the text of its root source file.
fn crate_violations(crates: &BTreeMap<String, (String, String)>) -> Vec<String> {
    let mut bad = Vec::new();
    for (i, (name, _, allowed)) in LAYERS.iter().enumerate() {
        let Some((manifest, root_src)) = crates.get(*name) else {
            bad.push(format!("{name}: crate missing"));
            continue;
        };
        let (normal, dev) = deps(manifest);
        for d in &normal {
            if d.starts_with("hodos") && !allowed.contains(&d.as_str()) {
                let above = LAYERS[i..].iter().any(|(n, _, _)| n == d);
                let what = if is_dev_only(d) {
                    "a dev-only crate"
                } else if above {
                    "a layer at or above it"
                } else {
                    "a crate outside the layers"
                };
                bad.push(format!("{name} depends on {d} ({what})"));
            }
            if forbidden_crates(name).contains(&d.as_str()) {
                bad.push(format!(
                    "{name} depends on {d}, which its layer must not know"
                ));
            }
        }
        for d in &dev {
            if d.starts_with("hodos") && !is_dev_only(d) && !allowed.contains(&d.as_str()) {
                bad.push(format!("{name}'s tests depend on {d}, a layer above it"));
            }
            if is_dev_only(d) {
                for needed in layers_needed(d, crates) {
                    if needed != *name && !allowed.contains(&needed.as_str()) {
                        bad.push(format!(
                            "{name}'s tests use {d}, which needs {needed} (above {name})"
                        ));
                    }
                }
            }
        }
        let forbids = root_src.contains("#![forbid(unsafe_code)]");
        let denies = root_src.contains("#![deny(unsafe_code)]");
        match (*name, forbids, denies) {
            (_, true, _) => {}
            ("hodos-serving", false, true) => {}
            _ => bad.push(format!("{name}: crate root does not forbid unsafe code")),
        }
    }
    bad
}

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    for e in std::fs::read_dir(dir).expect("read src") {
        let p = e.expect("dir entry").path();
        if p.is_dir() {
            rust_files(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

/// Rank of an engine module; a module may name only modules of lower rank
/// (or itself).
fn engine_rank(module: &str) -> Option<u8> {
    Some(match module {
        "geo" => 0,
        "graph" => 1,
        "import" | "order" | "snap" | "segments" => 2,
        "cch" => 3,
        "metric" => 4,
        "calibration" => 5,
        "artifact" => 6,
        "region" | "build" => 7,
        // Test-only fixtures (`#[cfg(test)] mod testing`): may use every
        // engine module, none may use it.
        "testing" => 8,
        _ => return None,
    })
}

/// The identifiers that follow each `prefix` on a line.
fn paths_after<'a>(line: &'a str, prefix: &str) -> Vec<&'a str> {
    let mut out = Vec::new();
    let mut rest = line;
    while let Some(i) = rest.find(prefix) {
        let before = rest[..i].chars().last();
        let tail = &rest[i + prefix.len()..];
        let end = tail
            .find(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
            .unwrap_or(tail.len());
        if !before.is_some_and(|c| c.is_ascii_alphanumeric() || c == '_') {
            out.push(&tail[..end]);
        }
        rest = tail;
    }
    out
}

/// The non-test code lines of a file, numbered from 1.
fn code_lines(text: &str) -> Vec<(usize, &str)> {
    let lines: Vec<&str> = text.lines().collect();
    let mut out = Vec::new();
    for (n, line) in lines.iter().enumerate() {
        let code = line.trim_start();
        if code.starts_with("#[cfg(test)]") {
            // `#[cfg(test)] mod tests;` names a file (skipped) and the code
            // after it is still checked; an inline test module runs to the
            // end of the file by convention.
            let next = lines.get(n + 1).map(|l| l.trim()).unwrap_or("");
            if next.starts_with("mod ") && next.ends_with(';') {
                continue;
            }
            break;
        }
        if code.starts_with("//") {
            continue;
        }
        out.push((n + 1, code));
    }
    out
}

fn is_test_file(rel: &Path) -> bool {
    rel.file_name()
        .is_some_and(|f| f == "tests.rs" || f == "testing.rs")
}

/// Violations of the engine's module ranks under `engine` (its source folder).
fn engine_violations(engine: &Path) -> Vec<String> {
    let mut files = Vec::new();
    rust_files(engine, &mut files);
    files.sort();
    let mut bad = Vec::new();
    for f in files {
        let rel = f.strip_prefix(engine).expect("under engine");
        if rel == Path::new("lib.rs") || is_test_file(rel) || rel.starts_with("tests") {
            continue;
        }
        let m = rel
            .components()
            .next()
            .unwrap()
            .as_os_str()
            .to_string_lossy()
            .trim_end_matches(".rs")
            .to_string();
        let Some(own) = engine_rank(&m) else {
            bad.push(format!(
                "engine/{}: module {m} unranked (add it to tests/layers.rs)",
                rel.display()
            ));
            continue;
        };
        let text = std::fs::read_to_string(&f).expect("read file");
        for (n, code) in code_lines(&text) {
            let at = format!("engine/{}:{n}", rel.display());
            for target in paths_after(code, "crate::") {
                match engine_rank(target) {
                    Some(r) if r > own || (r == own && target != m) => {
                        bad.push(format!("{at}: engine::{m} reaches up to engine::{target}"))
                    }
                    Some(_) => {}
                    None => bad.push(format!("{at}: crate::{target} is not a ranked module")),
                }
            }
            for target in paths_after(code, "super::") {
                // `super::x` from <m>/<file>.rs stays inside <m>; from
                // <m>.rs it would name a sibling module.
                if rel.components().count() == 1 && engine_rank(target).is_some() {
                    bad.push(format!("{at}: engine::{m} names super::{target}"));
                }
            }
        }
    }
    bad
}

/// Names answer code must not use: every write side of a region.
const WRITE_SIDE: &[&str] = &[
    "RegionUpdater",
    "LiveLoop",
    "ModelUpdater",
    "Service",
    "snapshot::updater",
    "crate::service",
];

/// Violations under serving's `answer/` folder (`serving` is serving's
/// source folder).
fn answer_violations(serving: &Path) -> Vec<String> {
    let mut files = Vec::new();
    rust_files(&serving.join("answer"), &mut files);
    files.sort();
    let mut bad = Vec::new();
    for f in files {
        let rel = f.strip_prefix(serving).expect("under serving");
        if is_test_file(rel) {
            continue;
        }
        let text = std::fs::read_to_string(&f).expect("read file");
        for (n, code) in code_lines(&text) {
            for name in WRITE_SIDE {
                let word = code.match_indices(name).any(|(i, _)| {
                    let before = code[..i].chars().last();
                    let after = code[i + name.len()..].chars().next();
                    !before.is_some_and(|c| c.is_ascii_alphanumeric() || c == '_')
                        && !after.is_some_and(|c| c.is_ascii_alphanumeric() || c == '_')
                });
                if word {
                    bad.push(format!(
                        "serving/{}:{n}: answer code names {name}, a write side",
                        rel.display()
                    ));
                }
            }
        }
    }
    bad
}

/// The truth modules HTTP may name.
const TRUTH_FACE: &[&str] = &["online", "trips"];

/// Violations under the HTTP crate's folder: truth reached past its face.
fn http_violations(http: &Path) -> Vec<String> {
    let mut files = Vec::new();
    rust_files(http, &mut files);
    files.sort();
    let mut bad = Vec::new();
    for f in files {
        let rel = f.strip_prefix(http).expect("under http");
        if is_test_file(rel) {
            continue;
        }
        let text = std::fs::read_to_string(&f).expect("read file");
        for (n, code) in code_lines(&text) {
            for m in paths_after(code, "hodos_truth::") {
                if !TRUTH_FACE.contains(&m) {
                    bad.push(format!(
                        "http/{}:{n}: HTTP reaches into hodos_truth::{m}",
                        rel.display()
                    ));
                }
            }
        }
    }
    bad
}

#[test]
fn answers_reach_no_write_and_http_only_truths_face() {
    let bad: Vec<String> = answer_violations(&root().join("src/serving"))
        .into_iter()
        .chain(http_violations(&root().join("src/http")))
        .collect();
    assert!(bad.is_empty(), "{}", bad.join("\n"));
}

fn workspace_crates() -> BTreeMap<String, (String, String)> {
    let mut out = BTreeMap::new();
    for (name, dir, _) in LAYERS {
        let dir = root().join(dir);
        let manifest = std::fs::read_to_string(dir.join("Cargo.toml")).expect("manifest");
        let lib = if *name == "hodos" {
            "src/lib.rs"
        } else {
            "lib.rs"
        };
        let src = std::fs::read_to_string(dir.join(lib)).expect("crate root");
        out.insert(name.to_string(), (manifest, src));
    }
    for (name, dir) in DEV_ONLY {
        let dir = root().join(dir);
        let manifest = std::fs::read_to_string(dir.join("Cargo.toml")).expect("manifest");
        let src = std::fs::read_to_string(dir.join("lib.rs")).expect("crate root");
        out.insert(name.to_string(), (manifest, src));
    }
    out
}

#[test]
fn crates_depend_only_downward() {
    let bad = crate_violations(&workspace_crates());
    assert!(bad.is_empty(), "crate rules broken:\n{}", bad.join("\n"));
}

#[test]
fn engine_modules_point_down() {
    let bad = engine_violations(&root().join("src/engine"));
    assert!(bad.is_empty(), "upward imports:\n{}", bad.join("\n"));
}

/// The checkers themselves find planted violations (so the tests above can
/// fail).
#[test]
fn checkers_catch_planted_violations() {
    let mut crates = workspace_crates();
    let plant = |crates: &mut BTreeMap<String, (String, String)>, name: &str, dep: &str| {
        let c = crates.get_mut(name).unwrap();
        c.0 = c.0.replacen(
            "[dependencies]\n",
            &format!("[dependencies]\n{dep} = {{ workspace = true }}\n"),
            1,
        );
    };
    plant(&mut crates, "hodos-serving", "hodos-http");
    plant(&mut crates, "hodos-engine", "metrics");
    plant(&mut crates, "hodos-truth", "axum");
    plant(&mut crates, "hodos-http", "hodos-testkit");
    plant(&mut crates, "hodos-truth", "hodos-learn");
    plant(&mut crates, "hodos-test-support", "hodos-serving");
    let engine = crates.get_mut("hodos-engine").unwrap();
    engine.0 = engine.0.replacen(
        "[dev-dependencies]\n",
        "[dev-dependencies]\nhodos-test-service = { workspace = true }\n",
        1,
    );
    let http = crates.get_mut("hodos-http").unwrap();
    http.1 = http.1.replace("#![forbid(unsafe_code)]", "");
    let bad = crate_violations(&crates);
    assert_eq!(bad.len(), 9, "{bad:#?}");
    let has = |s: &str| assert!(bad.iter().any(|b| b.contains(s)), "{s} not in {bad:#?}");
    has("hodos-engine depends on metrics");
    has("hodos-serving depends on hodos-http (a layer at or above it)");
    has("hodos-truth depends on hodos-learn (a layer at or above it)");
    has("hodos-truth depends on axum");
    has("hodos-http depends on hodos-testkit (a dev-only crate)");
    has("hodos-http: crate root does not forbid unsafe code");
    has("hodos-engine's tests use hodos-test-support, which needs hodos-serving");
    has("hodos-engine's tests use hodos-test-service, which needs hodos (above");
    has("hodos-engine's tests use hodos-test-service, which needs hodos-serving");

    let dir = tempfile::tempdir().unwrap();
    let write = |rel: &str, text: &str| {
        let p = dir.path().join(rel);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(p, text).unwrap();
    };
    write(
        "cch/matrix.rs",
        "use crate::region::Region;\n// crate::build in a comment is fine\n",
    );
    write("geo.rs", "use crate::graph::RoadGraph;\n");
    write(
        "graph.rs",
        "#[cfg(test)]\nmod t { use crate::region::X; }\n",
    );
    write("snap.rs", "use super::cch::Cch;\n");
    write("cch/tests.rs", "use crate::testing::city;\n");
    write("tests/main.rs", "mod geo;\n");
    write("tests/geo.rs", "use hodos_engine::region::Region;\n");
    let bad = engine_violations(dir.path());
    assert_eq!(bad.len(), 3, "{bad:#?}");
    assert!(bad[0].contains("cch/matrix.rs:1: engine::cch reaches up to engine::region"));
    assert!(bad[1].contains("geo.rs:1: engine::geo reaches up to engine::graph"));
    assert!(bad[2].contains("snap.rs:1: engine::snap names super::cch"));
}

/// The serving and HTTP checkers find planted violations.
#[test]
fn answer_and_http_checkers_catch_planted_violations() {
    let dir = tempfile::tempdir().unwrap();
    let write = |rel: &str, text: &str| {
        let p = dir.path().join(rel);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(p, text).unwrap();
    };
    write(
        "serving/answer/trip.rs",
        "use crate::snapshot::RegionReader;\nuse crate::snapshot::RegionUpdater;\n// LiveLoop in a comment is fine\n",
    );
    write(
        "serving/answer/gate.rs",
        "fn f(s: &crate::service::Service) {}\n",
    );
    write("serving/answer/tests.rs", "use crate::service::Service;\n");
    write(
        "http/admin.rs",
        "use hodos_truth::online::score_batch;\nuse hodos_truth::replay::replay_trip;\n",
    );
    let bad = answer_violations(&dir.path().join("serving"));
    assert_eq!(bad.len(), 3, "{bad:#?}");
    assert!(bad[0].contains("answer/gate.rs:1: answer code names Service"));
    assert!(bad[1].contains("answer/gate.rs:1: answer code names crate::service"));
    assert!(bad[2].contains("answer/trip.rs:2: answer code names RegionUpdater"));
    let bad = http_violations(&dir.path().join("http"));
    assert_eq!(bad.len(), 1, "{bad:#?}");
    assert!(bad[0].contains("http/admin.rs:2: HTTP reaches into hodos_truth::replay"));
}
