//! CSV plumbing shared by both tables: the reader settings, the header rule,
//! the segment key columns and allocation-free field parsers.
//!
//! Header rule: the header row names the table's own columns (each
//! required) and the key columns `segment`, `way`, `tail`, `head` (each
//! optional: at least `segment`, or both `tail` and `head`), each once, in
//! any order. A missing, unknown or repeated column is an error for the
//! whole file: a column we do not read is most likely a misunderstanding of
//! the format (a `speed_mph`, a second speed), and silently ignoring it
//! would hide that. Whitespace around fields is trimmed; a UTF-8 byte-order
//! mark before the header is ignored (spreadsheet exports write one).
//!
//! In a row, an empty key cell means "not given", so one file can mix rows
//! naming segments by id with rows naming them by ends
//! ([`SegmentKey`], rules in [`edge_index`](super::edge_index)).
//!
//! Tables are read as streams ([`reader`] over any [`Read`]): an upload is
//! parsed as it arrives, never held whole. [`Recent`] keeps the last bytes
//! read so a row's line number is exact without the whole input.

use super::edge_index::{SegmentKey, INCOMPLETE_KEY};
use super::error::SpeedsError;
use csv::{ByteRecord, Reader, ReaderBuilder};
use std::io::Read;

/// A CSV reader over a stream. Flexible field counts so that one short row
/// is one bad row, not a failed file. Fields are trimmed by [`field`]
/// rather than by the reader, which is several times cheaper.
pub(crate) fn reader<R: Read>(input: R) -> Reader<Recent<R>> {
    ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .buffer_capacity(64 * 1024)
        .from_reader(Recent::new(input))
}

/// Bytes of input [`Recent`] keeps behind the reader's position.
const RECENT_KEEP: usize = 256 * 1024;

/// A reader that keeps the last [`RECENT_KEEP`] or more bytes it passed on,
/// so that [`Recent::line_of`] can step over the blank lines the CSV
/// reader skipped before a record.
pub(crate) struct Recent<R> {
    inner: R,
    kept: Vec<u8>,
    /// Input offset of `kept[0]`.
    start: u64,
}

impl<R> Recent<R> {
    fn new(inner: R) -> Self {
        Recent {
            inner,
            kept: Vec::new(),
            start: 0,
        }
    }

    /// 1-based line where a record starts. The reader places a record's
    /// position before any blank lines it skipped to reach it, so those
    /// are stepped over here (a few bytes at most per record, usually
    /// none). A record so long that its start is no longer kept (over
    /// 256 KiB) gets the line of its position.
    pub(crate) fn line_of(&self, rec: &ByteRecord) -> u64 {
        let Some(p) = rec.position() else {
            return 0;
        };
        let from = p
            .byte()
            .checked_sub(self.start)
            .and_then(|o| usize::try_from(o).ok())
            .and_then(|o| self.kept.get(o..))
            .unwrap_or(&[]);
        line_after_blanks(p.line(), from)
    }

    pub(crate) fn into_inner(self) -> R {
        self.inner
    }
}

impl<R: Read> Read for Recent<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.kept.extend_from_slice(&buf[..n]);
        if self.kept.len() > 2 * RECENT_KEEP {
            let cut = self.kept.len() - RECENT_KEEP;
            self.kept.drain(..cut);
            self.start += cut as u64;
        }
        Ok(n)
    }
}

/// `line` plus the newlines of the blank lines at the start of `input`.
fn line_after_blanks(mut line: u64, input: &[u8]) -> u64 {
    for &c in input {
        match c {
            b'\n' => line += 1,
            b'\r' => {}
            _ => break,
        }
    }
    line
}

/// A reader that hashes what passes through it: the content version of a
/// streamed table (CRC-32 and length of its bytes,
/// [`HistoricalProfile::version`](super::HistoricalProfile::version)).
pub(crate) struct Hashing<R> {
    inner: R,
    crc: crc32fast::Hasher,
    len: u64,
}

impl<R> Hashing<R> {
    pub(crate) fn new(inner: R) -> Self {
        Hashing {
            inner,
            crc: crc32fast::Hasher::new(),
            len: 0,
        }
    }

    /// `"<crc32 hex>-<length>"` of everything read so far.
    pub(crate) fn version(&self) -> String {
        format!("{:08x}-{}", self.crc.clone().finalize(), self.len)
    }
}

impl<R: Read> Read for Hashing<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.crc.update(&buf[..n]);
        self.len += n as u64;
        Ok(n)
    }
}

/// Field `i` without surrounding ASCII whitespace.
#[inline]
pub(crate) fn field(rec: &ByteRecord, i: usize) -> &[u8] {
    rec[i].trim_ascii()
}

/// The optional columns naming a row's segments, in canonical order.
pub(crate) const KEY_COLUMNS: [&str; 4] = ["segment", "way", "tail", "head"];

