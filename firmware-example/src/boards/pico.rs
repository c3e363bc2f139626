//! Raspberry Pi Pico (RP2040, Cortex-M0+), through `rp2040-hal` 0.12 (embedded-hal 1.0).
//!
//! * **Boot:** the RP2040 boot ROM copies the first 256 bytes of flash to RAM and runs them
//!   (boot stage 2) to set up the QSPI flash for execute-in-place; [`BOOT2_FIRMWARE`] is the
//!   `rp2040-boot2` stage for the Pico's W25Q16JV flash (the W25Q080 loader, compatible, as the
//!   `rp-pico` board crate uses), placed in `.boot2` by `memory/pico.x`.
//! * **Class pins:** GP2, GP3, GP4, GP5 (Pico header pins 4, 5, 6, 7; source: Raspberry Pi Pico
//!   Datasheet, Raspberry Pi Ltd, figure "Pico pinout", from memory), push-pull outputs, one
//!   per class in model order; wire an LED with a series resistor (e.g. 330 Ω) from each to
//!   GND (header pin 3 or 8). The on-board LED (GP25) is left alone.
//! * **Sensor:** the Pico has none; the demo replays the recorded windows.
//! * **Clocks:** 12 MHz crystal, PLLs to the HAL's defaults (125 MHz system clock).
//! * Only core 0 runs; `cortex-m`'s single-core critical section is therefore enough.
use rp2040_hal as hal;

use hal::gpio::{DynPinId, FunctionSioOutput, Pin, PullDown};

/// Second-stage bootloader, at the start of flash (see the module docs).
#[link_section = ".boot2"]
#[no_mangle]
#[used]
pub static BOOT2_FIRMWARE: [u8; 256] = rp2040_boot2::BOOT_LOADER_W25Q080;

/// Frequency of the Pico's crystal (Raspberry Pi Pico Datasheet: 12 MHz, from memory).
pub const XTAL_HZ: u32 = 12_000_000;

/// A class pin.
pub type ClassPin = Pin<DynPinId, FunctionSioOutput, PullDown>;

/// What the demo uses of the board.
pub struct Board {
    /// One output per class: GP2, GP3, GP4, GP5.
    pub class_pins: [ClassPin; 4],
}

/// Takes the peripherals and sets up clocks and pins; `None` if they were taken already or
/// the clocks did not start.
pub fn take() -> Option<Board> {
    let mut pac = hal::pac::Peripherals::take()?;
    let mut watchdog = hal::Watchdog::new(pac.WATCHDOG);
    hal::clocks::init_clocks_and_plls(
        XTAL_HZ,
        pac.XOSC,
        pac.CLOCKS,
        pac.PLL_SYS,
        pac.PLL_USB,
        &mut pac.RESETS,
        &mut watchdog,
    )
    .ok()?;
    let sio = hal::Sio::new(pac.SIO);
    let pins = hal::gpio::Pins::new(
        pac.IO_BANK0,
        pac.PADS_BANK0,
        sio.gpio_bank0,
        &mut pac.RESETS,
    );
    Some(Board {
        class_pins: [
            pins.gpio2.into_push_pull_output().into_dyn_pin(),
            pins.gpio3.into_push_pull_output().into_dyn_pin(),
            pins.gpio4.into_push_pull_output().into_dyn_pin(),
            pins.gpio5.into_push_pull_output().into_dyn_pin(),
        ],
    })
}
