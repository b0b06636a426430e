//! The build artifact: one file holding everything `hodos build` computed.
//!
//! Layout (little-endian):
//!
//! | bytes | field |
//! |---|---|
//! | 8 | magic `HODOSRG\x01` |
//! | 4 | format version ([`FORMAT_VERSION`]) |
//! | 4 | reserved, zero |
//! | 8 | payload length in bytes |
//! | 4 | CRC-32 (IEEE) of the payload |
//! | 4 | reserved, zero |
//! | n | payload: [`Artifact`] encoded with bincode 1 |
//!
//! Loading checks each field in that order and names the first that is
//! wrong, so a truncated copy, a file of another kind, an artifact from a
//! newer hodos and a flipped bit each get their own message.

use crate::calibration::Calibration;
use crate::cch::Cch;
use crate::graph::{RoadGraph, SccReport};
use serde::{Deserialize, Serialize};
use std::io::{Read, Write};
use std::path::{Path, PathBuf};

pub const MAGIC: [u8; 8] = *b"HODOSRG\x01";
/// Bump whenever the payload's shape changes.
pub const FORMAT_VERSION: u32 = 1;
const HEADER_LEN: usize = 32;

/// Facts about a build, shown by `hodos info`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Metadata {
    /// What was read, e.g. `osm:monaco.osm.pbf` or `synthetic:20000:seed=7`.
    pub source: String,
    /// Seconds since the Unix epoch when the build finished.
    pub built_at_unix: u64,
    pub hodos_version: String,
    pub nodes: usize,
    pub edges: usize,
    pub dropped: SccReport,
    pub arcs: usize,
    pub shortcuts: usize,
    pub top_separator: usize,
    pub elimination_tree_depth: usize,
    /// Seconds per phase: import, scc, order, contraction, calibration.
    pub phase_seconds: Vec<(String, f64)>,
}

/// Everything in an artifact file.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Artifact {
    pub meta: Metadata,
    pub graph: RoadGraph,
    pub cch: Cch,
    pub calibration: Calibration,
}

/// Why an artifact could not be written or read.
///
/// A `cause` is written into the message and is not a `source()`: a
/// chain printer (anyhow's `{:#}`) would otherwise print it twice.
#[derive(Debug, thiserror::Error)]
pub enum ArtifactError {
    #[error("{}: {cause}", path.display())]
    Io {
        path: PathBuf,
        cause: std::io::Error,
    },
    #[error("{}: not a hodos artifact (wrong magic bytes)", path.display())]
    BadMagic { path: PathBuf },
    #[error("{}: artifact format version {found}, this hodos reads version {FORMAT_VERSION}; rebuild it with `hodos build`", path.display())]
    BadVersion { path: PathBuf, found: u32 },
    #[error("{}: truncated: header says {expected} payload bytes, file has {found}", path.display())]
    Truncated {
        path: PathBuf,
        expected: u64,
        found: u64,
    },
    #[error("{}: checksum mismatch (file is corrupt)", path.display())]
    BadChecksum { path: PathBuf },
    #[error("{}: payload does not decode: {msg}", path.display())]
    Decode { path: PathBuf, msg: String },
    /// Decodes, but its arrays do not fit together.
    #[error("{}: payload does not decode: {cause}", path.display())]
    Inconsistent { path: PathBuf, cause: Inconsistency },
}

/// How a decoded payload's arrays fail to fit together (a query over it
/// would index out of bounds).
#[derive(Debug, Clone, Copy, PartialEq, Eq, thiserror::Error)]
pub enum Inconsistency {
    #[error("node arrays differ in length")]
    NodeArrays,
    #[error("edge arrays differ in length")]
    EdgeArrays,
    #[error("edge end out of range")]
    EdgeEnd,
    #[error("shape index out of range")]
    ShapeIndex,
    #[error("hierarchy arrays inconsistent")]
    HierarchyArrays,
    #[error("hierarchy index out of range")]
    HierarchyIndex,
    #[error("edge to arc map out of range")]
    EdgeArcMap,
}

impl Artifact {
    /// Writes to `path` atomically (a temporary file beside it, then rename).
    pub fn save(&self, path: &Path) -> Result<u64, ArtifactError> {
        let io = |source| ArtifactError::Io {
            path: path.to_path_buf(),
            cause: source,
        };
        let payload = bincode::serialize(self).map_err(|e| ArtifactError::Decode {
            path: path.to_path_buf(),
            msg: e.to_string(),
        })?;
        let mut header = Vec::with_capacity(HEADER_LEN);
        header.extend_from_slice(&MAGIC);
        header.extend_from_slice(&FORMAT_VERSION.to_le_bytes());
        header.extend_from_slice(&0u32.to_le_bytes());
        header.extend_from_slice(&(payload.len() as u64).to_le_bytes());
        header.extend_from_slice(&crc32fast::hash(&payload).to_le_bytes());
        header.extend_from_slice(&0u32.to_le_bytes());
        let tmp = path.with_extension("tmp-write");
        let mut f = std::fs::File::create(&tmp).map_err(io)?;
        f.write_all(&header).map_err(io)?;
        f.write_all(&payload).map_err(io)?;
        f.sync_all().map_err(io)?;
        drop(f);
        std::fs::rename(&tmp, path).map_err(io)?;
        Ok((header.len() + payload.len()) as u64)
    }

