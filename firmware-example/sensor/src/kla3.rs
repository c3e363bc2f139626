//! Driver for the **KLA-3, an invented part for this example**: a 3-axis accelerometer on I2C.
//!
//! No such chip exists; the register map below is ours, small but shaped like real parts, so the
//! example shows how a Kinglet firmware reads a sensor through `embedded-hal` 1.0 without tying
//! it to one vendor. The driver is generic over [`embedded_hal::i2c::I2c`] and unit-tested
//! against `embedded-hal-mock` I2C transactions.
//!
//! ## Bus
//!
//! 7-bit address [`ADDRESS`] (`0x1D`; `0x1C` with the address pin low). A register read is a
//! write of the register address followed by a repeated-start read; the register address
//! auto-increments during a multi-byte read, except on `FIFO_DATA`, which streams.
//!
//! ## Register map
//!
//! | addr | name | access | content |
//! |---|---|---|---|
//! | `0x0F` | `WHO_AM_I` | r | always [`WHO_AM_I_VALUE`] (`0x4B`) |
//! | `0x20` | `CTRL` | r/w | bits 2..0 output rate ([`Rate`]: 0 = off, 1 = 100 Hz, 2 = 400 Hz, 3 = 800 Hz, 4 = 1600 Hz); bits 5..4 range ([`Range`]: 0 = ±2 g, 1 = ±4 g, 2 = ±8 g); bit 7 `FIFO_EN` |
//! | `0x27` | `STATUS` | r | bit 0 `XYZ_READY` (a new sample is in `OUT_*`); bit 1 `FIFO_OVR` (the FIFO overflowed and dropped samples since `STATUS` was last read) |
//! | `0x28`–`0x2D` | `OUT_X_L`, `OUT_X_H`, `OUT_Y_L`, `OUT_Y_H`, `OUT_Z_L`, `OUT_Z_H` | r | latest sample, little-endian `int16` per axis, in counts; reading `OUT_Z_H` clears `XYZ_READY` |
//! | `0x2E` | `FIFO_COUNT` | r | complete x/y/z frames waiting in the FIFO, 0..=32 |
//! | `0x2F` | `FIFO_DATA` | r | the oldest frame, 6 bytes as in `OUT_X_L`..`OUT_Z_H`; a longer read streams the following frames |
//!
//! Sensitivity is 16384 counts/g at ±2 g, 8192 at ±4 g and 4096 at ±8 g.
use crate::{Window, WindowSource, AXES, WINDOW};
use embedded_hal::delay::DelayNs;
use embedded_hal::i2c::I2c;

/// Default 7-bit I2C address.
pub const ADDRESS: u8 = 0x1D;
/// Content of `WHO_AM_I`.
pub const WHO_AM_I_VALUE: u8 = 0x4B;
/// Depth of the FIFO in frames.
pub const FIFO_DEPTH: usize = 32;

/// Register addresses.
pub mod reg {
    /// Identity register.
    pub const WHO_AM_I: u8 = 0x0F;
    /// Rate, range and FIFO enable.
    pub const CTRL: u8 = 0x20;
    /// Data-ready and FIFO-overrun flags.
    pub const STATUS: u8 = 0x27;
    /// First byte of the latest sample.
    pub const OUT_X_L: u8 = 0x28;
    /// Frames in the FIFO.
    pub const FIFO_COUNT: u8 = 0x2E;
    /// FIFO read port.
    pub const FIFO_DATA: u8 = 0x2F;
}

/// `CTRL` bit 7: the FIFO collects samples.
pub const CTRL_FIFO_EN: u8 = 1 << 7;
/// `STATUS` bit 0: a new sample is ready.
pub const STATUS_XYZ_READY: u8 = 1 << 0;
/// `STATUS` bit 1: the FIFO overflowed.
pub const STATUS_FIFO_OVR: u8 = 1 << 1;

/// Output data rate (`CTRL` bits 2..0).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Rate {
    /// Power-down.
    Off = 0,
    /// 100 samples per second.
    Hz100 = 1,
    /// 400 samples per second.
    Hz400 = 2,
    /// 800 samples per second.
    Hz800 = 3,
    /// 1600 samples per second (the rate of the vibration example).
    Hz1600 = 4,
}

