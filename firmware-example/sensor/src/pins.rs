//! One output pin per class, and a pin that only records its state (for QEMU).
use embedded_hal::digital::{ErrorType, OutputPin, StatefulOutputPin};

/// A pin with no hardware behind it: it remembers the level it was last set to.
///
/// Under QEMU the example machines have no LEDs the firmware could drive through a HAL, so the
/// firmware drives these instead and prints their levels; on a real board the same code takes
/// the board HAL's `OutputPin`s. Setting it never fails.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct RecordingPin {
    high: bool,
    /// How many times the level changed.
    pub toggles: u32,
}

impl RecordingPin {
    /// A pin that starts low.
    pub const fn new() -> Self {
        RecordingPin {
            high: false,
            toggles: 0,
        }
    }

    /// The level last set.
    pub fn is_high(&self) -> bool {
        self.high
    }

    fn set(&mut self, high: bool) {
        if self.high != high {
            self.toggles += 1;
        }
        self.high = high;
    }
}

impl ErrorType for RecordingPin {
    type Error = core::convert::Infallible;
}

impl OutputPin for RecordingPin {
    fn set_low(&mut self) -> Result<(), Self::Error> {
        self.set(false);
        Ok(())
    }

    fn set_high(&mut self) -> Result<(), Self::Error> {
        self.set(true);
        Ok(())
    }
}

impl StatefulOutputPin for RecordingPin {
    fn is_set_high(&mut self) -> Result<bool, Self::Error> {
        Ok(self.high)
    }

    fn is_set_low(&mut self) -> Result<bool, Self::Error> {
        Ok(!self.high)
    }
}

/// Drives one pin per class: the predicted class's pin high, every other pin low.
///
/// Returns the first pin error; pins past `pins.len()` classes are simply not driven.
pub fn show_class<P: OutputPin>(pins: &mut [P], class: usize) -> Result<(), P::Error> {
    for (i, pin) in pins.iter_mut().enumerate() {
        if i == class {
            pin.set_high()?;
        } else {
            pin.set_low()?;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exactly_the_class_pin_is_high() {
        let mut pins = [RecordingPin::new(); 4];
        show_class(&mut pins, 2).unwrap();
        assert_eq!(pins.map(|p| p.is_high()), [false, false, true, false]);
        show_class(&mut pins, 0).unwrap();
        assert_eq!(pins.map(|p| p.is_high()), [true, false, false, false]);
        assert_eq!(pins[2].toggles, 2);
        assert_eq!(pins[1].toggles, 0);
        // A class without a pin leaves every pin low.
        show_class(&mut pins, 9).unwrap();
        assert!(pins.iter().all(|p| !p.is_high()));
    }
}
