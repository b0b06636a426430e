//! Persistence: atomic file writes and saved copies of the accepted tables,
//! so a restart brings back the historical profile and the live layer.
//!
//! # Saved file format
//!
//! One ASCII header line, then the payload:
//!
//! ```text
//! hodos-speeds 1 <kind> <payload bytes> <CRC-32 of payload, 8 hex digits>\n
//! <payload>
//! ```
//!
//! `kind` is `historical` (payload: the accepted CSV table, byte for byte)
//! or `live` (payload: a JSON array of [`Observation`](super::Observation)s,
//! segments named by `tail` and `head`, never by segment id, so a saved
//! layer survives a map rebuild that renumbers segments). The length and checksum make a truncated or
//! damaged file a clear [`PersistError::Corrupt`] instead of a table that
//! silently lost its tail. Loading re-validates the payload against the
//! current graph exactly like an upload.
//!
//! Files are replaced atomically ([`write_atomic`]): a crash leaves either
//! the old or the new file, never half of one. An uploaded table is saved
//! as it streams in ([`PendingTable`]: the temporary file is written while
//! the table is parsed, with the length in its header padded with zeros to
//! a fixed width, then completed and renamed once the table is accepted).

use super::config::ValidationConfig;
use super::edge_index::EdgeIndex;
use super::error::PersistError;
use super::historical::HistoricalProfile;
use super::live::LiveLayer;
use super::report::TableReport;
use chrono::{DateTime, Utc};
use std::fs::{self, File, OpenOptions};
use std::io::{self, Seek, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

const MAGIC: &str = "hodos-speeds";
const FORMAT_VERSION: u32 = 1;
const KIND_HISTORICAL: &str = "historical";
const KIND_LIVE: &str = "live";
/// A header line is far shorter; a file without a newline this early is not
/// ours.
const MAX_HEADER: usize = 128;

/// Writes `bytes` to `path` atomically: a temporary file in the same
/// directory is written and fsynced, renamed over `path`, and the directory
/// is fsynced (best effort: some platforms and file systems cannot sync a
/// directory). On failure the temporary file is removed and `path` is
/// untouched.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> io::Result<()> {
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let tmp = temp_beside(path)?;
    let written = (|| {
        let mut f = OpenOptions::new().write(true).create_new(true).open(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        drop(f);
        fs::rename(&tmp, path)
    })();
    if written.is_err() {
        let _ = fs::remove_file(&tmp);
    }
    written?;
    sync_dir(dir);
    Ok(())
}

#[cfg(unix)]
fn sync_dir(dir: &Path) {
    if let Ok(d) = File::open(dir) {
        let _ = d.sync_all();
    }
}

#[cfg(not(unix))]
fn sync_dir(_dir: &Path) {}

/// A historical table being saved while it is read: a temporary file
/// beside its destination with a placeholder header, the table's bytes
/// appended as they pass ([`PendingTable::write`]), completed and renamed
/// over the destination by [`PendingTable::finish`]. Dropped unfinished,
/// it removes the temporary file.
#[derive(Debug)]
pub struct PendingTable {
    tmp: PathBuf,
    file: Option<io::BufWriter<File>>,
    crc: crc32fast::Hasher,
    len: u64,
    /// The first write error (reported by `finish`).
    failed: Option<io::Error>,
}

impl PendingTable {
    /// Starts saving a table to `dest` (its folder must exist).
    pub fn create(dest: &Path) -> Result<PendingTable, PersistError> {
        let tmp = temp_beside(dest).map_err(|e| io_err(dest, e))?;
        let mut file = OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&tmp)
            .map(|f| io::BufWriter::with_capacity(256 * 1024, f))
            .map_err(|e| io_err(&tmp, e))?;
        let placeholder = pending_header(0, 0);
        let mut t = PendingTable {
            tmp,
            file: None,
            crc: crc32fast::Hasher::new(),
            len: 0,
            failed: None,
        };
        file.write_all(placeholder.as_bytes())
            .map_err(|e| io_err(&t.tmp, e))?;
        t.file = Some(file);
        Ok(t)
    }

    /// Appends bytes of the table. A write error is kept and reported by
    /// [`finish`](Self::finish).
    pub fn write(&mut self, bytes: &[u8]) {
        if self.failed.is_some() {
            return;
        }
        self.crc.update(bytes);
        self.len += bytes.len() as u64;
        if let Some(f) = &mut self.file {
            if let Err(e) = f.write_all(bytes) {
                self.failed = Some(e);
            }
        }
    }

    /// Writes the header, syncs, and renames the file over `dest` (then
    /// syncs the folder): the saved table is complete or absent, as with
    /// [`write_atomic`].
    pub fn finish(mut self, dest: &Path) -> Result<(), PersistError> {
        let tmp = self.tmp.clone();
        if let Some(e) = self.failed.take() {
            return Err(io_err(&tmp, e));
        }
        let header = pending_header(self.len, self.crc.clone().finalize());
        let file = self.file.take().expect("open until finished");
        let done = (|| {
            let mut f = file.into_inner().map_err(|e| e.into_error())?;
            f.seek(io::SeekFrom::Start(0))?;
            f.write_all(header.as_bytes())?;
            f.sync_all()?;
            drop(f);
            fs::rename(&tmp, dest)
        })();
        done.map_err(|e| io_err(dest, e))?;
        self.tmp = PathBuf::new();
        if let Some(dir) = dest.parent() {
            sync_dir(if dir.as_os_str().is_empty() {
                Path::new(".")
            } else {
                dir
            });
        }
        Ok(())
    }
}

