#![forbid(unsafe_code)]
//! Accuracy from completed trips: reading the trips callers completed,
//! answering each one as hodos would have at its departure, and measuring
//! the error of those answers against what the trips really took.
//!
//! This layer sits above `serving` (it asks the same `hodos_serving::answer`
//! code the service answers from) and below `http`; it knows nothing of
//! HTTP.
//!
//! # Layout
//!
//! - `trips/`: [`trips::TripRecord`] and the readers (our CSV with a
//!   header, JSON lines, the NYC TLC yellow-taxi CSV layout as a column
//!   mapping), one file per format, with a line-numbered report of refused
//!   rows;
//! - `inputs`: a run's trip files read together ([`inputs::TripInputs`]:
//!   the format named or guessed per file, the time zone, the duration
//!   cut-off), their reports merged;
//! - `outcome`: [`outcome::TripOutcome`], one trip's answer beside its
//!   actual duration;
//! - `replay`: opens a `hodos_serving::answer::Catalog` from an artifact
//!   (and a historical table) and answers each trip with `leaving` = its
//!   departure;
//! - `measure`: the error metrics (MAPE, median and p90 absolute percentage
//!   error, median ratio, RMSLE, MAE, shares within ±10 % / ±20 %,
//!   interval coverage), overall and per group;
//! - `online`: completed trips scored while the service runs (posted, or
//!   the demo's), their error recorded as metrics by region and tier;
//! - `report/`: the HTML page with its plots and the same figures as JSON.
//!
//! Fitting a correction model on replayed trips is `hodos-learn`'s job.

pub mod inputs;
pub mod measure;
pub mod online;
pub mod outcome;
pub mod replay;
pub mod report;
pub mod trips;
