//! Code-size probe: parses a model and runs one inference through each input path, nothing
//! else (see `size_base`). The blob is passed through `black_box` so the compiler cannot
//! specialise the runtime to it. Built, not run, by the measurement harness
//! (`bash scripts/kernel-bench.sh`), which records the difference in
//! `converter/src/fit/measured.rs`; the stack figures there come from the harness's stack probe.
#![no_std]
#![no_main]

use core::fmt::Write;
use cortex_m_rt::entry;
use kinglet_firmware_example::console;
use kinglet_fw_vectors::assets::{DIGITS, DIGITS_SCRATCH};
use kinglet_runtime::{Input, Model};

#[entry]
fn main() -> ! {
    let blob: &[u8] = core::hint::black_box(DIGITS);
    let Some(scratch) = cortex_m::singleton!(: [u8; DIGITS_SCRATCH] = [0; DIGITS_SCRATCH]) else {
        console::exit(false)
    };
    let Ok(model) = Model::parse(blob) else {
        console::exit(false)
    };
    let mut scores = [0f32; 10];
    let pixels = core::hint::black_box([8u8; 64]);
    let floats = core::hint::black_box([8f32; 64]);
    let counts = core::hint::black_box([8i16; 64]);
    let a = model.infer(Input::U8(&pixels), scratch, &mut scores);
    let b = model.infer(Input::F32(&floats), scratch, &mut scores);
    let c = model.infer(Input::I16(&counts), scratch, &mut scores);
    let ok = a.is_ok() && b.is_ok() && c.is_ok();
    let class = a.map_or(99, |p| p.class);
    let mut l = console::LineBuf::new();
    let _ = write!(l, "class {class}");
    console::line(&l);
    console::exit(ok)
}
