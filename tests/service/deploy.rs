//! The deployment files agree with the service: the ConfigMap's
//! `hodos.toml` is a configuration hodos accepts (strict parsing and
//! validation, the admin token coming from the Secret as
//! `HODOS_ADMIN_TOKEN`), and its drain fits the pod's termination grace
//! period after the preStop pause. The manifests themselves are validated
//! against the Kubernetes schemas by `kubernetes-validate --strict` in
//! `.ci/run`.

use hodos::config::Config;

fn file(p: &str) -> String {
    std::fs::read_to_string(std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join(p)).unwrap()
}

/// The first integer after `key:` in `text`.
fn number_after(text: &str, key: &str) -> u64 {
    let i = text.find(key).unwrap_or_else(|| panic!("{key} not found")) + key.len();
    text[i..]
        .trim_start_matches([':', ' ', '"', '['])
        .split(|c: char| !c.is_ascii_digit())
        .next()
        .unwrap()
        .parse()
        .unwrap()
}

#[test]
fn configmap_is_a_valid_configuration_that_drains_in_time() {
    let cm = file("deploy/k8s/configmap.yaml");
    let start = cm.find("hodos.toml: |").expect("hodos.toml key") + "hodos.toml: |".len();
    let toml: String = cm[start..]
        .lines()
        .skip(1)
        .map(|l| l.strip_prefix("    ").unwrap_or(l))
        .collect::<Vec<_>>()
        .join("\n");
    let text = format!("{toml}\n");
    let mut cfg = Config::parse(&text).unwrap_or_else(|e| panic!("{e}\n{text}"));
    // What the Secret provides at run time.
    cfg.admin.token = "from-the-secret-0123456789".into();
    cfg.validate().unwrap();
    let drain = number_after(&text, "drain_seconds =");
    let deploy = file("deploy/k8s/deployment.yaml");
    let grace = number_after(&deploy, "terminationGracePeriodSeconds");
    let pause = number_after(&deploy, r#"command: ["sleep", "#);
    assert!(
        pause + drain < grace,
        "preStop {pause} s + drain {drain} s must end before the grace period of {grace} s"
    );
}
