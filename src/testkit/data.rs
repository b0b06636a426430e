//! Where the shared open datasets are: `$HODOS_DATA_DIR` (set by the CI
//! script), else `../shared/data` beside the repository. Checks that need
//! them and find them absent print one `SKIPPED: <why>` line and pass,
//! unless `HODOS_REQUIRE_DATA=1` (set by the CI script), which makes the
//! absence a failure; benchmarks say so and fall back to a synthetic city.

use std::fmt::Display;
use std::path::{Path, PathBuf};

/// The environment variable naming the datasets directory.
pub const DATA_DIR_ENV: &str = "HODOS_DATA_DIR";

/// `$HODOS_DATA_DIR`, else `shared/data` beside the repository. Not checked:
/// callers test for the files they need.
pub fn data_dir() -> PathBuf {
    std::env::var_os(DATA_DIR_ENV)
        .map(PathBuf::from)
        .unwrap_or_else(|| Path::new(env!("CARGO_MANIFEST_DIR")).join("../../../shared/data"))
}

/// The environment variable that turns a check skipped for want of the
/// shared data into a failure (when `1`).
pub const REQUIRE_DATA_ENV: &str = "HODOS_REQUIRE_DATA";

/// Prints the line a check prints when it passes without running because
/// the shared data is absent; panics instead when `HODOS_REQUIRE_DATA=1`.
pub fn skipped(why: impl Display) {
    skipped_unless_required(REQUIRE_DATA_ENV, why);
}

/// Prints `SKIPPED: <why>` for a check that passes without running;
/// panics instead when the environment variable `require` is `1` (CI sets
/// `HODOS_REQUIRE_DATA`, `HODOS_REQUIRE_NUMPY`, `HODOS_REQUIRE_CHROMIUM`).
pub fn skipped_unless_required(require: &str, why: impl Display) {
    let required = std::env::var(require).is_ok_and(|v| v == "1");
    assert!(!required, "{why} ({require}=1: required here, not skipped)");
    eprintln!("SKIPPED: {why}");
}

/// USA-road-*.NY of the 9th DIMACS Implementation Challenge, under
/// `<data dir>/dimacs`.
#[derive(Debug, Clone)]
pub struct DimacsNy {
    /// The folder holding the files (its SOURCES.md documents them).
    pub dir: PathBuf,
    /// `USA-road-d.NY.gr.gz`: arc lengths in decimetres.
    pub distance_gr: PathBuf,
    /// `USA-road-d.NY.co.gz`: node coordinates.
    pub coordinates: PathBuf,
    /// `USA-road-t.NY.gr.gz`: the same arcs with travel times.
    pub time_gr: PathBuf,
}

impl DimacsNy {
    /// The paths, whether or not the files exist.
    pub fn locate() -> Self {
        let dir = data_dir().join("dimacs");
        Self {
            distance_gr: dir.join("USA-road-d.NY.gr.gz"),
            coordinates: dir.join("USA-road-d.NY.co.gz"),
            time_gr: dir.join("USA-road-t.NY.gr.gz"),
            dir,
        }
    }

    /// The paths when all three files exist, else why not (for
    /// [`skipped`]).
    pub fn find() -> Result<Self, String> {
        let ny = Self::locate();
        for f in [&ny.distance_gr, &ny.coordinates, &ny.time_gr] {
            if !f.is_file() {
                return Err(format!(
                    "{} not found (set {DATA_DIR_ENV} to the directory holding dimacs/)",
                    f.display()
                ));
            }
        }
        Ok(ny)
    }
}

/// The NYC TLC yellow-taxi sample under `<data dir>/trips` (see its
/// SOURCES.md): the four monthly files, oldest first, when all exist, else
/// why not (for [`skipped`]).
pub fn tlc_trip_files() -> Result<Vec<PathBuf>, String> {
    let dir = data_dir().join("trips/nyc-tlc-yellow-sample");
    let files: Vec<PathBuf> = ["2015-01", "2016-01", "2016-02", "2016-03"]
        .iter()
        .map(|m| dir.join(format!("yellow_tripdata_{m}.csv.gz")))
        .collect();
    for f in &files {
        if !f.is_file() {
            return Err(format!(
                "{} not found (set {DATA_DIR_ENV} to the directory holding trips/)",
                f.display()
            ));
        }
    }
    Ok(files)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::child::{is_child, run_alone, test_name};

    /// A skip run in a child process: `HODOS_REQUIRE_DATA=1` makes it fail
    /// naming the variable and the reason; any other value lets it pass
    /// with its `SKIPPED` line.
    #[test]
    fn require_data_turns_a_skip_into_a_failure() {
        let name = test_name(module_path!(), "require_data_turns_a_skip_into_a_failure");
        if is_child(&name) {
            skipped("planted absence");
            return;
        }
        let passed = run_alone(&name, &[(REQUIRE_DATA_ENV, "0")]);
        let err = String::from_utf8_lossy(&passed.stderr);
        assert!(passed.status.success(), "{err}");
        assert!(err.contains("SKIPPED: planted absence"), "{err}");

        let failed = run_alone(&name, &[(REQUIRE_DATA_ENV, "1")]);
        let all = format!(
            "{}{}",
            String::from_utf8_lossy(&failed.stdout),
            String::from_utf8_lossy(&failed.stderr)
        );
        assert!(!failed.status.success(), "{all}");
        assert!(
            all.contains("planted absence (HODOS_REQUIRE_DATA=1: required here"),
            "{all}"
        );
        assert!(!all.contains("SKIPPED: planted absence"), "{all}");
    }
}
