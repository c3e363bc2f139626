//! Bit-exact test vectors on the target.
//!
//! Runs every vector of [`kinglet_fw_vectors::SETS`] (150 digits rows through the integer
//! `u8` input path, 20 through the `f32` path, 10 through the f32 model, 64 recorded vibration
//! windows through feature extraction and the `f32` path), prints one line per vector in the
//! format of `kinglet_fw_vectors::format_vector`, compares each line with the expected line
//! embedded at build time from `tests/fixtures/vectors/<set>.txt`, and ends with
//! `vectors: N passed, M failed`. `scripts/firmware.sh` also diffs the printed lines against
//! the same files.
//!
//! One scratch buffer serves every model: a `static` of `MAX_SCRATCH` bytes (the largest
//! `kinglet_runtime::scratch_bytes` of the embedded blobs, computed at compile time), handed out
//! once by `cortex_m::singleton!`.
#![no_std]
#![no_main]

use core::fmt::Write;
use cortex_m_rt::entry;
use kinglet_firmware_example::{board, console};
use kinglet_fw_vectors::assets::MAX_SCRATCH;
use kinglet_fw_vectors::{format_vector, Line, VectorSet, SETS, TOTAL};
use kinglet_runtime::Model;

#[entry]
fn main() -> ! {
    let Some(scratch) = cortex_m::singleton!(: [u8; MAX_SCRATCH] = [0; MAX_SCRATCH]) else {
        console::exit(false)
    };
    let mut l = console::LineBuf::new();
    let _ = write!(
        l,
        "vectors on {}: {TOTAL} vectors in {} sets",
        board::BOARD,
        SETS.len()
    );
    console::line(&l);
    let (mut passed, mut failed) = (0usize, 0usize);
    for set in &SETS {
        let (p, f) = run_set(set, scratch);
        passed += p;
        failed += f;
    }
    let mut l = console::LineBuf::new();
    let _ = write!(l, "vectors: {passed} passed, {failed} failed");
    console::line(&l);
    console::exit(failed == 0 && passed == TOTAL)
}

/// Runs one set; returns (passed, failed).
fn run_set(set: &VectorSet, scratch: &mut [u8]) -> (usize, usize) {
    let model = match Model::parse(set.model) {
        Ok(m) => m,
        Err(e) => {
            let mut l = console::LineBuf::new();
            let _ = write!(l, "{}: model rejected: {e}", set.name);
            console::line(&l);
            return (0, set.count);
        }
    };
    let mut expected = set.expected.lines();
    let mut line = Line::new();
    let (mut passed, mut failed) = (0, 0);
    for i in 0..set.count {
        let want = expected.next();
        match format_vector(set, &model, i, scratch, &mut line) {
            Ok(_) => {
                console::line(&line);
                if want == Some(line.as_str()) {
                    passed += 1;
                } else {
                    failed += 1;
                    let mut l = console::LineBuf::new();
                    let _ = write!(l, "MISMATCH {} {i:03}: expected {:?}", set.name, want);
                    console::line(&l);
                }
            }
            Err(e) => {
                failed += 1;
                let mut l = console::LineBuf::new();
                let _ = write!(l, "ERROR {} {i:03}: {e:?}", set.name);
                console::line(&l);
            }
        }
    }
    (passed, failed)
}
