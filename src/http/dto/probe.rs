//! Response shapes of the probes: liveness (`/healthz`) and readiness
//! (`/readyz`), and the conversion from a region's serving status.
//!
//! Fields are declared in alphabetical order: the answers were first built
//! as `serde_json::Value`s, whose keys serialize sorted, and keeping that
//! order keeps the bytes.

use crate::serving::snapshot::RegionStatus;
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
    /// Why the region is degraded (`null` while serving).
    pub reason: Option<String>,
    pub region: String,
    /// `serving` or `degraded`.
    pub state: &'static str,
}

impl RegionReadiness {
    pub fn new(region: &str, s: &RegionStatus) -> Self {
        RegionReadiness {
            generation: s.generation,
            reason: s.degraded_reason.clone(),
            region: region.to_string(),
            state: if s.ready { "serving" } else { "degraded" },
        }
    }

    pub fn degraded(&self) -> bool {
        !matches!(self.state, "serving")
    }
}

/// `GET /readyz`: ready once every region serves or is marked degraded.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ReadyResponse {
    pub degraded_regions: usize,
    pub regions: Vec<RegionReadiness>,
    /// Always `ready` (start-up waits for every region).
    pub status: &'static str,
}

impl From<Vec<RegionReadiness>> for ReadyResponse {
    fn from(regions: Vec<RegionReadiness>) -> Self {
        ReadyResponse {
            degraded_regions: regions.iter().filter(|r| r.degraded()).count(),
            regions,
            status: "ready",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Byte for byte the form `/readyz` sent before the DTOs existed (a
    /// `serde_json::Value`, keys sorted; captured from a degraded region).
    #[test]
    fn readiness_keeps_its_wire_form() {
        let s = RegionStatus {
            degraded_reason: Some("no artifact".into()),
            ..RegionStatus::default()
        };
        let r = ReadyResponse::from(vec![RegionReadiness::new("quellhaven", &s)]);
        assert_eq!(
            serde_json::to_string(&r).unwrap(),
            r#"{"degraded_regions":1,"regions":[{"generation":0,"reason":"no artifact","region":"quellhaven","state":"degraded"}],"status":"ready"}"#
        );
        assert_eq!(
            serde_json::to_string(&HealthResponse::ALIVE).unwrap(),
            r#"{"status":"alive"}"#
        );
    }
}
