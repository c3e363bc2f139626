//! Every byte of every committed fixture blob (`tests/fixtures/blobs/`, all format versions) is
//! protected (`FORMAT.md` §2): changed to another value, the blob is rejected, never accepted
//! and never a panic. Header bytes get every other value (255), which includes every flip
//! between versions 1 to 7; body bytes get `+1`, `-1`, `^ 0x80`, `0x00` and `0xFF` (a CRC of
//! degree 32 detects every error burst of up to 32 bits, Peterson and Brown 1961, so any other
//! value of one byte is caught as surely). About 180,000 parses, 2 s in a debug build.
use kinglet_runtime::unstable::wire::header::offset;
use kinglet_runtime::{Model, HEADER_LEN};
use std::path::PathBuf;

fn fixtures() -> Vec<(String, Vec<u8>)> {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../tests/fixtures/blobs");
    let mut out: Vec<(String, Vec<u8>)> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .map(|e| {
            let p = e.unwrap().path();
            let name = p.file_name().unwrap().to_string_lossy().into_owned();
            (name, std::fs::read(&p).unwrap())
        })
        .collect();
    out.sort();
    out
}

/// The values byte `b` at offset `at` is changed to: every other value for a header byte, else
/// `+1`, `-1`, `^ 0x80`, `0x00` and `0xFF`. Under Miri (scripts/miri.sh) a header byte gets
/// those and the seven versions, 1 to 7: interpreted, the whole sweep takes hours.
fn changes(at: usize, b: u8) -> Vec<u8> {
    let header = at < HEADER_LEN;
    let mut v: Vec<u8> = if header && !cfg!(miri) {
        (0..=255).collect()
    } else {
        vec![b.wrapping_add(1), b.wrapping_sub(1), b ^ 0x80, 0x00, 0xFF]
    };
    if header {
        v.extend([1, 2, 3, 4, 5, 6, 7]);
    }
    v.retain(|&x| x != b);
    v.sort_unstable();
    v.dedup();
    v
}

#[test]
fn every_single_byte_change_of_every_fixture_blob_is_rejected() {
    let blobs = fixtures();
    assert!(
        blobs.len() >= 3,
        "expected the v1 and v2 fixtures, found {}",
        blobs.len()
    );
    let mut versions = Vec::new();
    for (name, blob) in &blobs {
        // Without the `f32` feature an f32 fixture is refused whole (F32NotBuiltIn), which would
        // make its sweep say nothing.
        match Model::parse(blob) {
            Ok(_) => {}
            Err(kinglet_runtime::FormatError::F32NotBuiltIn) if !cfg!(feature = "f32") => continue,
            // So is an int4 fixture without the `int4` feature.
            Err(kinglet_runtime::FormatError::Int4NotBuiltIn { .. }) if !cfg!(feature = "int4") => {
                continue
            }
            // And an int16-input fixture without the `int16-input` feature.
            Err(kinglet_runtime::FormatError::Int16InputNotBuiltIn)
                if !cfg!(feature = "int16-input") =>
            {
                continue
            }
            Err(e) => panic!("{name}: the fixture itself is rejected: {e}"),
        }
        let at = offset::VERSION;
        versions.push(u16::from_le_bytes([blob[at], blob[at + 1]]));
        // Under Miri every header byte but only every 509th body byte.
        let body_step = if cfg!(miri) { 509 } else { 1 };
        let positions = (0..HEADER_LEN).chain((HEADER_LEN..blob.len()).step_by(body_step));
        let mut bad = blob.clone();
        for at in positions {
            let b = blob[at];
            for v in changes(at, b) {
                bad[at] = v;
                assert!(
                    Model::parse(&bad).is_err(),
                    "{name}: byte {at} changed from {b:#04x} to {v:#04x} is accepted"
                );
            }
            bad[at] = b;
        }
    }
    if cfg!(feature = "f32") {
        assert!(
            [1, 2, 3, 5].iter().all(|v| versions.contains(v)),
            "fixtures of every version: {versions:?}"
        );
    }
    if cfg!(feature = "int16-input") {
        assert!(versions.contains(&7), "no version-7 fixture: {versions:?}");
    }
}
