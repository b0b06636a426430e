//! The HTTP API's own request and response shapes: the wire contract.
//!
//! Handlers parse requests into these types, call the serving layer, and
//! convert its results back through the `From` conversions here; no engine
//! or serving type is serialized directly, so those stay free to change.
//!
//! # Layout
//!
//! - [`request`]: answer-API requests, their parsing and validation.
//! - [`public`]: answer-API responses (ETA, route, matrix).
//! - [`admin`]: admin-API responses (status, update outcomes, reports).
//! - [`probe`]: liveness and readiness responses.

pub mod admin;
pub mod probe;
pub mod public;
pub mod request;

pub use admin::{
    HistoricalAccepted, LiveAccepted, ModelAccepted, ProfilesDto, RegionStatusDto,
    ReloadOutcomeDto, ReloadResponse, RowErrorDto, StatusResponse, TableReportDto,
};
pub use probe::{HealthResponse, ReadyResponse, RegionReadiness};
pub use public::{
    round3, EtaResponse, LineString, MatrixResponse, ProfileRef, RouteResponse, SnapshotRef,
    SourcesDto,
};
pub use request::{
    parse_eta_query, parse_json, parse_leaving, Coord, EtaRequest, MatrixRequest, MatrixTrip, Trip,
};
