//! The stack probe: `Model::parse` and one inference through each input path for the two int8
//! examples, parse and `infer` for the f32 digits model, each call measured by
//! [`stack::measure`]. Prints
//! `kb stack MODEL CALL PAINTED SP` per call over semihosting; the harness pairs the lines, in
//! order, with the lowest stack pointer its QEMU register trace saw between the markers.
#![no_std]
#![no_main]

use core::hint::black_box;
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use kinglet_firmware_bench::blobs::{self, Aligned};
use kinglet_firmware_bench::{rng::Rng, stack};
use kinglet_runtime::{Input, Model};

#[panic_handler]
fn panic(info: &core::panic::PanicInfo<'_>) -> ! {
    hprintln!("kb panic {}", info);
    debug::exit(debug::EXIT_FAILURE);
    park()
}

fn report(model: &str, call: &str, used: stack::Used) {
    hprintln!("kb stack {} {} {} {}", model, call, used.painted, used.sp);
}

/// Parse, then `infer` from f32 features; with `every_path`, also `infer` from u8 and i16 and
/// `classify` from i16 counts.
fn calls(name: &str, blob: &'static [u8], scratch: &mut [u8], rng: &mut Rng, every_path: bool) {
    let blob = black_box(blob);
    let (model, used) = stack::measure(|| Model::parse(blob));
    report(name, "parse", used);
    let model = match model {
        Ok(m) => m,
        Err(e) => panic!("{} rejected: {}", name, e),
    };
    let n = model.input_len();
    let (mut floats, mut bytes, mut counts) = ([0f32; 64], [0u8; 64], [0i16; 64]);
    for ((f, b), c) in floats.iter_mut().zip(&mut bytes).zip(&mut counts).take(n) {
        let v = rng.next_u32() % 17;
        (*f, *b, *c) = (v as f32, v as u8, v as i16);
    }
    let mut scores = [0f32; 16];
    let inputs = [
        ("infer-f32", Input::F32(&floats[..n])),
        ("infer-u8", Input::U8(&bytes[..n])),
        ("infer-i16", Input::I16(&counts[..n])),
    ];
    for (call, input) in inputs.into_iter().take(if every_path { 3 } else { 1 }) {
        let (r, used) = stack::measure(|| model.infer(black_box(input), scratch, &mut scores));
        assert!(r.is_ok(), "{} {} failed", name, call);
        report(name, call, used);
    }
    if !every_path {
        return;
    }
    let input = Input::I16(&counts[..n]);
    let (r, used) = stack::measure(|| model.classify(black_box(input), scratch));
    assert!(r.is_ok(), "{} classify failed", name);
    report(name, "classify-i16", used);
}

#[entry]
fn main() -> ! {
    hprintln!("kb model_struct {}", core::mem::size_of::<Model<'_>>());
    let mut scratch = Aligned([0u8; 1024]);
    let mut rng = Rng::new(42);
    calls("digits", blobs::DIGITS, &mut scratch.0, &mut rng, true);
    calls(
        "vibration",
        blobs::VIBRATION,
        &mut scratch.0,
        &mut rng,
        true,
    );
    // The f32 model's other input paths convert to f32 and run the same layers; on the M0,
    // in software float, each is 1.6 million traced instructions.
    calls(
        "digits-f32",
        blobs::DIGITS_F32,
        &mut scratch.0,
        &mut rng,
        false,
    );
    hprintln!("kb end");
    debug::exit(debug::EXIT_SUCCESS);
    park()
}

/// Without a debugger attached the exit call returns; park the core.
fn park() -> ! {
    loop {
        cortex_m::asm::wfi();
    }
}
