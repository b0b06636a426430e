//! Answer tiers and fallback reasons: the closed vocabulary that tells a
//! caller which source answered and why a better one did not.
//!
//! Tiers, best first: `live` (historical blended with fresh live
//! observations), `historical` (the hour-of-week profile alone, free-flow
//! where it has no row), `heuristic` (great-circle distance × circuity ÷
//! speed, from the region's calibration or the configured defaults).

use serde::Serialize;

#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Tier {
    Live,
    Historical,
    Heuristic,
}

impl Tier {
    pub const ALL: [Tier; 3] = [Tier::Live, Tier::Historical, Tier::Heuristic];

    pub fn as_str(self) -> &'static str {
        match self {
            Tier::Live => "live",
            Tier::Historical => "historical",
            Tier::Heuristic => "heuristic",
        }
    }
}

/// Why the answer is not from the live tier (or not from the graph).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FallbackReason {
    /// The region has received no live observation (historical answered).
    NoLiveData,
    /// All live observations are older than the TTL (historical answered).
    LiveStale,
    /// A coordinate is farther from a road than the maximum snap distance.
    OffNetwork,
    /// No road path joins the two points.
    Unreachable,
    /// The graph work did not finish within the request's budget.
    BudgetExceeded,
    /// Graph concurrency was saturated.
    Overloaded,
    /// The trip is not inside any configured region.
    OutsideRegions,
    /// The region has no loaded graph (its artifact failed to load).
    RegionUnavailable,
}

impl FallbackReason {
    pub const ALL: [FallbackReason; 8] = [
        FallbackReason::NoLiveData,
        FallbackReason::LiveStale,
        FallbackReason::OffNetwork,
        FallbackReason::Unreachable,
        FallbackReason::BudgetExceeded,
        FallbackReason::Overloaded,
        FallbackReason::OutsideRegions,
        FallbackReason::RegionUnavailable,
    ];

    pub fn as_str(self) -> &'static str {
        match self {
            FallbackReason::NoLiveData => "no_live_data",
            FallbackReason::LiveStale => "live_stale",
            FallbackReason::OffNetwork => "off_network",
            FallbackReason::Unreachable => "unreachable",
            FallbackReason::BudgetExceeded => "budget_exceeded",
            FallbackReason::Overloaded => "overloaded",
            FallbackReason::OutsideRegions => "outside_regions",
            FallbackReason::RegionUnavailable => "region_unavailable",
        }
    }
}