    /// Reads and verifies an artifact.
    pub fn load(path: &Path) -> Result<Artifact, ArtifactError> {
        let mut f = std::fs::File::open(path).map_err(|source| ArtifactError::Io {
            path: path.to_path_buf(),
            cause: source,
        })?;
        let mut bytes = Vec::new();
        f.read_to_end(&mut bytes)
            .map_err(|source| ArtifactError::Io {
                path: path.to_path_buf(),
                cause: source,
            })?;
        Self::from_bytes(path, &bytes)
    }

    /// Verifies and decodes artifact bytes; `path` is only for messages.
    pub fn from_bytes(path: &Path, bytes: &[u8]) -> Result<Artifact, ArtifactError> {
        let p = || path.to_path_buf();
        if bytes.len() < 8 || bytes[..8] != MAGIC {
            return Err(ArtifactError::BadMagic { path: p() });
        }
        if bytes.len() < HEADER_LEN {
            return Err(ArtifactError::Truncated {
                path: p(),
                expected: 0,
                found: bytes.len() as u64,
            });
        }
        let u32_at = |o: usize| u32::from_le_bytes(bytes[o..o + 4].try_into().expect("4 bytes"));
        let version = u32_at(8);
        if version != FORMAT_VERSION {
            return Err(ArtifactError::BadVersion {
                path: p(),
                found: version,
            });
        }
        let len = u64::from_le_bytes(bytes[16..24].try_into().expect("8 bytes"));
        let crc = u32_at(24);
        let payload = &bytes[HEADER_LEN..];
        if (payload.len() as u64) < len {
            return Err(ArtifactError::Truncated {
                path: p(),
                expected: len,
                found: payload.len() as u64,
            });
        }
        let payload = &payload[..len as usize];
        if crc32fast::hash(payload) != crc {
            return Err(ArtifactError::BadChecksum { path: p() });
        }
        let art: Artifact = bincode::deserialize(payload).map_err(|e| ArtifactError::Decode {
            path: p(),
            msg: e.to_string(),
        })?;
        art.validate()
            .map_err(|cause| ArtifactError::Inconsistent { path: p(), cause })?;
        Ok(art)
    }

    /// Structural checks so a decodable but inconsistent payload cannot make
    /// a query index out of bounds.
    fn validate(&self) -> Result<(), Inconsistency> {
        let g = &self.graph;
        let (n, m) = (g.num_nodes(), g.num_edges());
        let node_arrays = [
            g.node_lon.len(),
            g.node_ext.len(),
            self.cch.rank.len(),
            self.cch.order.len(),
            self.cch.parent.len(),
        ];
        if node_arrays.iter().any(|&l| l != n) {
            return Err(Inconsistency::NodeArrays);
        }
        let edge_arrays = [
            g.edge_head.len(),
            g.edge_len_m.len(),
            g.edge_speed_kmh.len(),
            g.edge_way.len(),
            g.edge_class.len(),
            g.edge_twin.len(),
            self.cch.edge_arc.len(),
        ];
        if edge_arrays.iter().any(|&l| l != m) || g.edge_shape_first.len() != m + 1 {
            return Err(Inconsistency::EdgeArrays);
        }
        if g.edge_tail
            .iter()
            .chain(&g.edge_head)
            .any(|&v| v as usize >= n)
        {
            return Err(Inconsistency::EdgeEnd);
        }
        if g.edge_shape_first.last().copied().unwrap_or(0) as usize != g.shape.len() {
            return Err(Inconsistency::ShapeIndex);
        }
        let c = &self.cch;
        if c.first_out.len() != n + 1
            || c.first_out.last().copied().unwrap_or(0) as usize != c.head.len()
            || c.tail.len() != c.head.len()
        {
            return Err(Inconsistency::HierarchyArrays);
        }
        if c.rank.iter().any(|&r| r as usize >= n) || c.head.iter().any(|&h| h as usize >= n) {
            return Err(Inconsistency::HierarchyIndex);
        }
        if c.edge_arc
            .iter()
            .any(|&ea| (ea >> 1) as usize >= c.head.len())
        {
            return Err(Inconsistency::EdgeArcMap);
        }
        Ok(())
    }
}
