//! A [`WindowSource`] over the accelerometer of ST's **LSM303AGR** (the motion sensor of the
//! BBC micro:bit v2), through the maintained `lsm303agr` driver crate (1.1, embedded-hal 1.0).
//!
//! ## Scale
//!
//! The source runs the part in high-resolution mode at ±4 g ([`MODE`], [`SCALE`]) and puts the
//! driver's *raw* output register value into the window: the 16-bit, left-justified two's
//! complement `OUT_*_A` word, whose top 12 bits are the high-resolution sample. A full 16-bit
//! word spans ±4 g, so its nominal scale is 2¹⁵ / 4 = [`COUNTS_PER_G`] = 8192 counts per g,
//! i.e. 0.1221 mg per count — the scale of the KLA-3 at ±4 g that the shipped vibration model
//! was trained on, and the `int16` input of [`kinglet_vibration_features::window_features`],
//! the same feature code as on the host.
//!
//! The data sheet's sensitivity at ±4 g in high-resolution mode is 1.95 mg per 12-bit digit,
//! i.e. 1.95 / 16 = 0.1219 mg per count of the 16-bit word, or 8205 counts per g: 0.16 % from
//! the nominal 8192, well inside the part's sensitivity tolerance (the unit test
//! `scale_matches_the_data_sheet` checks both, and the driver's own mg conversion).
//!
//! ## Rate
//!
//! High-resolution mode tops out at 1344 samples per second ([`ODR`]); the vibration example
//! was recorded at 1600. Features that count per window (zero crossings, mean absolute
//! difference) therefore differ on this part from the KLA-3 recordings: for live use, record
//! windows with this source and train on them (README, "Your own model, step by step").
//!
//! ## Reading
//!
//! One sample per `STATUS_REG_A` poll: wait for `ZYXDA` (new x, y, z data), read `OUT_X_L_A`
//! .. `OUT_Z_H_A` in one transfer (block data update is on after the driver's `init`, so the
//! two bytes of an axis come from the same sample). A `ZYXOR` overrun flag after the first
//! sample means a sample was overwritten unread, so the window would not be contiguous in time
//! and is rejected with [`Error::Overrun`].
use crate::{Window, WindowSource, AXES, WINDOW};
use embedded_hal::delay::DelayNs;
use embedded_hal::i2c::I2c;
use lsm303agr::interface::I2cInterface;
use lsm303agr::mode::MagOneShot;
use lsm303agr::{AccelMode, AccelOutputDataRate, AccelScale, Lsm303agr};

/// Accelerometer mode of the source: high resolution (12-bit samples).
pub const MODE: AccelMode = AccelMode::HighResolution;
/// Full scale of the source: ±4 g.
pub const SCALE: AccelScale = AccelScale::G4;
/// Output data rate: 1344 Hz, the fastest of high-resolution mode.
pub const ODR: AccelOutputDataRate = AccelOutputDataRate::Khz1_344;
/// Samples per second at [`ODR`].
pub const RATE_HZ: u32 = 1344;
/// Nominal counts per g of the raw 16-bit word at ±4 g: 2¹⁵ counts span 4 g.
pub const COUNTS_PER_G: u32 = (1 << 15) / 4;

/// The driver on an I2C bus (accelerometer at the part's fixed address `0x19`).
pub type Driver<I2C> = Lsm303agr<I2cInterface<I2C>, MagOneShot>;

/// Why a window could not be read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Error<E> {
    /// The bus reported an error.
    Bus(E),
    /// The driver refused the mode and rate combination (cannot happen with [`MODE`] and
    /// [`ODR`], which the data sheet allows together).
    InvalidSetting,
    /// The part signalled an overrun inside a window: a sample was lost.
    Overrun,
    /// No sample arrived within the polling limit.
    Timeout,
}

impl<E> From<lsm303agr::Error<E>> for Error<E> {
    fn from(e: lsm303agr::Error<E>) -> Self {
        match e {
            lsm303agr::Error::Comm(e) => Error::Bus(e),
            lsm303agr::Error::InvalidInputData => Error::InvalidSetting,
        }
    }
}

impl<E: core::fmt::Debug> core::fmt::Display for Error<E> {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            Error::Bus(e) => write!(f, "LSM303AGR bus error: {e:?}"),
            Error::InvalidSetting => {
                f.write_str("LSM303AGR: mode and output rate do not go together")
            }
            Error::Overrun => f.write_str("LSM303AGR overrun: a sample was lost inside a window"),
            Error::Timeout => f.write_str("LSM303AGR: no new sample within the polling limit"),
        }
    }
}

/// Sets up the part for the source: the driver's `init` (block data update on), then
/// [`MODE`] at [`ODR`] and [`SCALE`].
pub fn configure<I2C: I2c, D: DelayNs>(
    sensor: &mut Driver<I2C>,
    delay: &mut D,
) -> Result<(), Error<I2C::Error>> {
    sensor.init()?;
    sensor.set_accel_mode_and_odr(delay, MODE, ODR)?;
    sensor.set_accel_scale(SCALE)?;
    Ok(())
}

