//! Development boards: the peripherals each one gives the demo (one output pin per class and,
//! where the board has one, the accelerometer). Compiled only with the board's cargo feature;
//! the QEMU builds have none of this.
//!
//! | board | feature | target | class pins | sensor |
//! |---|---|---|---|---|
//! | Raspberry Pi Pico (RP2040) | `board-pico` | `thumbv6m-none-eabi` | GP2, GP3, GP4, GP5 | none (replay) |
//! | BBC micro:bit v2 (nRF52833) | `board-microbit-v2` | `thumbv7em-none-eabihf` | LED matrix rows 1–4 | LSM303AGR |

#[cfg(feature = "board-microbit-v2")]
pub mod microbit_v2;
#[cfg(feature = "board-pico")]
pub mod pico;
