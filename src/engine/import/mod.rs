//! Importers: turn an input source into a [`RoadGraph`](crate::graph::RoadGraph).
//!
//! - [`osm`]: OpenStreetMap PBF extracts (drivable roads, tags → speeds and
//!   directions; the tag rules live in [`osm_tags`]).
//! - [`dimacs`]: the 9th DIMACS Challenge `.gr` + `.co` text format (plain or
//!   gzip).
//! - [`synthetic`]: a deterministic fictional city for the demo and for scale.
//!
//! Importers report bad input as an [`ImportError`] naming the file (and the
//! line, for text formats); they never panic on input.

pub mod dimacs;
pub mod osm;
pub mod osm_tags;
pub mod synthetic;

use std::path::{Path, PathBuf};

/// A failure to read an input source.
///
/// A `cause` is written into the message and is not a `source()`: a
/// chain printer (anyhow's `{:#}`) would otherwise print it twice.
#[derive(Debug, thiserror::Error)]
pub enum ImportError {
    #[error("{}: {cause}", path.display())]
    Io {
        path: PathBuf,
        cause: std::io::Error,
    },
    #[error("{}:{line}: {msg}", path.display())]
    Syntax {
        path: PathBuf,
        line: usize,
        msg: String,
    },
    #[error("{}: {msg}", path.display())]
    Invalid { path: PathBuf, msg: String },
    #[error("{}: no drivable road found in this extract", path.display())]
    NoRoads { path: PathBuf },
}

impl ImportError {
    pub fn io(path: &Path, source: std::io::Error) -> Self {
        ImportError::Io {
            path: path.to_path_buf(),
            cause: source,
        }
    }
    pub fn syntax(path: &Path, line: usize, msg: impl Into<String>) -> Self {
        ImportError::Syntax {
            path: path.to_path_buf(),
            line,
            msg: msg.into(),
        }
    }
    pub fn invalid(path: &Path, msg: impl Into<String>) -> Self {
        ImportError::Invalid {
            path: path.to_path_buf(),
            msg: msg.into(),
        }
    }
}
