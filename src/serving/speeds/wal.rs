//! The write-ahead log of accepted live batches: what makes a `2xx` answer
//! to a live batch durable. The live layer itself is saved only now and
//! then (at most every 2 s, by the live loop); every batch accepted since
//! that save is appended here and synced to disk before the batch is
//! answered, replayed over the saved layer at start, and dropped (the file
//! truncated) right after the next save of the layer.
//!
//! # File format
//!
//! An 16-byte header, then records back to back:
//!
//! ```text
//! header: b"hodos-wal" 0x00 0x00 0x00 | format version (u32 LE) = 1
//! record: payload length (u32 LE) | CRC-32 of payload (u32 LE) | payload
//! payload: kind (1 byte) | batch
//! ```
//!
//! Kind 3 (what the service writes): the batch's valid observations in the
//! compact form of [`batch`](super::batch), about 30 bytes each, a third
//! of their JSON text. Kinds 1 (JSON text) and 2 (CSV text), the whole
//! batch as uploaded, are still read.
//!
//! A crash can tear only the last record (appends go to the end and are
//! synced one at a time). Reading stops at the first record that is cut
//! short or fails its checksum; [`replay`] reports it so the caller logs
//! it, and truncates the file there so later appends are not hidden
//! behind it. A file whose header is wrong is refused whole
//! ([`WalError::Corrupt`]).

use std::fs::{File, OpenOptions};
use std::io::{self, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

const MAGIC: &[u8; 12] = b"hodos-wal\0\0\0";
const VERSION: u32 = 1;
const HEADER_LEN: u64 = 16;
/// No batch is this large (uploads are capped far below); a longer length
/// field is damage, not a record.
const MAX_RECORD: u32 = 1 << 30;

/// The format of one logged batch.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BatchKind {
    Json,
    Csv,
    /// A [`Batch`](super::Batch)'s compact form.
    Compact,
}

impl BatchKind {
    fn byte(self) -> u8 {
        match self {
            BatchKind::Json => 1,
            BatchKind::Csv => 2,
            BatchKind::Compact => 3,
        }
    }

    fn from_byte(b: u8) -> Option<Self> {
        match b {
            1 => Some(BatchKind::Json),
            2 => Some(BatchKind::Csv),
            3 => Some(BatchKind::Compact),
            _ => None,
        }
    }
}

/// One logged batch.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Record {
    pub kind: BatchKind,
    pub body: Vec<u8>,
}

/// What reading the log found.
#[derive(Debug, Default)]
pub struct Replay {
    /// The intact records, oldest first.
    pub records: Vec<Record>,
    /// Why reading stopped before the end of the file (a torn or damaged
    /// last record), with the bytes dropped; `None` when the file was read
    /// to its end.
    pub torn: Option<(String, u64)>,
}

/// Why the write-ahead log could not be written or read.
///
/// A `cause` is written into the message and is not a `source()`: a
/// chain printer (anyhow's `{:#}`) would otherwise print it twice.
#[derive(Debug, thiserror::Error)]
pub enum WalError {
    #[error("{}: {cause}", path.display())]
    Io { path: PathBuf, cause: io::Error },
    #[error("{}: not a write-ahead log: {reason}", path.display())]
    Corrupt { path: PathBuf, reason: WalFormError },
}

/// Why a log's header is not this build's (a torn record is not an
/// error: [`Replay::torn`] reports it).
#[derive(Debug, Clone, Copy, PartialEq, Eq, thiserror::Error)]
pub enum WalFormError {
    #[error("unrecognised header")]
    Header,
    #[error("format version {0} (this build reads {VERSION})")]
    Version(u32),
}

fn io_err(path: &Path) -> impl FnOnce(io::Error) -> WalError + '_ {
    move |source| WalError::Io {
        path: path.to_path_buf(),
        cause: source,
    }
}

fn header() -> [u8; HEADER_LEN as usize] {
    let mut h = [0u8; HEADER_LEN as usize];
    h[..12].copy_from_slice(MAGIC);
    h[12..].copy_from_slice(&VERSION.to_le_bytes());
    h
}

