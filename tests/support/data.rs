//! Test inputs on disk: the OpenStreetMap fixtures copied into
//! `tests/data`, the DIMACS NY files (or `None` after the `SKIPPED` line,
//! a failure under `HODOS_REQUIRE_DATA=1`), and small input files written
//! by a test.

use hodos_testkit::DimacsNy;
use std::path::{Path, PathBuf};

/// The DIMACS NY files, or `None` after printing why the check is skipped.
pub fn dimacs_ny() -> Option<DimacsNy> {
    DimacsNy::find().map_err(hodos_testkit::skipped).ok()
}

/// The OSM fixtures copied into tests/data.
pub fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("../data")
        .join(name)
}

/// Writes `content` to `dir/name` and returns the path.
pub fn write(dir: &Path, name: &str, content: impl AsRef<[u8]>) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, content).unwrap();
    path
}

#[cfg(test)]
mod tests {
    use super::*;
    use hodos_testkit::child::{is_child, run_alone, test_name};
    use hodos_testkit::{DATA_DIR_ENV, REQUIRE_DATA_ENV};

    /// Every check that needs DIMACS NY asks [`dimacs_ny`]: with the data
    /// folder pointing at an empty directory it skips, and under
    /// `HODOS_REQUIRE_DATA=1` that skip fails (each in a child process, so
    /// the variables are its own).
    #[test]
    fn missing_ny_skips_or_fails_as_required() {
        let name = test_name(module_path!(), "missing_ny_skips_or_fails_as_required");
        if is_child(&name) {
            assert!(dimacs_ny().is_none(), "no data in an empty directory");
            return;
        }
        let empty = tempfile::tempdir().unwrap();
        let dir = empty.path().to_str().unwrap();
        let skipped = run_alone(&name, &[(DATA_DIR_ENV, dir), (REQUIRE_DATA_ENV, "0")]);
        let err = String::from_utf8_lossy(&skipped.stderr);
        assert!(skipped.status.success(), "{err}");
        assert!(
            err.contains("SKIPPED: ") && err.contains("USA-road-d.NY"),
            "{err}"
        );
        let failed = run_alone(&name, &[(DATA_DIR_ENV, dir), (REQUIRE_DATA_ENV, "1")]);
        let err = String::from_utf8_lossy(&failed.stderr);
        assert!(!failed.status.success(), "{err}");
        assert!(err.contains("HODOS_REQUIRE_DATA=1"), "{err}");
    }
}
