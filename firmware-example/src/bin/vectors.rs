//! Bit-exact test vectors on the target.
//!
//! Runs every vector of [`kinglet_fw_vectors::SETS`] (150 digits rows through the integer
//! `u8` input path, 20 through the `f32` path, 10 through the f32 model, 64 recorded vibration
//! windows through feature extraction and the `f32` path, 60 + 10 rows through a scikit-learn
//! logistic regression's int8 and f32 blobs, 40 + 10 through a scikit-learn tanh MLP's int8
//! and f32 blobs, 40 through the digits example with int4 weights, 40 `u8` + 20 `f32` through
//! the digits example with an int16 input tensor), prints one line per vector in the
//! format of `kinglet_fw_vectors::format_vector`, compares each line with the expected line
//! embedded at build time from `tests/fixtures/vectors/<set>.txt`, and ends with
//! `vectors: N passed, M failed`. `scripts/firmware.sh` also diffs the printed lines against
//! the same files.
//!
//! With a model of your own given at build time (`KINGLET_OWN_MODEL`, `KINGLET_OWN_VECTORS`,
//! `KINGLET_OWN_FEED`; README, "Your own model, step by step") it then runs that model on the
//! inputs of each of its expected lines and compares its line the same way
//! (`kinglet_fw_vectors::own::check_line`); the summary counts both.
//!
//! One scratch buffer serves every shipped model: a `static` of `MAX_SCRATCH` bytes (the largest
//! `kinglet_runtime::scratch_bytes` of the embedded blobs, computed at compile time), handed out
//! once by `cortex_m::singleton!`.
#![no_std]
#![no_main]

use core::fmt::Write;
use cortex_m_rt::entry;
use kinglet_firmware_example::own::{OwnSet, OWN, OWN_SCRATCH};
use kinglet_firmware_example::{board, console};
use kinglet_fw_vectors::assets::MAX_SCRATCH;
use kinglet_fw_vectors::own::check_line;
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
    let mut want = TOTAL;
    if let Some(own) = OWN {
        let Some(own_scratch) = cortex_m::singleton!(: [u8; OWN_SCRATCH] = [0; OWN_SCRATCH]) else {
            console::exit(false)
        };
        let (p, f) = run_own(&own, own_scratch);
        passed += p;
        failed += f;
        want += own.lines;
    }
    let mut l = console::LineBuf::new();
    let _ = write!(l, "vectors: {passed} passed, {failed} failed");
    console::line(&l);
    console::exit(failed == 0 && passed == want)
}

/// Runs the model of your own on the inputs of its expected lines; returns (passed, failed).
fn run_own(own: &OwnSet, scratch: &mut [u8]) -> (usize, usize) {
    let mut l = console::LineBuf::new();
    let _ = write!(
        l,
        "own model: {} bytes, scratch {} bytes, {} vectors, feed {:?}",
        own.model.len(),
        scratch.len(),
        own.lines,
        own.feed
    );
    console::line(&l);
    let model = match Model::parse(own.model) {
        Ok(m) => m,
        Err(e) => {
            let mut l = console::LineBuf::new();
            let _ = write!(l, "own model rejected: {e}");
            console::line(&l);
            return (0, own.lines);
        }
    };
    // build.rs embeds it with `embed_blob!`, at a multiple of 4.
    if !model.weights_aligned() {
        console::line("own model: weights not 4-byte aligned");
        return (0, own.lines);
    }
    let mut line = Line::new();
    let (mut passed, mut failed) = (0, 0);
    for (i, want) in own.vectors.lines().enumerate() {
        match check_line(&model, own.feed, want, scratch, &mut line) {
            Ok(same) => {
                console::line(&line);
                if same {
                    passed += 1;
                } else {
                    failed += 1;
                    let mut l = console::LineBuf::new();
                    let _ = write!(l, "MISMATCH own line {}: expected {want:?}", i + 1);
                    console::line(&l);
                }
            }
            Err(e) => {
                failed += 1;
                let mut l = console::LineBuf::new();
                let _ = write!(l, "ERROR own line {}: {e:?}", i + 1);
                console::line(&l);
            }
        }
    }
    (passed, failed)
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