impl Rate {
    /// Samples per second (0 when off).
    pub const fn hz(self) -> u32 {
        match self {
            Rate::Off => 0,
            Rate::Hz100 => 100,
            Rate::Hz400 => 400,
            Rate::Hz800 => 800,
            Rate::Hz1600 => 1600,
        }
    }
}

/// Full-scale range (`CTRL` bits 5..4).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Range {
    /// ±2 g, 16384 counts/g.
    G2 = 0,
    /// ±4 g, 8192 counts/g (the range of the vibration example).
    G4 = 1,
    /// ±8 g, 4096 counts/g.
    G8 = 2,
}

impl Range {
    /// Counts per g.
    pub const fn counts_per_g(self) -> u32 {
        match self {
            Range::G2 => 16384,
            Range::G4 => 8192,
            Range::G8 => 4096,
        }
    }
}

/// Driver errors.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Error<E> {
    /// The bus reported an error.
    Bus(E),
    /// `WHO_AM_I` did not read [`WHO_AM_I_VALUE`]: wrong part or wrong address.
    WrongDevice {
        /// The value read.
        found: u8,
    },
    /// The FIFO overflowed while a window was being collected: samples were lost, so the
    /// window would not be contiguous in time.
    Overrun,
    /// No sample arrived within the polling limit.
    Timeout,
}

impl<E> From<E> for Error<E> {
    fn from(e: E) -> Self {
        Error::Bus(e)
    }
}

/// Decodes one 6-byte frame (`X_L X_H Y_L Y_H Z_L Z_H`).
pub fn decode_frame(b: &[u8; 6]) -> [i16; 3] {
    [
        i16::from_le_bytes([b[0], b[1]]),
        i16::from_le_bytes([b[2], b[3]]),
        i16::from_le_bytes([b[4], b[5]]),
    ]
}

/// The KLA-3 on an I2C bus.
#[derive(Debug)]
pub struct Kla3<I2C> {
    i2c: I2C,
    address: u8,
}

impl<I2C: I2c> Kla3<I2C> {
    /// A driver for the part at `address` (usually [`ADDRESS`]); talks to nothing yet.
    pub fn new(i2c: I2C, address: u8) -> Self {
        Kla3 { i2c, address }
    }

    /// Gives the bus back.
    pub fn release(self) -> I2C {
        self.i2c
    }

    fn read(&mut self, register: u8, buf: &mut [u8]) -> Result<(), Error<I2C::Error>> {
        self.i2c.write_read(self.address, &[register], buf)?;
        Ok(())
    }

    fn read_u8(&mut self, register: u8) -> Result<u8, Error<I2C::Error>> {
        let mut b = [0u8];
        self.read(register, &mut b)?;
        Ok(b[0])
    }

    /// Reads `WHO_AM_I`.
    pub fn who_am_i(&mut self) -> Result<u8, Error<I2C::Error>> {
        self.read_u8(reg::WHO_AM_I)
    }

    /// Checks the identity, then sets rate and range with the FIFO on.
    pub fn init(&mut self, rate: Rate, range: Range) -> Result<(), Error<I2C::Error>> {
        let found = self.who_am_i()?;
        if found != WHO_AM_I_VALUE {
            return Err(Error::WrongDevice { found });
        }
        let ctrl = rate as u8 | (range as u8) << 4 | CTRL_FIFO_EN;
        self.i2c.write(self.address, &[reg::CTRL, ctrl])?;
        Ok(())
    }

    /// Reads `STATUS`.
    pub fn status(&mut self) -> Result<u8, Error<I2C::Error>> {
        self.read_u8(reg::STATUS)
    }

    /// Reads the latest sample from `OUT_X_L`..`OUT_Z_H` in one transfer.
    pub fn read_xyz(&mut self) -> Result<[i16; 3], Error<I2C::Error>> {
        let mut b = [0u8; 6];
        self.read(reg::OUT_X_L, &mut b)?;
        Ok(decode_frame(&b))
    }

    /// Frames waiting in the FIFO (at most [`FIFO_DEPTH`]).
    pub fn fifo_count(&mut self) -> Result<usize, Error<I2C::Error>> {
        Ok(usize::from(self.read_u8(reg::FIFO_COUNT)?).min(FIFO_DEPTH))
    }

