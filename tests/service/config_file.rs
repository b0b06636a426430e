//! The shipped example configuration parses, validates and names every
//! option; bad configurations are refused naming the key.

use hodos::config::Config;

#[test]
fn shipped_config_is_valid_and_commented() {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("config/hodos.toml");
    let cfg = Config::load(&path).expect("config/hodos.toml loads");
    assert_eq!(cfg.regions.len(), 1);
    let text = std::fs::read_to_string(&path).unwrap();
    // Every key in the file is preceded by a comment line.
    let lines: Vec<&str> = text.lines().collect();
    for (i, l) in lines.iter().enumerate() {
        let t = l.trim();
        if t.is_empty() || t.starts_with('#') || t.starts_with('[') {
            continue;
        }
        assert!(
            lines[..i]
                .iter()
                .rev()
                .find(|p| !p.trim().is_empty())
                .map(|p| p.trim().starts_with('#'))
                .unwrap_or(false),
            "line {}: {t} has no comment above it",
            i + 1
        );
    }
}

#[test]
fn bad_configurations_name_the_key() {
    let base = r#"
[[region]]
name = "a"
artifact = "x.hodos"
state_dir = "s"
coverage = { bbox = [1, 1, 2, 2] }
"#;
    assert!(Config::parse(base).unwrap().validate().is_ok());
    for (text, key) in [
        (format!("[query]\nmax_snapm = 3\n{base}"), "max_snapm"),
        (
            format!("[query]\ndefault_budget_ms = 5000\nmax_budget_ms = 10\n{base}"),
            "default_budget_ms",
        ),
        (
            format!("[tables]\nmax_bad_share = 2.0\n{base}"),
            "max_bad_share",
        ),
        (base.replace("name = \"a\"", "name = \"a b\""), "name"),
        (base.replace("[1, 1, 2, 2]", "[2, 2, 1, 1]"), "bbox"),
        (format!("{base}time_zone = \"Mars/Olympus\"\n"), "time_zone"),
        // state_dir is required (config/hodos.toml says so): missing or
        // empty, the error names it.
        (base.replace("state_dir = \"s\"\n", ""), "state_dir"),
        (
            base.replace("state_dir = \"s\"", "state_dir = \"\""),
            "state_dir",
        ),
    ] {
        let err = match Config::parse(&text) {
            Err(e) => e.to_string(),
            Ok(c) => {
                let (k, m) = c.validate().expect_err(&text);
                format!("{k}: {m}")
            }
        };
        assert!(err.contains(key), "{err} should name {key}");
    }
}
