//! The runtime's whole public inference path in one bare-metal binary: parse a blob the
//! optimiser cannot see into (`black_box`), then run every input kind through `infer`,
//! `infer_traced` and `classify`. With `panic = "abort"`, a looping panic handler and LTO,
//! every panic path the runtime can still reach leaves a call to a `core::panicking` (or
//! slice-index, unwrap, expect) symbol in the ELF; `scripts/no-panic-check.sh` lists them and
//! who calls them.
#![no_std]
#![no_main]

use core::hint::black_box;
use kinglet_runtime::{Input, Model};

/// Stands in for a blob in flash whose bytes are not known when the firmware is built.
static FLASH: [u8; 4096] = [0; 4096];

#[panic_handler]
fn panic(_: &core::panic::PanicInfo<'_>) -> ! {
    // Referenced only if some path can panic; the check looks for what calls it.
    loop {
        black_box(());
    }
}

/// The entry point: never returns.
#[no_mangle]
pub extern "C" fn _start() -> ! {
    let blob: &[u8] = black_box(&FLASH[..]);
    let mut scratch = [0u8; 2048];
    let mut scores = [0f32; 16];
    loop {
        if let Ok(model) = Model::parse(blob) {
            let f = [0.5f32; 64];
            let h = [0i16; 64];
            let u = [0u8; 64];
            let n = black_box(64usize).min(64);
            for input in [
                Input::F32(black_box(&f[..n])),
                Input::I16(black_box(&h[..n])),
                Input::U8(black_box(&u[..n])),
            ] {
                let scratch = black_box(&mut scratch[..]);
                let scores = black_box(&mut scores[..]);
                black_box(model.infer(input, scratch, scores).ok());
                black_box(model.classify(input, scratch).ok());
                black_box(
                    model
                        .infer_traced(input, scratch, scores, &mut |s| {
                            black_box(s.values.real(0));
                        })
                        .ok(),
                );
            }
            black_box(model.labels().count());
            black_box(model.label(black_box(1)));
            black_box(model.scratch_bytes());
            black_box(kinglet_runtime::scratch_bytes(blob));
        }
    }
}
