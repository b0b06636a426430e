//! The artifact file: a round trip keeps everything; a wrong magic, a
//! wrong version, a flipped payload bit and every truncation are rejected
//! with their own clear error (never a panic).

use hodos_engine::artifact::{Artifact, ArtifactError};
use hodos_engine::build::{build, Quiet, Source};

#[test]
fn round_trip_and_every_kind_of_damage() {
    let art = build(
        &Source::Synthetic {
            nodes: 3_000,
            seed: 5,
        },
        &mut Quiet,
    )
    .expect("build");
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("city.hodos");
    art.save(&path).unwrap();
    let back = Artifact::load(&path).unwrap();
    assert_eq!(back.meta, art.meta);
    assert_eq!(back.graph.edge_tail, art.graph.edge_tail);
    assert_eq!(back.cch.head, art.cch.head);
    assert_eq!(back.calibration, art.calibration);

    let bytes = std::fs::read(&path).unwrap();
    let bad = dir.path().join("bad.hodos");
    let try_bytes = |b: &[u8]| {
        std::fs::write(&bad, b).unwrap();
        let err = Artifact::load(&bad).unwrap_err();
        assert!(err.to_string().contains("bad.hodos"), "{err}");
        err
    };

    let mut b = bytes.clone();
    b[0] ^= 0xff;
    assert!(matches!(try_bytes(&b), ArtifactError::BadMagic { .. }));

    let mut b = bytes.clone();
    b[8] = 99;
    assert!(matches!(
        try_bytes(&b),
        ArtifactError::BadVersion { found: 99, .. }
    ));

    let mut b = bytes.clone();
    let mid = b.len() / 2;
    b[mid] ^= 0x01;
    assert!(matches!(try_bytes(&b), ArtifactError::BadChecksum { .. }));

    for cut in [0, 4, 8, 20, 31, 32, 1000, bytes.len() - 1] {
        let e = try_bytes(&bytes[..cut]);
        assert!(
            matches!(
                e,
                ArtifactError::Truncated { .. } | ArtifactError::BadMagic { .. }
            ),
            "cut at {cut}: {e}"
        );
    }

    let missing = Artifact::load(&dir.path().join("nope.hodos")).unwrap_err();
    assert!(matches!(missing, ArtifactError::Io { .. }));
}