/// Column names of an earlier table shape and what replaced each, named in
/// the header error so an old file is easy to convert.
const FORMER: [(&str, &str); 3] = [
    ("from_node", "tail"),
    ("to_node", "head"),
    ("speed_kmh", "kmh"),
];

/// Positions of the key columns present in the header.
#[derive(Debug, Clone, Copy)]
pub(crate) struct KeyColumns {
    segment: Option<usize>,
    way: Option<usize>,
    tail: Option<usize>,
    head: Option<usize>,
}

/// Why a row's key cells could not be read.
#[derive(Debug)]
pub(crate) enum KeyError<'r> {
    /// A non-empty cell that is not an unsigned integer: column, cell.
    NotANumber(&'static str, &'r [u8]),
    /// Neither `segment` nor both `tail` and `head`.
    Incomplete,
}

impl KeyError<'_> {
    pub(crate) fn message(&self) -> String {
        match self {
            KeyError::NotANumber(col, b) => {
                format!("{col} `{}`: expected an unsigned integer", show(b))
            }
            KeyError::Incomplete => INCOMPLETE_KEY.to_string(),
        }
    }
}

impl KeyColumns {
    /// The key of one row: empty cells are absent.
    #[inline]
    pub(crate) fn read<'r>(&self, rec: &'r ByteRecord) -> Result<SegmentKey, KeyError<'r>> {
        let cell = |col: Option<usize>, name: &'static str| -> Result<Option<u64>, KeyError<'r>> {
            let Some(i) = col else { return Ok(None) };
            let b = field(rec, i);
            if b.is_empty() {
                return Ok(None);
            }
            parse_u64(b).map(Some).ok_or(KeyError::NotANumber(name, b))
        };
        let key = SegmentKey {
            segment: cell(self.segment, "segment")?,
            way: cell(self.way, "way")?,
            tail: cell(self.tail, "tail")?,
            head: cell(self.head, "head")?,
        };
        if key.is_complete() {
            Ok(key)
        } else {
            Err(KeyError::Incomplete)
        }
    }
}

/// What a header must name, in words.
fn expected_columns(required: &[&str]) -> String {
    format!(
        "`segment` and/or `tail`,`head` (optional `way`), and `{}` (any order)",
        required.join("`,`")
    )
}

/// Reads a header of required columns plus key columns and returns the
/// required columns' positions and the key columns found.
pub(crate) fn map_columns<R: Read, const N: usize>(
    rdr: &mut Reader<R>,
    required: [&str; N],
) -> Result<([usize; N], KeyColumns), SpeedsError> {
    let header = rdr
        .byte_headers()
        .map_err(|e| SpeedsError::Csv(e.to_string()))?
        .clone();
    let expected = expected_columns(&required);
    if header.is_empty() || (header.len() == 1 && header[0].trim_ascii().is_empty()) {
        return Err(SpeedsError::Header(format!(
            "empty input: expected a header row naming {expected}"
        )));
    }
    let mut pos = [usize::MAX; N];
    let mut key = [usize::MAX; KEY_COLUMNS.len()];
    for (i, raw) in header.iter().enumerate() {
        let name = raw
            .strip_prefix(b"\xEF\xBB\xBF")
            .unwrap_or(raw)
            .trim_ascii();
        let shown = String::from_utf8_lossy(name);
        let slot = if let Some(j) = required.iter().position(|&x| x.as_bytes() == name) {
            &mut pos[j]
        } else if let Some(j) = KEY_COLUMNS.iter().position(|&x| x.as_bytes() == name) {
            &mut key[j]
        } else {
            let hint = FORMER
                .iter()
                .find(|(old, _)| old.as_bytes() == name)
                .map(|(_, new)| format!(" (that column is now `{new}`)"))
                .unwrap_or_default();
            return Err(SpeedsError::Header(format!(
                "unknown column `{shown}`{hint}; expected {expected}"
            )));
        };
        if *slot != usize::MAX {
            return Err(SpeedsError::Header(format!(
                "column `{shown}` appears twice"
            )));
        }
        *slot = i;
    }
    if let Some(j) = pos.iter().position(|&p| p == usize::MAX) {
        return Err(SpeedsError::Header(format!(
            "missing column `{}`; expected {expected}",
            required[j]
        )));
    }
    let [segment, way, tail, head] = key.map(|p| (p != usize::MAX).then_some(p));
    if segment.is_none() && (tail.is_none() || head.is_none()) {
        let missing = match (tail, head) {
            (Some(_), None) => "`head` (beside `tail`) or `segment`",
            (None, Some(_)) => "`tail` (beside `head`) or `segment`",
            _ => "`segment`, or `tail` and `head`",
        };
        return Err(SpeedsError::Header(format!(
            "missing column {missing}; expected {expected}"
        )));
    }
    Ok((
        pos,
        KeyColumns {
            segment,
            way,
            tail,
            head,
        },
    ))
}

