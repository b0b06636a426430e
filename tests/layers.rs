//! The dependency arrows DEVELOPERS.md promises, checked on the source
//! text: every `crate::` path in a layer's (non-test) code names only a
//! layer below it, and the engine's modules only modules below them.
//!
//! Layers, bottom to top: `engine` → `serving` → `truth` → `http` → the top
//! (`config`, `demo`, `testkit`, `lib.rs`; the binary uses `hodos::`).
//! Inside `engine`: `geo` → `graph` → {`import`, `order`, `snap`} → `cch`
//! → `metric` → `calibration` → `artifact` → {`region`, `build`} →
//! `testing` (test-only fixtures).
//!
//! Lines that are comments are skipped, and so is everything from the
//! first `#[cfg(test)]` of a file on, and files named `tests.rs` or
//! `testing.rs` (unit tests and their fixtures kept in a file of their
//! own): unit tests may reach anywhere.

use std::path::{Path, PathBuf};

/// Rank of a top-level layer; a file may name only layers of lower rank
/// (or its own).
fn layer_rank(layer: &str) -> Option<u8> {
    Some(match layer {
        "engine" => 0,
        "serving" => 1,
        "truth" => 2,
        "http" => 3,
        "config" | "demo" | "testkit" => 4,
        _ => return None,
    })
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

/// External crates a layer must not use, as path prefixes.
fn forbidden_crates(layer: &str) -> &'static [&'static str] {
    match layer {
        // The engine is pure computation: no runtime, no HTTP, no metrics.
        "engine" => &["tokio::", "axum::", "tower::", "tower_http::", "metrics::"],
        // Serving records metrics but knows nothing of HTTP.
        "serving" => &["axum::", "tower::", "tower_http::", "hyper::"],
        // Completed trips and their measurement know nothing of HTTP either.
        "truth" => &["axum::", "tower::", "tower_http::", "hyper::"],
        _ => &[],
    }
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

/// `(layer, engine module)` of a file under src/.
fn place(rel: &Path) -> (String, Option<String>) {
    let parts: Vec<String> = rel
        .components()
        .map(|c| {
            c.as_os_str()
                .to_string_lossy()
                .trim_end_matches(".rs")
                .to_string()
        })
        .collect();
    let layer = parts[0].clone();
    let module =
        (layer == "engine" && parts.len() > 1 && parts[1] != "mod").then(|| parts[1].clone());
    (layer, module)
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

/// Every violation in the tree, as `file:line: message`.
fn violations(src: &Path) -> Vec<String> {
    let mut files = Vec::new();
    rust_files(src, &mut files);
    files.sort();
    let mut bad = Vec::new();
    for f in files {
        let rel = f.strip_prefix(src).expect("under src");
        if rel == Path::new("main.rs") || rel == Path::new("lib.rs") {
            continue;
        }
        if rel
            .file_name()
            .is_some_and(|f| f == "tests.rs" || f == "testing.rs")
        {
            // A `#[cfg(test)] mod tests;` / `mod testing;` file (unit tests
            // and their fixtures); the declaration is checked where it
            // stands, and the engine rank of `testing` keeps other engine
            // code from using it.
            continue;
        }
        let (layer, module) = place(rel);
        let Some(rank) = layer_rank(&layer) else {
            bad.push(format!(
                "{}: file outside every known layer (add it to tests/layers.rs and DEVELOPERS.md)",
                rel.display()
            ));
            continue;
        };
        let text = std::fs::read_to_string(&f).expect("read file");
        let lines: Vec<&str> = text.lines().collect();
        for (n, line) in lines.iter().enumerate() {
            let code = line.trim_start();
            if code.starts_with("#[cfg(test)]") {
                // `#[cfg(test)] mod tests;` names a file (skipped above) and
                // the code after it is still checked; an inline test module
                // runs to the end of the file by convention.
                let next = lines.get(n + 1).map(|l| l.trim()).unwrap_or("");
                if next.starts_with("mod ") && next.ends_with(';') {
                    continue;
                }
                break;
            }
            if code.starts_with("//") {
                continue;
            }
            let at = format!("{}:{}", rel.display(), n + 1);
            for target in paths_after(code, "crate::") {
                match layer_rank(target) {
                    Some(r) if r > rank => {
                        bad.push(format!("{at}: {layer} reaches up to {target}"))
                    }
                    Some(_) => {}
                    None => bad.push(format!("{at}: crate::{target} is not a known layer")),
                }
            }
            if let Some(m) = &module {
                let own = engine_rank(m).unwrap_or_else(|| panic!("engine module {m} unranked"));
                for target in paths_after(code, "crate::engine::") {
                    let r = engine_rank(target)
                        .unwrap_or_else(|| panic!("{at}: engine module {target} unranked"));
                    if r > own || (r == own && target != m) {
                        bad.push(format!("{at}: engine::{m} reaches up to engine::{target}"));
                    }
                }
                for target in paths_after(code, "super::") {
                    // `super::x` from engine/<m>/<file>.rs stays inside <m>;
                    // from engine/<m>.rs it would name a sibling module.
                    if rel.components().count() == 2 && engine_rank(target).is_some() {
                        bad.push(format!("{at}: engine::{m} names super::{target}"));
                    }
                }
            }
            for krate in forbidden_crates(&layer) {
                if !paths_after(code, krate).is_empty() {
                    bad.push(format!("{at}: {layer} uses {krate}"));
                }
            }
        }
    }
    bad
}

#[test]
fn dependency_arrows_point_down() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let bad = violations(&src);
    assert!(bad.is_empty(), "upward imports:\n{}", bad.join("\n"));
}

/// The checker itself finds an upward import (so the test above can fail).
#[test]
fn checker_catches_an_upward_import() {
    let dir = tempfile::tempdir().unwrap();
    let write = |rel: &str, text: &str| {
        let p = dir.path().join(rel);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(p, text).unwrap();
    };
    write(
        "engine/cch/matrix.rs",
        "use crate::engine::region::Region;\n// crate::http in a comment is fine\n",
    );
    write(
        "serving/answer.rs",
        "use crate::http::dto::X;\nuse axum::Json;\n",
    );
    write("engine/geo.rs", "fn f() { metrics::counter!(\"x\"); }\n");
    write(
        "http/mod.rs",
        "use crate::serving::answer::Catalog;\n#[cfg(test)]\nmod t { use crate::demo::X; }\n",
    );
    write(
        "serving/snapshot/mod.rs",
        "#[cfg(test)]\nmod tests;\nuse crate::http::Y;\n",
    );
    write("serving/snapshot/tests.rs", "use crate::testkit::Z;\n");
    write(
        "truth/replay.rs",
        "use crate::serving::answer::trip;\nuse crate::http::dto::Y;\n",
    );
    let bad = violations(dir.path());
    assert_eq!(bad.len(), 6, "{bad:#?}");
    assert!(bad[0].contains("engine::cch reaches up to engine::region"));
    assert!(bad[1].contains("engine uses metrics::"));
    assert!(bad[2].contains("serving reaches up to http"));
    assert!(bad[3].contains("serving uses axum::"));
    assert!(bad[4].contains("serving/snapshot/mod.rs:3: serving reaches up to http"));
    assert!(bad[5].contains("truth/replay.rs:2: truth reaches up to http"));
}
