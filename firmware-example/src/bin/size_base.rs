//! Code-size probe, baseline: the same start-up, console and exit as `size_runtime`, without
//! the runtime. `.text(size_runtime) - .text(size_base)` is the code the runtime adds to a
//! firmware (parse, validation, int8 and f32 inference, softmax); see `scripts/firmware.sh`.
#![no_std]
#![no_main]

use core::fmt::Write;
use cortex_m_rt::entry;
use kinglet_firmware_example::console;

#[entry]
fn main() -> ! {
    let n = core::hint::black_box(3usize);
    let mut l = console::LineBuf::new();
    let _ = write!(l, "class {n}");
    console::line(&l);
    console::exit(true)
}
