//! Size probe baseline: the same skeleton as `size_int8` without the runtime. The difference
//! of the two `.text` sizes is the runtime's int8 path (parse, validate, infer).
#![no_std]
#![no_main]

use core::hint::black_box;
use cortex_m_rt::entry;
use cortex_m_semihosting::debug;

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
    black_box((blob, &mut arena, &features));
    debug::exit(debug::EXIT_SUCCESS);
    loop {}
}