/// A field shown in a message (lossy, shortened).
pub(crate) fn show(b: &[u8]) -> String {
    let s = String::from_utf8_lossy(b);
    if s.chars().count() > 40 {
        let cut: String = s.chars().take(40).collect();
        format!("{cut}…")
    } else {
        s.into_owned()
    }
}

/// Unsigned decimal integer: ASCII digits only, no sign, no overflow.
pub(crate) fn parse_u64(b: &[u8]) -> Option<u64> {
    if b.is_empty() || b.len() > 20 {
        return None;
    }
    let mut v: u64 = 0;
    for &c in b {
        let d = c.wrapping_sub(b'0');
        if d > 9 {
            return None;
        }
        v = v.checked_mul(10)?.checked_add(u64::from(d))?;
    }
    Some(v)
}

/// A floating-point number as Rust spells it (`NaN`, `inf` included, so
/// they can be told apart from garbage).
pub(crate) fn parse_f64(b: &[u8]) -> Option<f64> {
    std::str::from_utf8(b).ok()?.parse().ok()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn u64_fields() {
        assert_eq!(parse_u64(b"0"), Some(0));
        assert_eq!(parse_u64(b"18446744073709551615"), Some(u64::MAX));
        assert_eq!(parse_u64(b"18446744073709551616"), None);
        assert_eq!(parse_u64(b""), None);
        assert_eq!(parse_u64(b"-1"), None);
        assert_eq!(parse_u64(b"+1"), None);
        assert_eq!(parse_u64(b"1.0"), None);
    }

    #[test]
    fn record_lines_skip_blank_lines_and_quoted_newlines() {
        for input in [
            &b"h1,h2\n1,2\n\n\n3,4\n\"a\nb\",5\n6,7\n"[..],
            b"h1,h2\r\n1,2\r\n\r\n\r\n3,4\r\n\"a\r\nb\",5\r\n6,7",
        ] {
            let mut r = reader(input);
            r.byte_headers().unwrap();
            let mut rec = ByteRecord::new();
            let mut lines = Vec::new();
            while r.read_byte_record(&mut rec).unwrap() {
                lines.push(r.get_ref().line_of(&rec));
            }
            assert_eq!(
                lines,
                vec![2, 5, 6, 8],
                "{:?}",
                String::from_utf8_lossy(input)
            );
        }
    }

    #[test]
    fn header_rule() {
        let cols = ["a", "b"];
        let pos = |input: &[u8]| {
            let mut r = reader(input);
            map_columns(&mut r, cols).map(|(p, k)| (p, [k.segment, k.way, k.tail, k.head]))
        };
        assert_eq!(
            pos(b"b, segment, a\n1,2\n").unwrap(),
            ([2, 0], [Some(1), None, None, None])
        );
        assert_eq!(
            pos(b"\xEF\xBB\xBFhead,a,way,b,tail\n").unwrap(),
            ([1, 3], [None, Some(2), Some(4), Some(0)])
        );
        assert_eq!(
            pos(b"segment,tail,a,b\n").unwrap(),
            ([2, 3], [Some(0), None, Some(1), None])
        );
        for bad in [
            &b"a,b,segment,c\n"[..],
            b"a,segment\n",
            b"a,a,b,segment\n",
            b"segment,segment,a,b\n",
            b"a,b\n",
            b"a,b,tail\n",
            b"a,b,way,head\n",
            b"",
            b"\n",
        ] {
            assert!(matches!(pos(bad), Err(SpeedsError::Header(_))), "{bad:?}");
        }
    }

    /// An empty key cell is "not given"; a row must name `segment` or both
    /// ends (the rule in the module docs).
    #[test]
    fn key_cells() {
        let input = b"segment,way,tail,head,a\n7,,,,x\n,3,1,2,x\n,,1,,x\n,,q,2,x\n";
        let mut r = reader(&input[..]);
        let (_, k) = map_columns(&mut r, ["a"]).unwrap();
        let mut rec = ByteRecord::new();
        let mut got = Vec::new();
        while r.read_byte_record(&mut rec).unwrap() {
            got.push(k.read(&rec).map_err(|e| e.message()));
        }
        assert_eq!(got[0], Ok(SegmentKey::segment(7)));
        assert_eq!(
            got[1],
            Ok(SegmentKey {
                way: Some(3),
                ..SegmentKey::ends(1, 2)
            })
        );
        assert_eq!(got[2], Err(INCOMPLETE_KEY.to_string()));
        assert_eq!(
            got[3],
            Err("tail `q`: expected an unsigned integer".to_string())
        );
    }
}
