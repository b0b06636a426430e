//! CSV plumbing shared by both tables: the reader settings, the header rule
//! and allocation-free field parsers.
//!
//! Header rule: the header row names exactly the expected columns, each
//! once, in any order. A missing, unknown or repeated column is an error for
//! the whole file: a column we do not read is most likely a misunderstanding
//! of the format (a `speed_mph`, a second speed), and silently ignoring it
//! would hide that. Whitespace around fields is trimmed; a UTF-8 byte-order
//! mark before the header is ignored (spreadsheet exports write one).

use super::error::SpeedsError;
use csv::{ByteRecord, Reader, ReaderBuilder};

/// A reader over in-memory CSV bytes. Flexible field counts so that one
/// short row is one bad row, not a failed file. Fields are trimmed by
/// [`field`] rather than by the reader, which is several times cheaper.
pub(crate) fn reader(bytes: &[u8]) -> Reader<&[u8]> {
    ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .from_reader(bytes)
}

/// Field `i` without surrounding ASCII whitespace.
#[inline]
pub(crate) fn field(rec: &ByteRecord, i: usize) -> &[u8] {
    rec[i].trim_ascii()
}

/// Reads the header and returns, for each expected column, its position.
pub(crate) fn map_header<const N: usize>(
    rdr: &mut Reader<&[u8]>,
    expected: [&str; N],
) -> Result<[usize; N], SpeedsError> {
    let header = rdr
        .byte_headers()
        .map_err(|e| SpeedsError::Csv(e.to_string()))?
        .clone();
    if header.is_empty() || (header.len() == 1 && header[0].trim_ascii().is_empty()) {
        return Err(SpeedsError::Header(format!(
            "empty input: expected a header row `{}`",
            expected.join(",")
        )));
    }
    let mut pos = [usize::MAX; N];
    for (i, raw) in header.iter().enumerate() {
        let name = raw
            .strip_prefix(b"\xEF\xBB\xBF")
            .unwrap_or(raw)
            .trim_ascii();
        let shown = String::from_utf8_lossy(name);
        match expected.iter().position(|&x| x.as_bytes() == name) {
            Some(j) if pos[j] != usize::MAX => {
                return Err(SpeedsError::Header(format!(
                    "column `{shown}` appears twice"
                )));
            }
            Some(j) => pos[j] = i,
            None => {
                return Err(SpeedsError::Header(format!(
                    "unknown column `{shown}`; expected exactly `{}` (any order)",
                    expected.join(",")
                )));
            }
        }
    }
    if let Some(j) = pos.iter().position(|&p| p == usize::MAX) {
        return Err(SpeedsError::Header(format!(
            "missing column `{}`; expected exactly `{}` (any order)",
            expected[j],
            expected.join(",")
        )));
    }
    Ok(pos)
}

/// 1-based line where a record starts. The reader places a record's
/// position before any blank lines it skipped to reach it, so those are
/// stepped over here (a few bytes at most per record, usually none).
pub(crate) fn line_of(rec: &ByteRecord, input: &[u8]) -> u64 {
    let Some(p) = rec.position() else {
        return 0;
    };
    let mut line = p.line();
    let mut i = p.byte() as usize;
    while let Some(&c) = input.get(i) {
        match c {
            b'\n' => line += 1,
            b'\r' => {}
            _ => break,
        }
        i += 1;
    }
    line
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
            map_header(&mut r, ["h1", "h2"]).unwrap();
            let mut rec = ByteRecord::new();
            let mut lines = Vec::new();
            while r.read_byte_record(&mut rec).unwrap() {
                lines.push(line_of(&rec, input));
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
        let mut r = reader(b"b, a\n1,2\n");
        assert_eq!(map_header(&mut r, cols).unwrap(), [1, 0]);
        let mut r = reader(b"\xEF\xBB\xBFa,b\n");
        assert_eq!(map_header(&mut r, cols).unwrap(), [0, 1]);
        for bad in [&b"a,b,c\n"[..], b"a\n", b"a,a\n", b"", b"\n"] {
            let mut r = reader(bad);
            assert!(
                matches!(map_header(&mut r, cols), Err(SpeedsError::Header(_))),
                "{bad:?}"
            );
        }
    }
}