/// Appends one batch and syncs the file (`fdatasync`) before returning:
/// once this returns `Ok`, the batch survives a crash. `sync = false` skips
/// the sync (only for measuring what it costs).
pub fn append(path: &Path, kind: BatchKind, body: &[u8], sync: bool) -> Result<(), WalError> {
    let mut f = OpenOptions::new()
        .create(true)
        .append(true)
        .open(path)
        .map_err(io_err(path))?;
    let len = f.metadata().map_err(io_err(path))?.len();
    // The framing first, then the batch as it is (no copy of it): a crash
    // between the two writes leaves a torn record, which replay cuts off.
    let mut buf = Vec::with_capacity(HEADER_LEN as usize + 9);
    if len == 0 {
        buf.extend_from_slice(&header());
    }
    let mut crc = crc32fast::Hasher::new();
    crc.update(&[kind.byte()]);
    crc.update(body);
    let n = u32::try_from(body.len() + 1)
        .ok()
        .filter(|&n| n <= MAX_RECORD)
        .ok_or_else(|| WalError::Io {
            path: path.to_path_buf(),
            cause: io::Error::new(io::ErrorKind::InvalidInput, "batch too large to log"),
        })?;
    buf.extend_from_slice(&n.to_le_bytes());
    buf.extend_from_slice(&crc.finalize().to_le_bytes());
    buf.push(kind.byte());
    if let Err(e) = f.write_all(&buf).and_then(|()| f.write_all(body)) {
        // Leave no partial record for later appends to hide behind.
        let _ = f.set_len(len);
        return Err(io_err(path)(e));
    }
    if sync {
        f.sync_data().map_err(io_err(path))?;
        if len == 0 {
            // A new file: its directory entry must survive too.
            if let Some(d) = path.parent().and_then(|d| File::open(d).ok()) {
                let _ = d.sync_all();
            }
        }
    }
    Ok(())
}

/// Empties the log (after the live layer holding its batches was saved).
pub fn clear(path: &Path) -> Result<(), WalError> {
    match OpenOptions::new().write(true).open(path) {
        Ok(f) => {
            f.set_len(0).map_err(io_err(path))?;
            f.sync_all().map_err(io_err(path))
        }
        Err(e) if e.kind() == io::ErrorKind::NotFound => Ok(()),
        Err(e) => Err(io_err(path)(e)),
    }
}

/// Reads every intact record; a torn or damaged tail is cut off the file
/// (so later appends follow the last good record) and reported in
/// [`Replay::torn`]. A missing or empty file is an empty log.
pub fn replay(path: &Path) -> Result<Replay, WalError> {
    let mut f = match OpenOptions::new().read(true).write(true).open(path) {
        Ok(f) => f,
        Err(e) if e.kind() == io::ErrorKind::NotFound => return Ok(Replay::default()),
        Err(e) => return Err(io_err(path)(e)),
    };
    let mut bytes = Vec::new();
    f.read_to_end(&mut bytes).map_err(io_err(path))?;
    let (out, good) = parse(&bytes).map_err(|reason| WalError::Corrupt {
        path: path.to_path_buf(),
        reason,
    })?;
    if out.torn.is_some() {
        f.set_len(good).map_err(io_err(path))?;
        f.seek(SeekFrom::End(0)).map_err(io_err(path))?;
        f.sync_all().map_err(io_err(path))?;
    }
    Ok(out)
}

