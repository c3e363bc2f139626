//! Code-size probe: parses a model and runs one inference through each input path, nothing
//! else (see `size_base`). The blob is passed through `black_box` so the compiler cannot
//! specialise the runtime to it. Also prints the peak stack of `Model::parse` and of one
//! inference per path.
#![no_std]
#![no_main]

use core::fmt::Write;
use cortex_m_rt::entry;
use kinglet_firmware_example::{console, stack};
use kinglet_fw_vectors::assets::{DIGITS, DIGITS_ARENA};
use kinglet_runtime::{Input, Model};

#[entry]
fn main() -> ! {
    let blob: &[u8] = core::hint::black_box(DIGITS);
    let Some(arena) = cortex_m::singleton!(: [u8; DIGITS_ARENA] = [0; DIGITS_ARENA]) else {
        console::exit(false)
    };
    let (model, parse_stack) = stack::measure(|| Model::parse(blob));
    let Ok(model) = model else {
        console::exit(false)
    };
    let mut scores = [0f32; 10];
    let pixels = core::hint::black_box([8u8; 64]);
    let floats = core::hint::black_box([8f32; 64]);
    let counts = core::hint::black_box([8i16; 64]);
    let (a, s_u8) = stack::measure(|| model.infer(Input::U8(&pixels), arena, &mut scores));
    let (b, s_f32) = stack::measure(|| model.infer(Input::F32(&floats), arena, &mut scores));
    let (c, s_i16) = stack::measure(|| model.infer(Input::I16(&counts), arena, &mut scores));
    let ok = a.is_ok() && b.is_ok() && c.is_ok();
    let class = a.map_or(99, |p| p.class);
    let mut l = console::LineBuf::new();
    let _ = write!(
        l,
        "class {class} stack parse={parse_stack} u8={s_u8} f32={s_f32} i16={s_i16} model_struct={}",
        core::mem::size_of::<Model<'_>>()
    );
    console::line(&l);
    console::exit(ok)
}