    /// Reads `frames.len()` frames (at most [`FIFO_DEPTH`]) from `FIFO_DATA` in one streaming
    /// transfer; the caller must know that many are waiting (see [`Kla3::fifo_count`]).
    pub fn read_fifo(&mut self, frames: &mut [[i16; 3]]) -> Result<(), Error<I2C::Error>> {
        let mut raw = [0u8; FIFO_DEPTH * 6];
        let n = frames.len().min(FIFO_DEPTH);
        let buf = raw.get_mut(..n * 6).unwrap_or(&mut []);
        self.read(reg::FIFO_DATA, buf)?;
        for (dst, b) in frames.iter_mut().zip(buf.chunks_exact(6)) {
            if let Ok(b) = <&[u8; 6]>::try_from(b) {
                *dst = decode_frame(b);
            }
        }
        Ok(())
    }
}

/// A [`WindowSource`] that drains the KLA-3's FIFO until 128 contiguous frames are collected.
///
/// Between empty FIFO polls it waits `poll_us` microseconds and gives up with
/// [`Error::Timeout`] after `max_polls` empty polls in a row. It reads `STATUS` once per window
/// first (to clear a stale overrun flag) and once at the end; an overrun in between fails the
/// window with [`Error::Overrun`].
#[derive(Debug)]
pub struct Kla3Source<I2C, D> {
    /// The sensor.
    pub sensor: Kla3<I2C>,
    delay: D,
    poll_us: u32,
    max_polls: u32,
}

impl<I2C: I2c, D: DelayNs> Kla3Source<I2C, D> {
    /// A source over an initialised sensor.
    pub fn new(sensor: Kla3<I2C>, delay: D, poll_us: u32, max_polls: u32) -> Self {
        Kla3Source {
            sensor,
            delay,
            poll_us,
            max_polls,
        }
    }
}

impl<I2C: I2c, D: DelayNs> WindowSource for Kla3Source<I2C, D> {
    type Error = Error<I2C::Error>;

