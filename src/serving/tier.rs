//! Answer tiers, speed sources and fallback reasons: the closed vocabulary
//! that tells a caller which source answered and why a better one did not.
//!
//! # Sources
//!
//! Every graph answer (ETA, route, matrix cell) reports [`Sources`]: the
//! share of its travel time on edges whose speed was a fresh live
//! observation blended in (`live`; fresh when the live blend was made), the historical table's row for that
//! edge and hour (`historical`), or the edge's default free-flow speed
//! (`free_flow`). Shares add up to 1; partial first/last edges count with
//! their partial time. A trip of zero time counts wholly in the source of
//! the origin's road.
//!
//! # Tiers
//!
//! Best first: `live`, `historical`, `free_flow`, `heuristic`
//! (great-circle distance × circuity ÷ speed, from the region's calibration
//! or the configured defaults). A graph answer's tier is the source with the
//! largest share of its travel time; ties go to the better source
//! ([`Sources::tier`]). So a route with no time on fresh live edges is never
//! `live`, and one wholly on them always is.
//!
//! # Reasons
//!
//! `fallback_reason` says why an answer is not `live`; `None` when it is
//! `live`, and for graph answers with a departure time away from now (live
//! data does not apply). Each reason's exact condition is on its variant.
//!
//! # Data age
//!
//! `speeds_age_s` is the age of the data behind the tier: the region's
//! newest live observation for `live`, the historical table's upload for
//! `historical`, none for `free_flow` and `heuristic`.

use serde::Serialize;

/// Which source carried an answer; ordered best first (`Ord`: a worse tier
/// is greater).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Tier {
    /// Most of the route's time lies on edges with fresh live observations.
    Live,
    /// Most of it lies on edges with a historical row for the hour.
    Historical,
    /// Most of it lies on edges at their default free-flow speed.
    FreeFlow,
    /// No graph answer: a great-circle estimate.
    Heuristic,
}

impl Tier {
    pub const ALL: [Tier; 4] = [
        Tier::Live,
        Tier::Historical,
        Tier::FreeFlow,
        Tier::Heuristic,
    ];

    pub fn as_str(self) -> &'static str {
        match self {
            Tier::Live => "live",
            Tier::Historical => "historical",
            Tier::FreeFlow => "free_flow",
            Tier::Heuristic => "heuristic",
        }
    }
}

/// Shares of a graph answer's travel time per speed source (each in
/// `0..=1`, adding up to 1).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Sources {
    pub live: f64,
    pub historical: f64,
    pub free_flow: f64,
}

impl Sources {
    /// Shares from milliseconds per source class (indexed by
    /// [`crate::speeds::sources`]' classes). All zero (a trip of no
    /// time) counts wholly in `zero_class`.
    pub fn from_class_ms(ms: &[u32], zero_class: u8) -> Sources {
        use crate::speeds::sources::{FREE_FLOW, HISTORICAL, LIVE};
        let at = |c: u8| f64::from(ms.get(c as usize).copied().unwrap_or(0));
        let total = at(LIVE) + at(HISTORICAL) + at(FREE_FLOW);
        if total <= 0.0 {
            let one = |c: u8| if c == zero_class { 1.0 } else { 0.0 };
            return Sources {
                live: one(LIVE),
                historical: one(HISTORICAL),
                free_flow: one(FREE_FLOW),
            };
        }
        Sources {
            live: at(LIVE) / total,
            historical: at(HISTORICAL) / total,
            free_flow: at(FREE_FLOW) / total,
        }
    }

    /// The tier: the source with the largest share, ties to the better
    /// source (live, then historical, then free-flow). `live` needs a
    /// positive live share.
    pub fn tier(&self) -> Tier {
        if self.live > 0.0 && self.live >= self.historical && self.live >= self.free_flow {
            Tier::Live
        } else if self.historical >= self.free_flow && self.historical > 0.0 {
            Tier::Historical
        } else {
            Tier::FreeFlow
        }
    }
}

/// Why the answer is not from the live tier (or not from the graph).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FallbackReason {
    /// Leaving now, and the region holds no live layer (it has received
    /// no live observation).
    NoLiveData,
    /// Leaving now, and the region holds live observations, none fresh.
    LiveStale,
    /// Leaving now, the region holds fresh live observations, but none on
    /// this route (its live share is 0).
    NoLiveOnRoute,
    /// Leaving now, some of this route's time lies on fresh live edges, but
    /// less than on another source (0 < live share, and it is not the
    /// largest).
    LiveMinority,
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
    pub const ALL: [FallbackReason; 10] = [
        FallbackReason::NoLiveData,
        FallbackReason::LiveStale,
        FallbackReason::NoLiveOnRoute,
        FallbackReason::LiveMinority,
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
            FallbackReason::NoLiveOnRoute => "no_live_on_route",
            FallbackReason::LiveMinority => "live_minority",
            FallbackReason::OffNetwork => "off_network",
            FallbackReason::Unreachable => "unreachable",
            FallbackReason::BudgetExceeded => "budget_exceeded",
            FallbackReason::Overloaded => "overloaded",
            FallbackReason::OutsideRegions => "outside_regions",
            FallbackReason::RegionUnavailable => "region_unavailable",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::speeds::sources::{FREE_FLOW, HISTORICAL, LIVE};

    /// The documented rule, by hand: largest share wins, ties to the better
    /// source, no live share → never live, all live → live; shares add up.
    #[test]
    fn tier_is_the_largest_share_ties_to_the_better() {
        let s = |l: u32, h: u32, f: u32| {
            let mut ms = [0; 3];
            ms[LIVE as usize] = l;
            ms[HISTORICAL as usize] = h;
            ms[FREE_FLOW as usize] = f;
            Sources::from_class_ms(&ms, FREE_FLOW)
        };
        assert_eq!(s(1, 0, 0).tier(), Tier::Live);
        assert_eq!(s(0, 5, 5).tier(), Tier::Historical);
        assert_eq!(s(4, 4, 1).tier(), Tier::Live);
        assert_eq!(s(3, 4, 4).tier(), Tier::Historical);
        assert_eq!(s(3, 2, 4).tier(), Tier::FreeFlow);
        assert_eq!(s(0, 0, 9).tier(), Tier::FreeFlow);
        let x = s(1000, 2000, 1000);
        assert_eq!((x.live, x.historical, x.free_flow), (0.25, 0.5, 0.25));
        // A zero-time trip counts in its road's class.
        assert_eq!(
            Sources::from_class_ms(&[0; 3], HISTORICAL).tier(),
            Tier::Historical
        );
        let z = Sources::from_class_ms(&[0; 3], FREE_FLOW);
        assert_eq!(z.live + z.historical + z.free_flow, 1.0);
    }
}
