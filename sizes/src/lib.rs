//! Memory sizes as Kinglet's users write them: `4096` (bytes), `32K` or `32KiB`, `1M` or `1MiB`
//! (suffixes in any case), and fractions where the result is a whole number of bytes (`0.5K` is
//! 512). `kinglet budget` and the firmware example's build-time budget (`KINGLET_FLASH_BUDGET`,
//! `KINGLET_RAM_BUDGET`) both read sizes with [`parse`], so one size means the same bytes in
//! both places. `K` is 1024 bytes (KiB), `M` is 1024² (MiB): the units of flash and RAM sizes in
//! microcontroller data sheets.
#![no_std]

use core::fmt;

/// Why a size was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SizeError {
    /// Not a number with an optional `K`, `KiB`, `M` or `MiB` suffix.
    NotASize,
    /// A fraction that is not a whole number of bytes (`0.3K`).
    NotWholeBytes,
    /// More than the largest size allowed.
    TooLarge {
        /// The largest size allowed, bytes.
        max: u64,
    },
}

impl fmt::Display for SizeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SizeError::NotASize => {
                f.write_str("expected a size such as 4096 (bytes), 32K or 32KiB, 1M")
            }
            SizeError::NotWholeBytes => f.write_str("not a whole number of bytes"),
            SizeError::TooLarge { max } => write!(f, "larger than {max} bytes"),
        }
    }
}

/// A parsed size: its bytes, and whether it was written without a unit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Size {
    /// The size in bytes.
    pub bytes: u64,
    /// Written as a bare number (bytes), with no `K`/`M` suffix.
    pub plain: bool,
}

/// Parses a size of at most `max` bytes.
///
/// # Errors
/// [`SizeError`] when `s` is not a size, not a whole number of bytes, or larger than `max`.
///
/// ```
/// use kinglet_sizes::{parse, SizeError};
/// assert_eq!(parse("32K", u64::MAX).map(|s| s.bytes), Ok(32 * 1024));
/// assert_eq!(parse("0.5K", u64::MAX).map(|s| s.bytes), Ok(512));
/// assert_eq!(parse("5000", 4096), Err(SizeError::TooLarge { max: 4096 }));
/// ```
pub fn parse(s: &str, max: u64) -> Result<Size, SizeError> {
    let t = s.trim();
    let (number, unit) = [
        ("kib", 1u64 << 10),
        ("k", 1 << 10),
        ("mib", 1 << 20),
        ("m", 1 << 20),
    ]
    .iter()
    .find_map(|&(suffix, unit)| strip_suffix_ignore_case(t, suffix).map(|n| (n.trim(), unit)))
    .unwrap_or((t, 1));
    if number.is_empty() || !number.bytes().all(|b| b.is_ascii_digit() || b == b'.') {
        return Err(SizeError::NotASize);
    }
    let bytes = if let Ok(n) = number.parse::<u64>() {
        n.checked_mul(unit)
    } else {
        // A fraction. f64 holds every whole number below 2^53 exactly, so a fraction whose
        // product is a whole number below that is recognised as one.
        let x: f64 = number.parse().map_err(|_| SizeError::NotASize)?;
        let b = x * unit as f64;
        if b - libm_trunc(b) != 0.0 {
            return Err(SizeError::NotWholeBytes);
        }
        (b < (1u64 << 53) as f64).then_some(b as u64)
    };
    let bytes = bytes
        .filter(|&b| b <= max)
        .ok_or(SizeError::TooLarge { max })?;
    Ok(Size {
        bytes,
        plain: unit == 1,
    })
}

/// `x` without its fraction, for finite non-negative `x` (the only values [`parse`] makes).
fn libm_trunc(x: f64) -> f64 {
    if x >= (1u64 << 53) as f64 {
        x
    } else {
        (x as u64) as f64
    }
}

fn strip_suffix_ignore_case<'a>(s: &'a str, suffix: &str) -> Option<&'a str> {
    let cut = s.len().checked_sub(suffix.len())?;
    let (head, tail) = (s.get(..cut)?, s.get(cut..)?);
    tail.eq_ignore_ascii_case(suffix).then_some(head)
}

#[cfg(test)]
mod tests {
    use super::*;

    const MAX: u64 = 1 << 32;

    fn bytes(s: &str) -> Result<u64, SizeError> {
        parse(s, MAX).map(|s| s.bytes)
    }

    #[test]
    fn bytes_and_suffixes() {
        assert_eq!(bytes("4096"), Ok(4096));
        assert_eq!(bytes("32"), Ok(32));
        assert_eq!(bytes("32K"), Ok(32 * 1024));
        assert_eq!(bytes("32k"), Ok(32 * 1024));
        assert_eq!(bytes("32KiB"), Ok(32 * 1024));
        assert_eq!(bytes("32kib"), Ok(32 * 1024));
        assert_eq!(bytes(" 2M "), Ok(2 << 20));
        assert_eq!(bytes("1MiB"), Ok(1 << 20));
        assert_eq!(bytes("0.5K"), Ok(512));
        assert_eq!(bytes("1.5K"), Ok(1536));
        assert_eq!(bytes("0.5M"), Ok(512 * 1024));
        assert_eq!(bytes("4194304K"), Ok(MAX));
        assert_eq!(parse("32", MAX).map(|s| s.plain), Ok(true));
        assert_eq!(parse("32K", MAX).map(|s| s.plain), Ok(false));
    }

    #[test]
    fn refusals() {
        assert_eq!(bytes("0.3K"), Err(SizeError::NotWholeBytes));
        assert_eq!(bytes("4194305K"), Err(SizeError::TooLarge { max: MAX }));
        assert_eq!(
            bytes("99999999999999999999"),
            Err(SizeError::TooLarge { max: MAX })
        );
        for bad in ["", "K", "-4K", "4G", "1e3", "4 K B", "0x1000", "1..5K", "."] {
            assert_eq!(bytes(bad), Err(SizeError::NotASize), "{bad}");
        }
    }
}
