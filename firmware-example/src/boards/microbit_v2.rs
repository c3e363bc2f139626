//! BBC micro:bit v2 (nRF52833, Cortex-M4F), through `nrf52833-hal` 0.19 (embedded-hal 1.0).
//!
//! * **Class pins:** the rows of the 5 × 5 LED matrix. An LED lights when its row (anode) is
//!   high and its column (cathode) low, so the columns are held low and class `k` drives row
//!   `k + 1`: ROW1 P0.21, ROW2 P0.22, ROW3 P0.15, ROW4 P0.24 (ROW5 P0.19 unused); columns
//!   COL1 P0.28, COL2 P0.11, COL3 P0.31, COL4 P1.05, COL5 P0.30. A class lights its whole row.
//! * **Sensor:** the on-board LSM303AGR on the internal I2C bus, SCL P0.08, SDA P0.16, at
//!   400 kHz (TWIM0), read by [`kinglet_fw_sensor::lsm303::Lsm303Source`].
//!
//! Pins from the micro:bit v2 schematic (Micro:bit Educational Foundation, "MicroBit_V2.0.0_S"
//! schematic, and the pin map at tech.microbit.org/hardware/schematic); from memory.
use nrf52833_hal as hal;

use hal::gpio::{Level, Output, Pin, PushPull};
use hal::pac::{TIMER0, TWIM0};
use kinglet_fw_sensor::lsm303::{self, Lsm303Source};

/// A class pin.
pub type ClassPin = Pin<Output<PushPull>>;

/// The accelerometer source of the board.
pub type Source = Lsm303Source<hal::Twim<TWIM0>, hal::Timer<TIMER0>>;

/// What the demo uses of the board.
pub struct Board {
    /// One output per class: LED matrix rows 1 to 4.
    pub class_pins: [ClassPin; 4],
    /// The matrix columns, held low so a high row lights; kept so they stay configured.
    pub columns: [ClassPin; 5],
    /// The on-board accelerometer, configured (high resolution, ±4 g, 1344 Hz), or the reason
    /// it could not be set up.
    pub source: Result<Source, lsm303::Error<hal::twim::Error>>,
}

/// Takes the peripherals and sets up pins, bus and sensor; `None` if they were taken already.
pub fn take() -> Option<Board> {
    let p = hal::pac::Peripherals::take()?;
    let p0 = hal::gpio::p0::Parts::new(p.P0);
    let p1 = hal::gpio::p1::Parts::new(p.P1);
    let class_pins = [
        p0.p0_21.into_push_pull_output(Level::Low).degrade(),
        p0.p0_22.into_push_pull_output(Level::Low).degrade(),
        p0.p0_15.into_push_pull_output(Level::Low).degrade(),
        p0.p0_24.into_push_pull_output(Level::Low).degrade(),
    ];
    let columns = [
        p0.p0_28.into_push_pull_output(Level::Low).degrade(),
        p0.p0_11.into_push_pull_output(Level::Low).degrade(),
        p0.p0_31.into_push_pull_output(Level::Low).degrade(),
        p1.p1_05.into_push_pull_output(Level::Low).degrade(),
        p0.p0_30.into_push_pull_output(Level::Low).degrade(),
    ];
    let twim = hal::Twim::new(
        p.TWIM0,
        hal::twim::Pins {
            scl: p0.p0_08.into_floating_input().degrade(),
            sda: p0.p0_16.into_floating_input().degrade(),
        },
        hal::twim::Frequency::K400,
    );
    let mut timer = hal::Timer::new(p.TIMER0);
    let mut sensor = lsm303::Driver::new_with_i2c(twim);
    let source = lsm303::configure(&mut sensor, &mut timer)
        // One sample per 744 µs at 1344 Hz: poll every 50 µs, give up after 100 ms.
        .map(|()| Lsm303Source::new(sensor, timer, 50, 2000));
    Some(Board {
        class_pins,
        columns,
        source,
    })
}