/// The records of a log image and the length of its intact prefix.
fn parse(bytes: &[u8]) -> Result<(Replay, u64), WalFormError> {
    let mut out = Replay::default();
    if bytes.is_empty() {
        return Ok((out, 0));
    }
    if bytes.len() < HEADER_LEN as usize {
        // Torn while the header itself was written: nothing was logged.
        out.torn = Some(("header cut short".into(), bytes.len() as u64));
        return Ok((out, 0));
    }
    if &bytes[..12] != MAGIC {
        return Err(WalFormError::Header);
    }
    let v = u32::from_le_bytes(bytes[12..16].try_into().expect("4 bytes"));
    if v != VERSION {
        return Err(WalFormError::Version(v));
    }
    let mut at = HEADER_LEN as usize;
    while at < bytes.len() {
        let rest = &bytes[at..];
        let bad = |why: &str| Some((why.to_string(), rest.len() as u64));
        if rest.len() < 8 {
            out.torn = bad("record header cut short");
            break;
        }
        let n = u32::from_le_bytes(rest[..4].try_into().expect("4 bytes"));
        let crc = u32::from_le_bytes(rest[4..8].try_into().expect("4 bytes"));
        if n == 0 || n > MAX_RECORD {
            out.torn = bad("bad record length");
            break;
        }
        let Some(payload) = rest.get(8..8 + n as usize) else {
            out.torn = bad("record cut short");
            break;
        };
        if crc32fast::hash(payload) != crc {
            out.torn = bad("record checksum mismatch");
            break;
        }
        let Some(kind) = BatchKind::from_byte(payload[0]) else {
            out.torn = bad("unknown record kind");
            break;
        };
        out.records.push(Record {
            kind,
            body: payload[1..].to_vec(),
        });
        at += 8 + n as usize;
    }
    Ok((out, at as u64))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Round trip, then every cut of the last record and a flipped bit in
    /// it: the earlier records survive, the damaged one is reported and cut
    /// off the file. Expected record bytes are written out by hand from the
    /// format in the module docs; the CRC-32 check value of "123456789" is
    /// cbf43926 (the published check value of CRC-32/ISO-HDLC).
    #[test]
    fn append_replay_and_torn_tails() {
        assert_eq!(crc32fast::hash(b"123456789"), 0xcbf4_3926);
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("live.wal");
        append(&p, BatchKind::Json, b"[1]", true).unwrap();
        append(&p, BatchKind::Csv, b"a,b\n", true).unwrap();
        let full = std::fs::read(&p).unwrap();
        // Header 16 + (8 + 1 + 3) + (8 + 1 + 4).
        assert_eq!(full.len(), 16 + 12 + 13);
        assert_eq!(&full[16..20], &4u32.to_le_bytes());
        assert_eq!(&full[20..24], &crc32fast::hash(b"\x01[1]").to_le_bytes());
        let r = replay(&p).unwrap();
        assert!(r.torn.is_none());
        assert_eq!(
            r.records,
            vec![
                Record {
                    kind: BatchKind::Json,
                    body: b"[1]".to_vec()
                },
                Record {
                    kind: BatchKind::Csv,
                    body: b"a,b\n".to_vec()
                }
            ]
        );
        for cut in 16 + 12 + 1..full.len() {
            std::fs::write(&p, &full[..cut]).unwrap();
            let r = replay(&p).unwrap();
            assert_eq!(r.records.len(), 1, "cut at {cut}");
            assert!(r.torn.is_some(), "cut at {cut}");
            assert_eq!(std::fs::metadata(&p).unwrap().len(), 16 + 12);
            // Appends after the cut are found again.
            append(&p, BatchKind::Json, b"[2]", true).unwrap();
            assert_eq!(replay(&p).unwrap().records.len(), 2);
        }
        let mut flipped = full.clone();
        *flipped.last_mut().unwrap() ^= 0x10;
        std::fs::write(&p, &flipped).unwrap();
        let r = replay(&p).unwrap();
        assert_eq!(r.records.len(), 1);
        assert!(r.torn.unwrap().0.contains("checksum"));
        clear(&p).unwrap();
        assert!(replay(&p).unwrap().records.is_empty());
        std::fs::write(&p, b"not a log at all, no").unwrap();
        assert!(matches!(replay(&p), Err(WalError::Corrupt { .. })));
        assert!(replay(&dir.path().join("missing"))
            .unwrap()
            .records
            .is_empty());
    }
}