    fn next_window(&mut self, window: &mut Window) -> Result<(), Self::Error> {
        let _stale = self.sensor.status()?;
        let mut filled = 0;
        let mut idle = 0;
        let mut frames = [[0i16; 3]; FIFO_DEPTH];
        while filled < WINDOW {
            let waiting = self.sensor.fifo_count()?.min(WINDOW - filled);
            if waiting == 0 {
                idle += 1;
                if idle > self.max_polls {
                    return Err(Error::Timeout);
                }
                self.delay.delay_us(self.poll_us);
                continue;
            }
            idle = 0;
            let chunk = frames.get_mut(..waiting).unwrap_or(&mut []);
            self.sensor.read_fifo(chunk)?;
            for (t, frame) in chunk.iter().enumerate() {
                for (axis, &v) in window.iter_mut().zip(frame).take(AXES) {
                    if let Some(slot) = axis.get_mut(filled + t) {
                        *slot = v;
                    }
                }
            }
            filled += waiting;
        }
        if self.sensor.status()? & STATUS_FIFO_OVR != 0 {
            return Err(Error::Overrun);
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use embedded_hal_mock::eh1::delay::NoopDelay;
    use embedded_hal_mock::eh1::i2c::{Mock, Transaction as T};

    fn frame_bytes(x: i16, y: i16, z: i16) -> Vec<u8> {
        [x, y, z].iter().flat_map(|v| v.to_le_bytes()).collect()
    }

    #[test]
    fn init_checks_identity_and_writes_ctrl() {
        let expect = [
            T::write_read(ADDRESS, vec![reg::WHO_AM_I], vec![WHO_AM_I_VALUE]),
            // rate 1600 Hz = 4, range ±4 g = 1 << 4, FIFO_EN = 0x80 → 0x94
            T::write(ADDRESS, vec![reg::CTRL, 0x94]),
        ];
        let mut i2c = Mock::new(&expect);
        let mut s = Kla3::new(i2c.clone(), ADDRESS);
        s.init(Rate::Hz1600, Range::G4).unwrap();
        i2c.done();
    }

    #[test]
    fn wrong_identity_is_reported_and_nothing_is_written() {
        let expect = [T::write_read(0x1C, vec![reg::WHO_AM_I], vec![0x33])];
        let mut i2c = Mock::new(&expect);
        let mut s = Kla3::new(i2c.clone(), 0x1C);
        assert_eq!(
            s.init(Rate::Hz100, Range::G2),
            Err(Error::WrongDevice { found: 0x33 })
        );
        i2c.done();
    }

    #[test]
    fn sample_is_little_endian_per_axis() {
        let expect = [T::write_read(
            ADDRESS,
            vec![reg::OUT_X_L],
            vec![0x01, 0x00, 0xFF, 0xFF, 0x00, 0x80],
        )];
        let mut i2c = Mock::new(&expect);
        let mut s = Kla3::new(i2c.clone(), ADDRESS);
        assert_eq!(s.read_xyz().unwrap(), [1, -1, i16::MIN]);
        i2c.done();
    }

    #[test]
    fn bus_errors_are_passed_through() {
        use embedded_hal::i2c::ErrorKind;
        let expect =
            [T::write_read(ADDRESS, vec![reg::STATUS], vec![0]).with_error(ErrorKind::Other)];
        let mut i2c = Mock::new(&expect);
        let mut s = Kla3::new(i2c.clone(), ADDRESS);
        assert_eq!(s.status(), Err(Error::Bus(ErrorKind::Other)));
        i2c.done();
    }

    /// The transactions of one window delivered in FIFO chunks of `chunk` frames, with one
    /// empty poll before the first chunk; frame t is (t, -t, 1000 + t).
    fn window_transactions(chunk: usize, end_status: u8) -> Vec<T> {
        let mut t = vec![
            T::write_read(ADDRESS, vec![reg::STATUS], vec![STATUS_FIFO_OVR]),
            T::write_read(ADDRESS, vec![reg::FIFO_COUNT], vec![0]),
        ];
        let mut sent = 0;
        while sent < WINDOW {
            let n = chunk.min(WINDOW - sent);
            // Near the end the part holds more than the window still needs (`chunk` frames);
            // the driver reads only the n it needs.
            t.push(T::write_read(
                ADDRESS,
                vec![reg::FIFO_COUNT],
                vec![chunk as u8],
            ));
            let data: Vec<u8> = (sent..sent + n)
                .flat_map(|i| frame_bytes(i as i16, -(i as i16), 1000 + i as i16))
                .collect();
            t.push(T::write_read(ADDRESS, vec![reg::FIFO_DATA], data));
            sent += n;
        }
        t.push(T::write_read(ADDRESS, vec![reg::STATUS], vec![end_status]));
        t
    }

    #[test]
    fn window_is_assembled_from_fifo_chunks() {
        let expect = window_transactions(30, STATUS_XYZ_READY);
        let mut i2c = Mock::new(&expect);
        let mut src = Kla3Source::new(Kla3::new(i2c.clone(), ADDRESS), NoopDelay::new(), 100, 3);
        let mut w = [[0i16; WINDOW]; AXES];
        src.next_window(&mut w).unwrap();
        let t = |i: usize| i as i16;
        assert!(w[0].iter().enumerate().all(|(i, &v)| v == t(i)));
        assert!(w[1].iter().enumerate().all(|(i, &v)| v == -t(i)));
        assert!(w[2].iter().enumerate().all(|(i, &v)| v == 1000 + t(i)));
        i2c.done();
    }

    #[test]
    fn overrun_during_a_window_fails_it() {
        let expect = window_transactions(32, STATUS_FIFO_OVR);
        let mut i2c = Mock::new(&expect);
        let mut src = Kla3Source::new(Kla3::new(i2c.clone(), ADDRESS), NoopDelay::new(), 100, 3);
        let mut w = [[0i16; WINDOW]; AXES];
        assert_eq!(src.next_window(&mut w), Err(Error::Overrun));
        i2c.done();
    }

    #[test]
    fn silent_sensor_times_out() {
        let mut expect = vec![T::write_read(ADDRESS, vec![reg::STATUS], vec![0])];
        for _ in 0..3 {
            expect.push(T::write_read(ADDRESS, vec![reg::FIFO_COUNT], vec![0]));
        }
        let mut i2c = Mock::new(&expect);
        let mut src = Kla3Source::new(Kla3::new(i2c.clone(), ADDRESS), NoopDelay::new(), 100, 2);
        let mut w = [[0i16; WINDOW]; AXES];
        assert_eq!(src.next_window(&mut w), Err(Error::Timeout));
        i2c.done();
    }

    #[test]
    fn rate_and_range_units() {
        assert_eq!(Rate::Hz1600.hz(), 1600);
        assert_eq!(Rate::Off.hz(), 0);
        assert_eq!(Range::G4.counts_per_g(), 8192);
    }
}
