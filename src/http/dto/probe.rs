//! Response shapes of the probes: liveness (`/healthz`) and readiness
//! (`/readyz`), and the conversion from a region's serving status.
//!
//! Fields are declared in alphabetical order: the answers were first built
//! as `serde_json::Value`s, whose keys serialize sorted, and keeping that
//! order keeps the bytes.

use crate::settings::ReadyWhen;
use hodos_serving::snapshot::RegionStatus;
use serde::Serialize;

/// `GET /healthz`: the process answers.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct HealthResponse {
    /// Always `alive`.
    pub status: &'static str,
}

impl HealthResponse {
    pub const ALIVE: HealthResponse = HealthResponse { status: "alive" };
}

/// One region in `/readyz`.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct RegionReadiness {
    pub generation: u64,
    /// Why the region is not `serving` (`null` while it is, and while it
    /// is still loading).
    pub reason: Option<String>,
    pub region: String,
    /// `serving`: graph answers from the tables the rules choose;
    /// `degraded`: graph answers, but a saved file or a table was refused
    /// (the reason names it); `estimates_only`: no graph, every answer
    /// comes from the heuristic tier; `loading`: no load has finished.
    pub state: &'static str,
}

impl RegionReadiness {
    pub fn new(region: &str, s: &RegionStatus) -> Self {
        let problems: Vec<&str> = s
            .historical_problems
            .iter()
            .chain(&s.live_problems)
            .map(String::as_str)
            .collect();
        let (state, reason) = if s.loading {
            ("loading", None)
        } else if s.ready && problems.is_empty() {
            ("serving", None)
        } else if s.ready {
            ("degraded", Some(problems.join("; ")))
        } else {
            let r = s.degraded_reason.as_deref().unwrap_or("no graph loaded");
            ("estimates_only", Some(r.to_string()))
        };
        RegionReadiness {
            generation: s.generation,
            reason,
            region: region.to_string(),
            state,
        }
    }

    /// Whether the region is anything but `serving`.
    pub fn degraded(&self) -> bool {
        !matches!(self.state, "serving")
    }
}

/// `GET /readyz`: whether the instance should take traffic under
/// `server.ready_when`, and each region's state. Answered with 200 when
/// `status` is `ready`, else 503.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ReadyResponse {
    /// Regions that are not `serving`.
    pub degraded_regions: usize,
    pub ready_when: &'static str,
    pub regions: Vec<RegionReadiness>,
    /// `ready` or `not_ready`.
    pub status: &'static str,
}

impl ReadyResponse {
    pub fn new(regions: Vec<RegionReadiness>, when: ReadyWhen) -> Self {
        let serving = regions.iter().filter(|r| !r.degraded()).count();
        let ready = match when {
            ReadyWhen::AllRegions => serving == regions.len(),
            ReadyWhen::AnyRegion => serving > 0,
        };
        ReadyResponse {
            degraded_regions: regions.len() - serving,
            ready_when: when.as_str(),
            regions,
            status: if ready { "ready" } else { "not_ready" },
        }
    }

    pub fn is_ready(&self) -> bool {
        self.status == "ready"
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The wire form (keys sorted, as when the answers were
    /// `serde_json::Value`s), captured from a region without a graph; since
    /// the readiness states were split, such a region is `estimates_only`
    /// and the instance is `not_ready` under `all_regions`.
    #[test]
    fn readiness_keeps_its_wire_form() {
        let s = RegionStatus {
            degraded_reason: Some("no artifact".into()),
            ..RegionStatus::default()
        };
        let r = ReadyResponse::new(
            vec![RegionReadiness::new("quellhaven", &s)],
            ReadyWhen::AllRegions,
        );
        assert_eq!(
            serde_json::to_string(&r).unwrap(),
            r#"{"degraded_regions":1,"ready_when":"all_regions","regions":[{"generation":0,"reason":"no artifact","region":"quellhaven","state":"estimates_only"}],"status":"not_ready"}"#
        );
        assert_eq!(
            serde_json::to_string(&HealthResponse::ALIVE).unwrap(),
            r#"{"status":"alive"}"#
        );
    }

    /// Every state, and both `ready_when` choices, over two regions
    /// (hand-enumerated: serving + each other state).
    #[test]
    fn states_and_ready_when() {
        let serving = RegionStatus {
            ready: true,
            ..RegionStatus::default()
        };
        let degraded = RegionStatus {
            ready: true,
            historical_problems: vec!["saved historical table not restored: x".into()],
            ..RegionStatus::default()
        };
        let estimates = RegionStatus {
            degraded_reason: Some("no artifact".into()),
            ..RegionStatus::default()
        };
        let loading = RegionStatus {
            loading: true,
            ..RegionStatus::default()
        };
        for (other, state) in [
            (&degraded, "degraded"),
            (&estimates, "estimates_only"),
            (&loading, "loading"),
        ] {
            let regions = || {
                vec![
                    RegionReadiness::new("a", &serving),
                    RegionReadiness::new("b", other),
                ]
            };
            assert_eq!(regions()[0].state, "serving");
            assert_eq!(regions()[1].state, state);
            assert_eq!(regions()[1].reason.is_some(), state != "loading");
            let all = ReadyResponse::new(regions(), ReadyWhen::AllRegions);
            assert!(!all.is_ready(), "{state}");
            assert_eq!(all.degraded_regions, 1);
            assert!(ReadyResponse::new(regions(), ReadyWhen::AnyRegion).is_ready());
        }
        assert!(!ReadyResponse::new(
            vec![RegionReadiness::new("b", &estimates)],
            ReadyWhen::AnyRegion
        )
        .is_ready());
    }
}
