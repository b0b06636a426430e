//! The stdout table: its header, one row per run (latency percentiles,
//! errors, the main answer tiers) and the noise verdict of a run (other
//! work or the hypervisor took a noticeable share of the machine).

use crate::model::Summary;
use crate::noise::{NOISY_OTHER_CORES, NOISY_STOLEN_CORES};

/// The stdout table header.
pub fn table_header() -> String {
    format!(
        "{:<26} {:<8} {:>9} {:>9} {:>7} {:>8} {:>8} {:>8} {:>8} {:>8} {:>6}  {}",
        "scenario",
        "system",
        "target/s",
        "achieved",
        "ok%",
        "p50 ms",
        "p90 ms",
        "p99 ms",
        "p99.9",
        "max ms",
        "errors",
        "answers"
    )
}

fn short_answers(s: &Summary) -> String {
    let all: u64 = s.answers.values().sum();
    let mut v: Vec<(&String, &u64)> = s.answers.iter().collect();
    v.sort_by(|a, b| b.1.cmp(a.1));
    v.iter()
        .take(4)
        .map(|(k, n)| format!("{k} {:.1}%", 100.0 * **n as f64 / all.max(1) as f64))
        .collect::<Vec<_>>()
        .join(", ")
}

/// One stdout table row.
pub fn table_row(s: &Summary) -> String {
    let l = &s.latency_ms;
    format!(
        "{:<26} {:<8} {:>9.0} {:>9.0} {:>6.1}% {:>8.3} {:>8.3} {:>8.3} {:>8.3} {:>8.2} {:>6}  {}{}{}",
        s.scenario,
        s.system,
        s.target_rate,
        s.achieved_rate,
        100.0 * s.answered_share,
        l.p50,
        l.p90,
        l.p99,
        l.p999,
        l.max,
        s.error_total,
        short_answers(s),
        if s.errors.is_empty() {
            String::new()
        } else {
            format!(
                "  [{}]",
                s.errors
                    .iter()
                    .map(|(k, v)| format!("{k}={v}"))
                    .collect::<Vec<_>>()
                    .join(" ")
            )
        },
        noise(s)
    )
}

/// Whether other work (over 0.2 cores) or the hypervisor (over 0.05
/// cores stolen) took a noticeable share of the machine during the run.
pub fn is_noisy(s: &Summary) -> bool {
    match &s.machine {
        Some(m) => {
            let w = m.wall_s.max(1e-9);
            m.other_cpu_s / w > NOISY_OTHER_CORES || m.stolen_cpu_s / w > NOISY_STOLEN_CORES
        }
        None => false,
    }
}

/// `  (noisy: ...)` when other work or the hypervisor took a noticeable
/// share of the machine during the run.
fn noise(s: &Summary) -> String {
    let Some(m) = &s.machine else {
        return String::new();
    };
    let w = m.wall_s.max(1e-9);
    let (other, steal) = (m.other_cpu_s / w, m.stolen_cpu_s / w);
    if is_noisy(s) {
        format!("  (noisy: other work {other:.2} cores, stolen {steal:.2} cores)")
    } else {
        String::new()
    }
}