/// Windows of 3 × 128 raw samples from a configured LSM303AGR (see [`configure`]).
///
/// Between polls that find no new sample it waits `poll_us` microseconds; after `max_polls`
/// such polls in a row it gives up with [`Error::Timeout`].
#[derive(Debug)]
pub struct Lsm303Source<I2C, D> {
    /// The driver.
    pub sensor: Driver<I2C>,
    delay: D,
    poll_us: u32,
    max_polls: u32,
}

impl<I2C: I2c, D: DelayNs> Lsm303Source<I2C, D> {
    /// A source over a configured driver.
    pub fn new(sensor: Driver<I2C>, delay: D, poll_us: u32, max_polls: u32) -> Self {
        Lsm303Source {
            sensor,
            delay,
            poll_us,
            max_polls,
        }
    }
}

impl<I2C: I2c, D: DelayNs> WindowSource for Lsm303Source<I2C, D> {
    type Error = Error<I2C::Error>;

    fn next_window(&mut self, window: &mut Window) -> Result<(), Self::Error> {
        for t in 0..WINDOW {
            let mut idle = 0;
            loop {
                let status = self.sensor.accel_status()?;
                // Before the first sample a stale overrun only says the part ran unread.
                if t > 0 && status.xyz_overrun() {
                    return Err(Error::Overrun);
                }
                if status.xyz_new_data() {
                    break;
                }
                idle += 1;
                if idle > self.max_polls {
                    return Err(Error::Timeout);
                }
                self.delay.delay_us(self.poll_us);
            }
            let a = self.sensor.acceleration()?;
            let (x, y, z) = a.xyz_raw();
            // The raw word is two's complement: reinterpret the bits.
            for (axis, v) in window.iter_mut().zip([x, y, z]).take(AXES) {
                if let Some(slot) = axis.get_mut(t) {
                    *slot = i16::from_ne_bytes(v.to_ne_bytes());
                }
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use embedded_hal_mock::eh1::delay::NoopDelay;
    use embedded_hal_mock::eh1::i2c::{Mock, Transaction as T};

    const XL: u8 = 0x19;
    const STATUS_REG_A: u8 = 0x27;
    /// `OUT_X_L_A` with the auto-increment bit.
    const OUT_X_L_A_INC: u8 = 0x28 | 0x80;
    const ZYXDA: u8 = 1 << 3;
    const ZYXOR: u8 = 1 << 7;

    /// What `configure` writes, from the LSM303AGR data sheet's register descriptions
    /// (DocID027765, section 8: CTRL_REG4_A 0x23 BDU bit 7, FS bits 5..4 = 01 for ±4 g, HR bit
    /// 3; TEMP_CFG_REG_A 0x1F TEMP_EN bits 7..6; CTRL_REG1_A 0x20 ODR bits 7..4 = 1001 for
    /// 1.344 kHz, LPen bit 3 = 0, Z/Y/X enable bits 2..0; CFG_REG_C_M 0x62 BDU bit 4 at the
    /// magnetometer's address 0x1E). Register addresses and bits from memory of the data sheet.
    fn configure_transactions() -> Vec<T> {
        vec![
            T::write(XL, vec![0x23, 0x80]),
            T::write(XL, vec![0x1F, 0xC0]),
            T::write(0x1E, vec![0x62, 0x10]),
            T::write(XL, vec![0x20, 0x97]),
            T::write(XL, vec![0x23, 0x88]),
            T::write(XL, vec![0x23, 0x98]),
        ]
    }

    fn sample(x: i16, y: i16, z: i16) -> Vec<u8> {
        [x, y, z].iter().flat_map(|v| v.to_le_bytes()).collect()
    }

    #[test]
    fn configure_sets_high_resolution_4g_1344hz() {
        let mut i2c = Mock::new(&configure_transactions());
        let mut s = Lsm303agr::new_with_i2c(i2c.clone());
        configure(&mut s, &mut NoopDelay::new()).unwrap();
        i2c.done();
    }

    #[test]
    fn window_holds_the_raw_words_in_time_order() {
        let mut ex = configure_transactions();
        for t in 0..WINDOW as i16 {
            if t == 5 {
                // Not ready once: the source polls again.
                ex.push(T::write_read(XL, vec![STATUS_REG_A], vec![0]));
            }
            let stale = if t == 0 { ZYXOR } else { 0 };
            ex.push(T::write_read(XL, vec![STATUS_REG_A], vec![ZYXDA | stale]));
            ex.push(T::write_read(
                XL,
                vec![OUT_X_L_A_INC],
                sample(t * 16, -t * 16, 8192),
            ));
        }
        let mut i2c = Mock::new(&ex);
        let mut s = Lsm303agr::new_with_i2c(i2c.clone());
        configure(&mut s, &mut NoopDelay::new()).unwrap();
        let mut src = Lsm303Source::new(s, NoopDelay::new(), 100, 3);
        let mut w: Window = [[0; WINDOW]; AXES];
        src.next_window(&mut w).unwrap();
        let want_x: Vec<i16> = (0..WINDOW as i16).map(|t| t * 16).collect();
        let want_y: Vec<i16> = want_x.iter().map(|v| -v).collect();
        assert_eq!(w[0].to_vec(), want_x);
        assert_eq!(w[1].to_vec(), want_y);
        assert_eq!(w[2], [8192; WINDOW]);
        i2c.done();
    }

    #[test]
    fn overrun_inside_a_window_is_an_error() {
        let mut ex = configure_transactions();
        ex.push(T::write_read(XL, vec![STATUS_REG_A], vec![ZYXDA]));
        ex.push(T::write_read(XL, vec![OUT_X_L_A_INC], sample(1, 2, 3)));
        ex.push(T::write_read(XL, vec![STATUS_REG_A], vec![ZYXDA | ZYXOR]));
        let mut i2c = Mock::new(&ex);
        let mut s = Lsm303agr::new_with_i2c(i2c.clone());
        configure(&mut s, &mut NoopDelay::new()).unwrap();
        let mut src = Lsm303Source::new(s, NoopDelay::new(), 100, 3);
        let mut w: Window = [[0; WINDOW]; AXES];
        assert_eq!(src.next_window(&mut w), Err(Error::Overrun));
        i2c.done();
    }

    #[test]
    fn no_sample_times_out() {
        let mut ex = configure_transactions();
        for _ in 0..=3 {
            ex.push(T::write_read(XL, vec![STATUS_REG_A], vec![0]));
        }
        let mut i2c = Mock::new(&ex);
        let mut s = Lsm303agr::new_with_i2c(i2c.clone());
        configure(&mut s, &mut NoopDelay::new()).unwrap();
        let mut src = Lsm303Source::new(s, NoopDelay::new(), 100, 3);
        let mut w: Window = [[0; WINDOW]; AXES];
        assert_eq!(src.next_window(&mut w), Err(Error::Timeout));
        i2c.done();
    }

    /// The scale against the part's data sheet: ST, "LSM303AGR Ultra-compact high-performance
    /// eCompass module", DocID027765, Table 3 "Sensor characteristics", linear acceleration
    /// sensitivity So at FS = ±4 g in high-resolution mode: 1.95 mg/digit (12-bit digits).
    /// The value and the table number are from memory of the data sheet.
    #[test]
    fn scale_matches_the_data_sheet() {
        const DATASHEET_MG_PER_DIGIT_HR_4G: f64 = 1.95;
        // 12-bit digits sit left-justified in the 16-bit word: 16 counts per digit.
        let datasheet_counts_per_g = 1000.0 / (DATASHEET_MG_PER_DIGIT_HR_4G / 16.0);
        let nominal = f64::from(COUNTS_PER_G);
        assert_eq!(COUNTS_PER_G, 8192);
        let rel = (datasheet_counts_per_g - nominal).abs() / datasheet_counts_per_g;
        // 8205.1 vs 8192: 0.16 %. The data sheet's sensitivity tolerance is wider than that
        // (its Table 3 gives typical values only; from memory).
        assert!(
            rel < 0.002,
            "nominal {nominal} vs data sheet {datasheet_counts_per_g}: {rel}"
        );

        // The driver's own mg conversion of a raw word, in the configured mode and scale,
        // agrees: it uses 2 mg/digit (1.95 rounded to an integer), so within 2.6 %.
        let mut ex = configure_transactions();
        ex.push(T::write_read(
            XL,
            vec![OUT_X_L_A_INC],
            sample(8192, -8192, 0),
        ));
        let mut i2c = Mock::new(&ex);
        let mut s = Lsm303agr::new_with_i2c(i2c.clone());
        configure(&mut s, &mut NoopDelay::new()).unwrap();
        let a = s.acceleration().unwrap();
        // 8192 counts = 1 g by our scale.
        let ours_mg = 1000.0 * 8192.0 / nominal;
        let driver_mg = f64::from(a.x_mg());
        assert!(
            (driver_mg - ours_mg).abs() / ours_mg < 0.026,
            "{driver_mg} mg vs {ours_mg}"
        );
        assert_eq!(a.y_mg(), -a.x_mg());
        // And against the data sheet directly: 512 digits × 1.95 mg = 998.4 mg.
        let sheet_mg = 8192.0 / 16.0 * DATASHEET_MG_PER_DIGIT_HR_4G;
        assert!((ours_mg - sheet_mg).abs() / sheet_mg < 0.002);
        i2c.done();
    }
}
