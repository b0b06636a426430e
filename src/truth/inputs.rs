//! The trip inputs of one evaluation or training run: several files, each
//! in the named format or the one its name suggests, read with one time
//! zone and one duration cut-off, their reports of refused rows merged;
//! and what the accuracy report records of them ([`report::Inputs`]).
//!
//! The options mirror the command line's (`--trips`, `--format`, `--zone`,
//! `--max-duration-min`), and so do the refusals' messages.

use crate::report;
use crate::trips::{
    read_trips_file, ReadOptions, TripFormat, TripReadError, TripRecord, TripReport,
};
use chrono_tz::Tz;
use std::path::{Path, PathBuf};

/// Which trips to read, and how.
#[derive(Debug, Clone)]
pub struct TripInputs {
    /// Completed-trip files (plain, or gzip when the name ends in `.gz`).
    pub files: Vec<PathBuf>,
    /// One format for every file; `None`: each file's name suggests its
    /// own ([`TripFormat::from_name`]).
    pub format: Option<TripFormat>,
    /// IANA time zone of departures written without an offset (and of the
    /// region's hour-of-week profiles). `None`: such departures are
    /// refused (the TLC layout brings its own zone), and the zone reported
    /// is [`TripInputs::zone_name`]'s default.
    pub zone: Option<String>,
    /// Longest trip accepted, minutes (longer ones are refused by line).
    pub max_duration_min: f64,
}

/// One file's read, handed to the caller as soon as the file is read.
#[derive(Debug, Clone, Copy)]
pub struct FileRead<'a> {
    pub path: &'a Path,
    pub format: TripFormat,
    pub report: &'a TripReport,
}

impl std::fmt::Display for FileRead<'_> {
    /// `PATH: R rows, A accepted, F refused (first: line L: WHY)`.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let rep = self.report;
        write!(
            f,
            "{}: {} rows, {} accepted, {} refused",
            self.path.display(),
            rep.rows,
            rep.accepted,
            rep.refused
        )?;
        if let Some(e) = rep.first_errors.first() {
            write!(f, " (first: {e})")?;
        }
        Ok(())
    }
}

/// The trips of every file, in file order, and what was refused.
#[derive(Debug, Clone)]
pub struct ReadInputs {
    pub trips: Vec<TripRecord>,
    /// The files' reports merged (lines stay as each file counted them).
    pub report: TripReport,
    /// The zone name in force ([`TripInputs::zone_name`]).
    pub zone: String,
    /// The formats read, in order of first use.
    pub formats: Vec<TripFormat>,
}

/// Why the inputs could not be read (refused rows are reported, not
/// failed).
#[derive(Debug, thiserror::Error)]
pub enum InputError {
    #[error("--zone {0:?} is not an IANA time zone")]
    Zone(String),
    #[error("--max-duration-min must be positive")]
    MaxDuration,
    #[error(transparent)]
    Read(#[from] TripReadError),
    #[error("no trip was accepted; nothing to measure")]
    NoneAccepted,
}

impl TripInputs {
    /// The zone given, else `America/New_York` for the TLC format (the
    /// zone of its records), else `UTC`.
    pub fn zone_name(&self) -> String {
        self.zone.clone().unwrap_or_else(|| {
            if self.format == Some(TripFormat::Tlc) {
                "America/New_York".into()
            } else {
                "UTC".into()
            }
        })
    }

    /// Reads every file in order, calling `each` after each one; fails on
    /// a file that cannot be read and when no trip at all was accepted.
    pub fn read(&self, mut each: impl FnMut(&FileRead<'_>)) -> Result<ReadInputs, InputError> {
        let zone_name = self.zone_name();
        let zone: Tz = zone_name
            .parse()
            .map_err(|_| InputError::Zone(zone_name.clone()))?;
        if self.max_duration_min.is_nan() || self.max_duration_min <= 0.0 {
            return Err(InputError::MaxDuration);
        }
        let opts = ReadOptions {
            zone: self.zone.as_ref().map(|_| zone),
            max_duration_s: self.max_duration_min * 60.0,
            ..ReadOptions::default()
        };
        let mut trips = Vec::new();
        let mut report = TripReport::default();
        let mut formats = Vec::new();
        for path in &self.files {
            let format = self.format.unwrap_or_else(|| TripFormat::from_name(path));
            let (t, rep) = read_trips_file(path, format, &opts)?;
            each(&FileRead {
                path,
                format,
                report: &rep,
            });
            if !formats.contains(&format) {
                formats.push(format);
            }
            trips.extend(t);
            report.merge(rep, opts.max_reported_errors);
        }
        if trips.is_empty() {
            return Err(InputError::NoneAccepted);
        }
        Ok(ReadInputs {
            trips,
            report,
            zone: zone_name,
            formats,
        })
    }

    /// What the accuracy report records of a run over these inputs,
    /// answered on `artifact` (with `historical` and `model`, when given).
    /// The hodos version is this crate's (the workspace shares one).
    pub fn report_inputs(
        &self,
        read: &ReadInputs,
        artifact: &Path,
        historical: Option<&Path>,
        model: Option<&Path>,
    ) -> report::Inputs {
        report::Inputs {
            trips: self.files.iter().map(|p| p.display().to_string()).collect(),
            format: read
                .formats
                .iter()
                .map(|f| f.as_str())
                .collect::<Vec<_>>()
                .join(", "),
            artifact: artifact.display().to_string(),
            historical: historical.map(|p| p.display().to_string()),
            model: model.map(|p| p.display().to_string()),
            time_zone: read.zone.clone(),
            hodos_version: env!("CARGO_PKG_VERSION").to_string(),
        }
    }
}