impl Drop for PendingTable {
    fn drop(&mut self) {
        if !self.tmp.as_os_str().is_empty() {
            self.file = None;
            let _ = fs::remove_file(&self.tmp);
        }
    }
}

/// A reader that writes what passes through it into a [`PendingTable`].
pub struct Saving<'t, R> {
    pub inner: R,
    pub to: &'t mut PendingTable,
}

impl<R: io::Read> io::Read for Saving<'_, R> {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.to.write(&buf[..n]);
        Ok(n)
    }
}

/// The envelope header of a streamed save: the length padded to 20 digits
/// so the placeholder and the final header have the same width.
fn pending_header(len: u64, crc: u32) -> String {
    format!("{MAGIC} {FORMAT_VERSION} {KIND_HISTORICAL} {len:020} {crc:08x}\n")
}

/// A fresh temporary path in `path`'s folder.
fn temp_beside(path: &Path) -> io::Result<PathBuf> {
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let name = path
        .file_name()
        .ok_or_else(|| io::Error::new(io::ErrorKind::InvalidInput, "path has no file name"))?;
    Ok(dir.join(format!(
        ".{}.{}.{}.tmp",
        name.to_string_lossy(),
        std::process::id(),
        COUNTER.fetch_add(1, Ordering::Relaxed)
    )))
}

/// Saves the bytes of an accepted historical table.
pub fn save_historical(path: &Path, csv: &[u8]) -> Result<(), PersistError> {
    write_atomic(path, &envelope(KIND_HISTORICAL, csv)).map_err(|e| io_err(path, e))
}

/// The intact payload of a saved historical table and when it was saved.
#[derive(Debug, Clone)]
pub struct SavedTable {
    /// The accepted CSV, byte for byte as uploaded.
    pub csv: Vec<u8>,
    /// The file's modification time: when the upload was accepted (the
    /// file is written once per upload and never touched otherwise). It is
    /// what the "newer of configured file and last upload" rule compares.
    pub saved_at: std::time::SystemTime,
}

/// Reads a saved historical table and checks its envelope (magic, version,
/// kind, length, CRC-32) without parsing the CSV; `Ok(None)` when the file
/// does not exist. A truncated, bit-flipped, empty or wrong-kind file is a
/// [`PersistError::Corrupt`].
pub fn open_historical(path: &Path) -> Result<Option<SavedTable>, PersistError> {
    let Some(bytes) = read_if_exists(path)? else {
        return Ok(None);
    };
    let saved_at = fs::metadata(path)
        .and_then(|m| m.modified())
        .map_err(|e| io_err(path, e))?;
    let csv = open_envelope(&bytes, KIND_HISTORICAL)
        .map_err(|reason| corrupt(path, reason))?
        .to_vec();
    Ok(Some(SavedTable { csv, saved_at }))
}

