//! A seeded xorshift32 generator (Marsaglia, 2003, "Xorshift RNGs", J. Stat. Softw. 8(14)):
//! the same sequence on every run and target.

/// Generator state.
pub struct Rng(u32);

impl Rng {
    /// A generator from a non-zero seed.
    pub fn new(seed: u32) -> Self {
        Rng(seed.max(1))
    }

    /// The next 32 bits.
    pub fn next_u32(&mut self) -> u32 {
        let mut x = self.0;
        x ^= x << 13;
        x ^= x >> 17;
        x ^= x << 5;
        self.0 = x;
        x
    }

    /// A value in `lo..=hi`.
    pub fn range(&mut self, lo: i32, hi: i32) -> i32 {
        let span = (hi - lo + 1) as u32;
        lo + (self.next_u32() % span) as i32
    }

    /// A random int8 byte; one case in 8 is all -128, one all 127, chosen per call by `mode`.
    pub fn i8_byte(&mut self, mode: u32) -> u8 {
        match mode {
            0 => 0x80,
            1 => 0x7F,
            _ => self.next_u32() as u8,
        }
    }

    /// An f32 in about [-2, 2) with 16 random mantissa bits.
    pub fn f32(&mut self) -> f32 {
        (self.next_u32() >> 16) as f32 / 16384.0 - 2.0
    }
}
