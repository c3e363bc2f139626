//! Memory sizes as the user writes them: `4096` (bytes), `32K` or `32KiB`, `1M` or `1MiB`, and
//! fractions where the result is a whole number of bytes (`0.5K` is 512). The firmware build's
//! budget variables take the same forms, so one size reads the same everywhere.

use crate::echo;

/// The smallest plain byte count a part's flash or RAM can be: a smaller bare number is almost
/// certainly meant in KiB (the unit `budget` took before), so it is refused with a hint rather
/// than read as bytes.
pub const SMALLEST_PART_BYTES: u64 = 1024;

/// Parses a size in bytes, at most `max` bytes.
pub fn parse(s: &str, max: u64) -> Result<u64, String> {
    let t = s.trim();
    let lower = t.to_ascii_lowercase();
    let (number, unit) = [
        ("kib", 1u64 << 10),
        ("k", 1 << 10),
        ("mib", 1 << 20),
        ("m", 1 << 20),
    ]
    .iter()
    .find_map(|&(suffix, unit)| lower.strip_suffix(suffix).map(|n| (n.trim(), unit)))
    .unwrap_or((lower.as_str(), 1));
    let bad = || {
        format!(
            "expected a size such as 4096 (bytes), 32K or 32KiB, 1M, not {}",
            echo::quoted(s)
        )
    };
    if number.is_empty() || !number.bytes().all(|b| b.is_ascii_digit() || b == b'.') {
        return Err(bad());
    }
    let bytes = if let Ok(n) = number.parse::<u64>() {
        n.checked_mul(unit)
    } else {
        // A fraction: exact in f64 for every size up to `max` (2^32) times the unit.
        let x: f64 = number.parse().map_err(|_| bad())?;
        let b = x * unit as f64;
        if b.fract() != 0.0 {
            return Err(format!(
                "{} is not a whole number of bytes",
                echo::quoted(s)
            ));
        }
        (b < u64::MAX as f64).then_some(b as u64)
    };
    let bytes = bytes.filter(|&b| b <= max).ok_or_else(|| {
        format!(
            "{} is larger than {} bytes, the most a Cortex-M addresses",
            echo::quoted(s),
            max
        )
    })?;
    if unit == 1 && bytes < SMALLEST_PART_BYTES {
        return Err(format!(
            "{bytes} bytes is smaller than any part; sizes are in bytes, write {bytes}K for KiB"
        ));
    }
    Ok(bytes)
}

#[cfg(test)]
mod tests {
    use super::*;

    const MAX: u64 = 1 << 32;

    #[test]
    fn bytes_and_suffixes() {
        assert_eq!(parse("4096", MAX), Ok(4096));
        assert_eq!(parse("32K", MAX), Ok(32 * 1024));
        assert_eq!(parse("32k", MAX), Ok(32 * 1024));
        assert_eq!(parse("32KiB", MAX), Ok(32 * 1024));
        assert_eq!(parse(" 2M ", MAX), Ok(2 << 20));
        assert_eq!(parse("1MiB", MAX), Ok(1 << 20));
        assert_eq!(parse("0.5K", MAX), Ok(512));
        assert_eq!(parse("1.5K", MAX), Ok(1536));
        assert_eq!(parse("4194304K", MAX), Ok(MAX));
    }

    #[test]
    fn refusals_say_why() {
        assert!(parse("32", MAX).unwrap_err().contains("write 32K"));
        assert!(parse("0.3K", MAX)
            .unwrap_err()
            .contains("whole number of bytes"));
        assert!(parse("4194305K", MAX).unwrap_err().contains("larger than"));
        assert!(parse("99999999999999999999", MAX)
            .unwrap_err()
            .contains("larger than"));
        for bad in ["", "K", "-4K", "4G", "1e3", "4 K B", "0x1000"] {
            assert!(
                parse(bad, MAX).unwrap_err().contains("expected a size"),
                "{bad}"
            );
        }
    }
}
