//! The first-layer kernels of an int16-input model (format version 7, `FORMAT.md` §3.6:
//! int16 inputs times int8 weights, `runtime/src/dense/wide.rs`), counted like the benchmark's
//! cases on a 784 → 100 and a 64 → 64 layer: naive (output-major, indexed), the output-major
//! kernel and the `Blocked4x4` one (what the packer writes, the runtime's kernel for it); and
//! their on-target self-check against the naive sum. The harness runs it on both targets. A
//! firmware of its own, not more cases in `bench`, for the reasons `bench_i4.rs` gives.
#![no_std]
#![no_main]

use core::hint::black_box;
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use kinglet_firmware_bench::blobs::{self, Aligned};
use kinglet_firmware_bench::counted::{case, model, params, park};
use kinglet_firmware_bench::{naive, rng::Rng, selfcheck};
use kinglet_runtime::unstable::dense::{self, wide};
use kinglet_runtime::Input;

#[panic_handler]
fn panic(info: &core::panic::PanicInfo<'_>) -> ! {
    hprintln!("kb panic {}", info);
    debug::exit(debug::EXIT_FAILURE);
    park()
}

/// The cases of one int16-input layer: naive, output-major kernel, blocked kernel, each
/// against the naive output.
// Not inlined: main would hold both layers' buffers at once (the Cortex-M0 has 16 KiB).
#[inline(never)]
fn layer(name: &str, blocked: &'static [u8], om: &'static [u8], rng: &mut Rng) {
    let (mb, mo) = (model(blocked), model(om));
    let (lb, lo) = (mb.desc().layers[0], mo.desc().layers[0]);
    let (n, m) = (lb.inputs as usize, lb.outputs as usize);
    // Full-range int16 inputs, little-endian.
    let mut x = [0u8; 2 * 784];
    for b in x.iter_mut() {
        *b = rng.next_u32() as u8;
    }
    let x = &x[..2 * n];
    let mut out = [0u8; 100];
    let mut reference = [0u8; 100];
    let (pb, po) = (params(&lb), params(&lo));
    case(name, "naive", n * m, || {
        naive::dense_i16(black_box(&po), black_box(x), &mut reference[..m])
    });
    case(name, "portable", n * m, || {
        wide::dense_i16(black_box(&po), black_box(x), &mut out[..m])
    });
    assert!(out[..m] == reference[..m], "{} output-major differs", name);
    out[..m].fill(0);
    case(name, "kernel", n * m, || {
        wide::dense_i16_blocked(black_box(&pb), black_box(x), &mut out[..m])
    });
    assert!(out[..m] == reference[..m], "{} blocked differs", name);
    black_box(&out);
}

#[entry]
fn main() -> ! {
    hprintln!("kb target {}", dense::KERNEL);
    let cases = option_env!("KB_SELFCHECK_CASES")
        .and_then(|s| s.parse().ok())
        .unwrap_or(300);
    let t = selfcheck::run_int16_input(cases, 0x5EED_1616);
    hprintln!("kb selfcheck {} {}", t.passed, t.failed);
    hprintln!(
        "selfcheck: int16 input, {} passed, {} failed",
        t.passed,
        t.failed
    );
    let mut rng = Rng::new(16);
    case("empty", "empty", 0, || {});
    layer(
        "i16in-784x100",
        blobs::I16IN_784X100,
        blobs::I16IN_784X100_OM,
        &mut rng,
    );
    layer(
        "i16in-64x64",
        blobs::I16IN_64X64,
        blobs::I16IN_64X64_OM,
        &mut rng,
    );
    digits_int16_input(&mut rng);
    hprintln!("kb end");
    debug::exit(if t.failed == 0 {
        debug::EXIT_SUCCESS
    } else {
        debug::EXIT_FAILURE
    });
    park()
}

/// One whole inference of the digits example with an int16 input tensor, features drawn as
/// `bench` draws the 64-wide models' (whole numbers 0 to 16): the whole-model check of
/// `kinglet inspect`'s estimate for such a blob.
#[inline(never)]
fn digits_int16_input(rng: &mut Rng) {
    let m = model(blobs::DIGITS_INT16_INPUT);
    let mut features = [0f32; 64];
    for f in features.iter_mut() {
        *f = (rng.next_u32() % 17) as f32;
    }
    assert!(
        m.input_len() == features.len(),
        "digits int16 input: {} inputs",
        m.input_len()
    );
    let mut scratch = Aligned([0u8; 512]);
    let mut scores = [0f32; 10];
    let macs: usize = m.layers().map(|l| l.macs()).sum();
    let mut pred = None;
    case("digits-i16in", "model-kernel", macs, || {
        pred = Some(m.infer(
            black_box(Input::F32(&features)),
            &mut scratch.0,
            &mut scores,
        ));
    });
    assert!(
        pred.is_some_and(|p| p.is_ok()),
        "digits int16-input inference failed"
    );
    black_box(&scores);
}
