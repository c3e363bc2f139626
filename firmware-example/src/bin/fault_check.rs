//! Executes a permanently undefined instruction (`udf`). The fault must reach the `HardFault`
//! handler of `kinglet_firmware_example::fault`, which prints `HARDFAULT ...` and exits through
//! semihosting with failure: `scripts/firmware.sh` expects a non-zero exit within seconds, not
//! a hang until the QEMU timeout.
#![no_std]
#![no_main]

use kinglet_firmware_example::console;

#[cortex_m_rt::entry]
fn main() -> ! {
    console::line("fault_check: executing udf");
    cortex_m::asm::udf()
}
