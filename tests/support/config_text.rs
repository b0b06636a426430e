//! Configuration text for tests and benchmarks that run a service on one
//! region: the `[[region]]` table, with the coverage box padded around
//! the graph's bounding box.

use hodos_engine::geo::LatLon;
use std::path::Path;

/// A `[[region]]` table named `name` on `artifact` with its own
/// `state_dir`, covering `lo`..`hi` widened by `pad` degrees on each side.
pub fn region_table(
    name: &str,
    artifact: &Path,
    state_dir: &Path,
    lo: LatLon,
    hi: LatLon,
    pad: f64,
) -> String {
    format!(
        r#"[[region]]
name = "{name}"
artifact = "{}"
state_dir = "{}"
coverage = {{ bbox = [{}, {}, {}, {}] }}
"#,
        artifact.display(),
        state_dir.display(),
        lo.lat - pad,
        lo.lon - pad,
        hi.lat + pad,
        hi.lon + pad
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The `toml` crate reads the table back with the padded box.
    #[test]
    fn region_table_is_toml() {
        let text = region_table(
            "r",
            Path::new("/a/b.hodos"),
            Path::new("/s"),
            LatLon::new(1.0, 2.0),
            LatLon::new(3.0, 4.0),
            0.5,
        );
        let v: toml::Value = toml::from_str(&text).unwrap();
        let r = &v["region"][0];
        assert_eq!(r["name"].as_str(), Some("r"));
        assert_eq!(r["artifact"].as_str(), Some("/a/b.hodos"));
        assert_eq!(r["state_dir"].as_str(), Some("/s"));
        let b: Vec<f64> = r["coverage"]["bbox"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_float().unwrap())
            .collect();
        assert_eq!(b, [0.5, 1.5, 3.5, 4.5]);
    }
}