/// Loads a saved historical table and re-validates it; `Ok(None)` when the
/// file does not exist. The profile has the same [`version`](HistoricalProfile::version)
/// as when it was uploaded.
pub fn load_historical(
    path: &Path,
    index: &EdgeIndex,
    cfg: &ValidationConfig,
) -> Result<Option<(HistoricalProfile, TableReport)>, PersistError> {
    let Some(bytes) = read_if_exists(path)? else {
        return Ok(None);
    };
    let csv = open_envelope(&bytes, KIND_HISTORICAL).map_err(|reason| corrupt(path, reason))?;
    HistoricalProfile::parse(csv, index, cfg)
        .map(Some)
        .map_err(|source| PersistError::Invalid {
            path: path.to_path_buf(),
            cause: source,
        })
}

/// Saves the live layer as observations named by their end nodes.
pub fn save_live(path: &Path, live: &LiveLayer, index: &EdgeIndex) -> Result<(), PersistError> {
    let json = serde_json::to_vec(&live.to_observations(index))
        .map_err(|e| io_err(path, io::Error::other(e)))?;
    write_atomic(path, &envelope(KIND_LIVE, &json)).map_err(|e| io_err(path, e))
}

/// Loads a saved live layer into a fresh layer for `index`'s graph,
/// validating the observations as an upload at `now`; `Ok(None)` when the
/// file does not exist. Expired observations are loaded too; the blend
/// ignores them and [`LiveLayer::expire`] drops them.
pub fn load_live(
    path: &Path,
    index: &EdgeIndex,
    now: DateTime<Utc>,
    cfg: &ValidationConfig,
) -> Result<Option<(LiveLayer, TableReport)>, PersistError> {
    let Some(bytes) = read_if_exists(path)? else {
        return Ok(None);
    };
    let json = open_envelope(&bytes, KIND_LIVE).map_err(|reason| corrupt(path, reason))?;
    let mut live = LiveLayer::new(index.num_edges());
    let report =
        live.apply_json(index, json, now, cfg)
            .map_err(|source| PersistError::Invalid {
                path: path.to_path_buf(),
                cause: source,
            })?;
    Ok(Some((live, report)))
}

fn envelope(kind: &str, payload: &[u8]) -> Vec<u8> {
    let header = format!(
        "{MAGIC} {FORMAT_VERSION} {kind} {} {:08x}\n",
        payload.len(),
        crc32fast::hash(payload)
    );
    let mut out = Vec::with_capacity(header.len() + payload.len());
    out.extend_from_slice(header.as_bytes());
    out.extend_from_slice(payload);
    out
}

/// Why a file is not an intact saved table of the expected kind (the
/// reason of a [`PersistError::Corrupt`]). Text copied from the file is
/// shown escaped.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum EnvelopeError {
    #[error("empty file")]
    Empty,
    #[error("no header line (not a saved speed table)")]
    NoHeader,
    #[error("header is not text")]
    HeaderNotText,
    #[error("unrecognised header `{}`", .0.escape_debug())]
    Unrecognised(String),
    #[error("format version {} (this build reads {FORMAT_VERSION})", .0.escape_debug())]
    Version(String),
    #[error("holds a `{}` table, expected `{expected}`", .found.escape_debug())]
    Kind {
        found: String,
        expected: &'static str,
    },
    #[error("bad length `{}`", .0.escape_debug())]
    Length(String),
    #[error("bad checksum field `{}`", .0.escape_debug())]
    ChecksumField(String),
    #[error("truncated or padded: header says {header} payload bytes, file holds {holds}")]
    Truncated { header: usize, holds: usize },
    #[error("checksum mismatch (stored {stored:08x}, computed {computed:08x})")]
    Checksum { stored: u32, computed: u32 },
}

