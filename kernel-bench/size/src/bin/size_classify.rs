//! Size probe of the int8-only runtime (built without its `f32` feature): parse a blob and get
//! the class of one inference from `u8` features with `Model::classify`, which has no float
//! arithmetic. `kinglet-firmware-bench`'s `size_base` is its baseline.
#![no_std]
#![no_main]

use core::hint::black_box;
use cortex_m_rt::entry;
use cortex_m_semihosting::debug;
use kinglet_runtime::{Input, Model};

#[panic_handler]
fn panic(_: &core::panic::PanicInfo<'_>) -> ! {
    debug::exit(debug::EXIT_FAILURE);
    loop {}
}

static BLOB: [u8; 4] = [0; 4];

#[entry]
fn main() -> ! {
    let blob: &[u8] = black_box(&BLOB);
    let mut arena = [0u8; 64];
    let features = [0u8; 4];
    if let Ok(m) = Model::parse(blob) {
        black_box(m.classify(Input::U8(black_box(&features)), &mut arena)).ok();
    }
    black_box((&mut arena, &features));
    debug::exit(debug::EXIT_SUCCESS);
    loop {}
}
