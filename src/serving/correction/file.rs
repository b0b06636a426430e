//! The correction model file, a format of our own:
//!
//! | bytes | field |
//! |---|---|
//! | 8 | magic `HODOSCM\0` |
//! | 4 | format version, little-endian u32 (1) |
//! | 8 | payload length, little-endian u64 |
//! | 4 | CRC-32 (IEEE) of the payload, little-endian u32 |
//! | n | payload: [`CorrectionModel`] in bincode 1 |
//!
//! [`decode`] refuses anything else with a [`ModelFileError`] that says
//! what was wrong; a decoded model is also checked
//! ([`CorrectionModel::check`]) before it is returned, so a caller never
//! holds a model that cannot serve.

use super::model::CorrectionModel;

pub const MAGIC: &[u8; 8] = b"HODOSCM\0";
pub const FORMAT_VERSION: u32 = 1;
const HEADER: usize = 8 + 4 + 8 + 4;
/// Larger payloads are refused before decoding (a model of 1,000 trees of
/// depth 8 is about 16 MB).
pub const MAX_PAYLOAD: u64 = 256 << 20;

/// Why a model file was refused.
#[derive(Debug, thiserror::Error)]
pub enum ModelFileError {
    #[error("not a hodos correction model (bad magic bytes)")]
    Magic,
    #[error("model format version {0} is not supported (this hodos reads {FORMAT_VERSION})")]
    Version(u32),
    #[error("the model file is truncated: {have} bytes, {want} expected")]
    Truncated { have: u64, want: u64 },
    #[error("the model file has {0} bytes after its payload")]
    Trailing(u64),
    #[error("the model payload of {0} bytes exceeds the limit of {MAX_PAYLOAD}")]
    TooLarge(u64),
    #[error("the model checksum does not match (stored {stored:08x}, computed {computed:08x}): the file is damaged")]
    Checksum { stored: u32, computed: u32 },
    #[error("the model payload does not decode: {0}")]
    Decode(String),
    #[error("the model is not usable: {0}")]
    Invalid(super::model::ModelCheckError),
    #[error("reading {path}: {source}")]
    Io {
        path: String,
        source: std::io::Error,
    },
}

/// The file bytes of `m`.
pub fn encode(m: &CorrectionModel) -> Vec<u8> {
    let payload = bincode::serialize(m).expect("a model serializes");
    let mut out = Vec::with_capacity(HEADER + payload.len());
    out.extend_from_slice(MAGIC);
    out.extend_from_slice(&FORMAT_VERSION.to_le_bytes());
    out.extend_from_slice(&(payload.len() as u64).to_le_bytes());
    out.extend_from_slice(&crc32fast::hash(&payload).to_le_bytes());
    out.extend_from_slice(&payload);
    out
}

/// Decodes and checks a model file.
pub fn decode(bytes: &[u8]) -> Result<CorrectionModel, ModelFileError> {
    let have = bytes.len() as u64;
    if bytes.len() < HEADER {
        if bytes.len() >= 8 && &bytes[..8] != MAGIC {
            return Err(ModelFileError::Magic);
        }
        return Err(ModelFileError::Truncated {
            have,
            want: HEADER as u64,
        });
    }
    if &bytes[..8] != MAGIC {
        return Err(ModelFileError::Magic);
    }
    let version = u32::from_le_bytes(bytes[8..12].try_into().expect("4 bytes"));
    if version != FORMAT_VERSION {
        return Err(ModelFileError::Version(version));
    }
    let len = u64::from_le_bytes(bytes[12..20].try_into().expect("8 bytes"));
    if len > MAX_PAYLOAD {
        return Err(ModelFileError::TooLarge(len));
    }
    let want = HEADER as u64 + len;
    if have < want {
        return Err(ModelFileError::Truncated { have, want });
    }
    if have > want {
        return Err(ModelFileError::Trailing(have - want));
    }
    let stored = u32::from_le_bytes(bytes[20..24].try_into().expect("4 bytes"));
    let payload = &bytes[HEADER..];
    let computed = crc32fast::hash(payload);
    if stored != computed {
        return Err(ModelFileError::Checksum { stored, computed });
    }
    let m: CorrectionModel = bincode::DefaultOptions::new()
        .with_fixint_encoding()
        .with_limit(MAX_PAYLOAD)
        .deserialize(payload)
        .map_err(|e| ModelFileError::Decode(e.to_string()))?;
    m.check().map_err(ModelFileError::Invalid)?;
    Ok(m)
}

use bincode::Options;

/// Reads and decodes a model file.
pub fn read(path: &std::path::Path) -> Result<CorrectionModel, ModelFileError> {
    let bytes = std::fs::read(path).map_err(|source| ModelFileError::Io {
        path: path.display().to_string(),
        source,
    })?;
    decode(&bytes)
}

#[cfg(test)]
mod tests {
    use super::super::model::tests::stump_model;
    use super::*;

    #[test]
    fn round_trip_keeps_every_field() {
        let m = stump_model();
        let bytes = encode(&m);
        assert_eq!(&bytes[..8], MAGIC);
        assert_eq!(decode(&bytes).unwrap(), m);
    }

    #[test]
    fn damage_is_refused_by_name() {
        let bytes = encode(&stump_model());
        let mut flipped = bytes.clone();
        let last = flipped.len() - 1;
        flipped[last] ^= 0x40;
        assert!(matches!(
            decode(&flipped),
            Err(ModelFileError::Checksum { .. })
        ));
        assert!(matches!(
            decode(&bytes[..bytes.len() - 3]),
            Err(ModelFileError::Truncated { .. })
        ));
        let mut magic = bytes.clone();
        magic[0] = b'X';
        assert!(matches!(decode(&magic), Err(ModelFileError::Magic)));
        let mut ver = bytes.clone();
        ver[8] = 9;
        assert!(matches!(decode(&ver), Err(ModelFileError::Version(9))));
        let mut long = bytes.clone();
        long.push(0);
        assert!(matches!(decode(&long), Err(ModelFileError::Trailing(1))));
        assert!(matches!(decode(b""), Err(ModelFileError::Truncated { .. })));
        // A well-formed file whose model fails its checks.
        let mut bad = stump_model();
        bad.forest.nodes[0].left = 0;
        assert!(matches!(
            decode(&encode(&bad)),
            Err(ModelFileError::Invalid(_))
        ));
    }
}
