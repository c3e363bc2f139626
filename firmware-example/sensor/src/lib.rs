//! Where the firmware's sensor windows come from.
//!
//! [`WindowSource`] is the one interface the classifier loop sees. Three implementations:
//!
//! * [`kla3::Kla3Source`] reads live windows from the KLA-3 accelerometer (an invented part for
//!   this example, see [`kla3`]) over any `embedded_hal::i2c::I2c` bus;
//! * [`lsm303::Lsm303Source`] reads live windows from ST's LSM303AGR (the micro:bit v2's motion
//!   sensor) through the `lsm303agr` driver crate;
//! * [`replay::ReplaySource`] plays back windows recorded in flash, which is what runs under
//!   QEMU, where no accelerometer exists.
#![cfg_attr(not(test), no_std)]
#![forbid(unsafe_code)]
#![deny(missing_docs)]
#![cfg_attr(
    not(test),
    deny(
        clippy::unwrap_used,
        clippy::expect_used,
        clippy::panic,
        clippy::indexing_slicing
    )
)]

pub mod kla3;
pub mod lsm303;
pub mod pins;
pub mod replay;

pub use kinglet_vibration_features::{Window, AXES, WINDOW};

/// Something that produces accelerometer windows of 3 axes × 128 samples.
pub trait WindowSource {
    /// Why a window could not be produced.
    type Error: core::fmt::Debug;

    /// Fills `window` with the next window (`window[axis][sample]`, axes x, y, z).
    fn next_window(&mut self, window: &mut Window) -> Result<(), Self::Error>;
}