/// The payload of a saved file of `kind`, or why the file is not one.
fn open_envelope<'a>(bytes: &'a [u8], kind: &'static str) -> Result<&'a [u8], EnvelopeError> {
    let nl = bytes
        .iter()
        .take(MAX_HEADER)
        .position(|&b| b == b'\n')
        .ok_or(if bytes.is_empty() {
            EnvelopeError::Empty
        } else {
            EnvelopeError::NoHeader
        })?;
    let header = std::str::from_utf8(&bytes[..nl]).map_err(|_| EnvelopeError::HeaderNotText)?;
    let payload = &bytes[nl + 1..];
    let f: Vec<&str> = header.split(' ').collect();
    if f.len() != 5 || f[0] != MAGIC {
        return Err(EnvelopeError::Unrecognised(header.to_string()));
    }
    if f[1] != FORMAT_VERSION.to_string() {
        return Err(EnvelopeError::Version(f[1].to_string()));
    }
    if f[2] != kind {
        return Err(EnvelopeError::Kind {
            found: f[2].to_string(),
            expected: kind,
        });
    }
    let len: usize = f[3]
        .parse()
        .map_err(|_| EnvelopeError::Length(f[3].to_string()))?;
    let crc = u32::from_str_radix(f[4], 16)
        .ok()
        .filter(|_| f[4].len() == 8)
        .ok_or_else(|| EnvelopeError::ChecksumField(f[4].to_string()))?;
    if payload.len() != len {
        return Err(EnvelopeError::Truncated {
            header: len,
            holds: payload.len(),
        });
    }
    let got = crc32fast::hash(payload);
    if got != crc {
        return Err(EnvelopeError::Checksum {
            stored: crc,
            computed: got,
        });
    }
    Ok(payload)
}

fn read_if_exists(path: &Path) -> Result<Option<Vec<u8>>, PersistError> {
    match fs::read(path) {
        Ok(b) => Ok(Some(b)),
        Err(e) if e.kind() == io::ErrorKind::NotFound => Ok(None),
        Err(e) => Err(io_err(path, e)),
    }
}

fn io_err(path: &Path, source: io::Error) -> PersistError {
    PersistError::Io {
        path: PathBuf::from(path),
        cause: source,
    }
}

fn corrupt(path: &Path, reason: EnvelopeError) -> PersistError {
    PersistError::Corrupt {
        path: PathBuf::from(path),
        reason,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn envelope_round_trip_and_damage() {
        let e = envelope("live", b"[1,2]");
        assert_eq!(open_envelope(&e, "live").unwrap(), b"[1,2]");
        assert!(open_envelope(&e, "historical")
            .unwrap_err()
            .to_string()
            .contains("expected `historical`"));
        assert!(open_envelope(&e[..e.len() - 1], "live")
            .unwrap_err()
            .to_string()
            .contains("truncated"));
        let mut flipped = e.clone();
        *flipped.last_mut().unwrap() ^= 1;
        assert!(open_envelope(&flipped, "live")
            .unwrap_err()
            .to_string()
            .contains("checksum"));
        assert!(open_envelope(b"", "live")
            .unwrap_err()
            .to_string()
            .contains("empty"));
        assert!(open_envelope(b"from_node,to_node\n", "live").is_err());
        // Cut inside the header line.
        assert!(open_envelope(&e[..10], "live").is_err());
    }

    /// A table saved while streamed reads back byte for byte through the
    /// envelope checks; one dropped unfinished leaves no file behind.
    #[test]
    fn pending_table_saves_what_passed() {
        let dir = tempfile::tempdir().unwrap();
        let dest = dir.path().join("historical.table");
        let table: Vec<u8> = (0..300_000u32).flat_map(|i| i.to_le_bytes()).collect();
        let mut p = PendingTable::create(&dest).unwrap();
        let mut r = Saving {
            inner: &table[..],
            to: &mut p,
        };
        let mut sink = Vec::new();
        io::Read::read_to_end(&mut r, &mut sink).unwrap();
        p.finish(&dest).unwrap();
        let saved = open_historical(&dest).unwrap().unwrap();
        assert_eq!(saved.csv, table);
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
        let mut q = PendingTable::create(&dir.path().join("other")).unwrap();
        q.write(b"half a table");
        drop(q);
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
    }
}
