#![no_std]
#![no_main]
use kinglet_firmware_example as _;
#[cortex_m_rt::entry]
fn main() -> ! { kinglet_firmware_example::console::exit(true) }
