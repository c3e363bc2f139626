//! The int4 784 → 100 layer (`FORMAT.md` §3.5), counted like the benchmark's cases: naive
//! (each nibble read on its own), the portable int4 kernel and this build's kernel; and one
//! whole inference of the digits example packed with int4 weights on every layer
//! (`digits-i4`, f32 features: the whole-model check of `kinglet inspect`'s int4 estimate).
//! The harness runs it on both targets. A firmware of its own, not more cases in `bench`: the Cortex-M0's
//! 256 KiB of flash hold the int8 784 → 100 layer twice already, and more cases there change
//! how fat LTO compiles `bench`'s other counts (see `bench_f32.rs`).
#![no_std]
#![no_main]

use core::hint::black_box;
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use kinglet_firmware_bench::blobs::{self, Aligned};
use kinglet_firmware_bench::counted::{case, params, park};
use kinglet_firmware_bench::{naive, rng::Rng};
use kinglet_runtime::unstable::dense::{self};
use kinglet_runtime::{Input, Model};

#[panic_handler]
fn panic(info: &core::panic::PanicInfo<'_>) -> ! {
    hprintln!("kb panic {}", info);
    debug::exit(debug::EXIT_FAILURE);
    park()
}

#[entry]
fn main() -> ! {
    hprintln!("kb target {}", dense::KERNEL);
    case("empty", "empty", 0, || {});
    let mb = match Model::parse(blobs::I4_784X100) {
        Ok(m) => m,
        Err(e) => panic!("blob rejected: {}", e),
    };
    let l = mb.desc().layers[0];
    let (n, m) = (l.inputs as usize, l.outputs as usize);
    let name = "i4-784x100";
    let mut rng = Rng::new(4);
    let mut x = [0u8; 784];
    for b in x.iter_mut() {
        *b = rng.next_u32() as u8;
    }
    let x = &x[..n];
    let mut out = [0u8; 100];
    let mut reference = [0u8; 100];
    let p = params(&l);
    case(name, "naive", n * m, || {
        naive::dense_i4(black_box(&p), black_box(x), &mut reference[..m])
    });
    case(name, "portable-blocked", n * m, || {
        dense::int4::dense_i4_portable(black_box(&p), black_box(x), &mut out[..m])
    });
    assert!(out[..m] == reference[..m], "{} portable int4 differs", name);
    out[..m].fill(0);
    case(name, "kernel", n * m, || {
        dense::dense_i4_auto(black_box(&p), black_box(x), &mut out[..m])
    });
    assert!(out[..m] == reference[..m], "{} int4 kernel differs", name);
    black_box(&out);
    digits_int4(&mut rng);
    hprintln!("kb end");
    debug::exit(debug::EXIT_SUCCESS);
    park()
}

/// One whole inference of the digits example with int4 weights, features drawn as `bench`
/// draws the 64-wide models' (whole numbers 0 to 16).
#[inline(never)]
fn digits_int4(rng: &mut Rng) {
    let m = match Model::parse(blobs::DIGITS_INT4) {
        Ok(m) => m,
        Err(e) => panic!("digits int4 blob rejected: {}", e),
    };
    let mut features = [0f32; 64];
    for f in features.iter_mut() {
        *f = (rng.next_u32() % 17) as f32;
    }
    let n = m.input_len();
    assert!(n == features.len(), "digits int4: {} inputs", n);
    let mut scratch = Aligned([0u8; 512]);
    let mut scores = [0f32; 10];
    let macs: usize = m.layers().map(|l| l.macs()).sum();
    let mut pred = None;
    case("digits-i4", "model-kernel", macs, || {
        pred = Some(m.infer(
            black_box(Input::F32(&features)),
            &mut scratch.0,
            &mut scores,
        ));
    });
    assert!(
        pred.is_some_and(|p| p.is_ok()),
        "digits int4 inference failed"
    );
    black_box(&scores);
}
