//! One completed trip as every reader returns it: [`TripRecord`], with the
//! ETA hodos served for it when the caller kept one ([`ServedEta`]).

use chrono::{DateTime, FixedOffset};
use hodos_engine::geo::LatLon;
use hodos_serving::tier::Tier;
use serde::Serialize;

/// One completed trip.
#[derive(Debug, Clone, PartialEq)]
pub struct TripRecord {
    pub trip_id: Option<String>,
    pub from: LatLon,
    pub to: LatLon,
    /// When the trip set off, with the offset of its zone at that moment.
    pub leaving: DateTime<FixedOffset>,
    /// How long it took, seconds.
    pub duration_s: f64,
    /// How far it went, metres (odometer or meter), when known.
    pub distance_m: Option<f64>,
    pub vehicle: Option<String>,
    /// The ETA hodos served for this trip, when the caller kept it.
    pub served: Option<ServedEta>,
}

/// An ETA hodos served for a trip, as the caller kept it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ServedEta {
    pub eta_s: f64,
    pub tier: Option<Tier>,
    /// The snapshot generation that answered.
    pub snapshot: Option<u64>,
}
