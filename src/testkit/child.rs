//! One test of the running test binary re-run alone in a child process:
//! for checks of process-wide state (the metrics recorder that every
//! service in a process shares), and for checking what an environment
//! variable does to a test. The child is the same binary run with the
//! test's exact name, so it cannot pass by running nothing: the helper
//! fails unless the child says it ran one test.

use std::process::{Command, Output};

/// Set in the child to the name of the test it runs.
pub const CHILD_ENV: &str = "HODOS_TEST_CHILD";

/// The test's name as the test harness prints it: `module` is the
/// caller's `module_path!()` (its first segment, the crate, is dropped)
/// and `test` the function's name.
pub fn test_name(module: &str, test: &str) -> String {
    match module.split_once("::") {
        Some((_, path)) => format!("{path}::{test}"),
        None => test.to_string(),
    }
}

/// Whether this process is the child re-running the test `name`.
pub fn is_child(name: &str) -> bool {
    std::env::var(CHILD_ENV).is_ok_and(|v| v == name)
}

/// Runs the test `name` (see [`test_name`]) of this test binary alone, in
/// a child process with `envs` set, and returns its output. Panics unless
/// the child ran exactly that one test.
pub fn run_alone(name: &str, envs: &[(&str, &str)]) -> Output {
    let exe = std::env::current_exe().expect("path of the test binary");
    let mut cmd = Command::new(exe);
    cmd.args([name, "--exact", "--nocapture", "--test-threads=1"])
        .env(CHILD_ENV, name);
    for (k, v) in envs {
        cmd.env(k, v);
    }
    let out = cmd.output().expect("run the test binary again");
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        stdout.contains("running 1 test"),
        "{name}: the child did not run that one test:\n{stdout}"
    );
    out
}

/// For a test that must be alone in its process. In the child, returns
/// true: run the test's body. Otherwise re-runs the test alone (see
/// [`run_alone`]), passes its output on, asserts that it passed and
/// returns false: the caller returns at once.
pub fn alone(module: &str, test: &str) -> bool {
    let name = test_name(module, test);
    if is_child(&name) {
        return true;
    }
    let out = run_alone(&name, &[]);
    print!("{}", String::from_utf8_lossy(&out.stdout));
    eprint!("{}", String::from_utf8_lossy(&out.stderr));
    assert!(out.status.success(), "{name} failed in its own process");
    false
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_drop_the_crate() {
        assert_eq!(test_name("service::dashboard", "shows"), "dashboard::shows");
        assert_eq!(test_name("hodos_testkit", "t"), "t");
    }

    /// The child runs in its own process with the variable set; the parent
    /// sees that process's outcome.
    #[test]
    fn a_test_re_run_alone_reports_its_own_outcome() {
        let name = test_name(
            module_path!(),
            "a_test_re_run_alone_reports_its_own_outcome",
        );
        if is_child(&name) {
            assert_eq!(std::env::var("HODOS_TESTKIT_PLANT").as_deref(), Ok("pass"));
            eprintln!("child pid {}", std::process::id());
            return;
        }
        let ok = run_alone(&name, &[("HODOS_TESTKIT_PLANT", "pass")]);
        let err = String::from_utf8_lossy(&ok.stderr);
        assert!(ok.status.success(), "{err}");
        assert!(
            !err.contains(&format!("child pid {}\n", std::process::id())),
            "{err}"
        );
        assert!(err.contains("child pid "), "{err}");
        let failed = run_alone(&name, &[("HODOS_TESTKIT_PLANT", "fail")]);
        assert!(!failed.status.success());
    }

    /// A name that matches no test fails instead of passing by running
    /// nothing.
    #[test]
    fn a_name_matching_no_test_fails() {
        let r = std::panic::catch_unwind(|| run_alone("child::tests::no_such_test", &[]));
        assert!(r.is_err());
    }
}
