//! Memory sizes as the user writes them: `4096` (bytes), `32K` or `32KiB`, `1M` or `1MiB`, and
//! fractions where the result is a whole number of bytes (`0.5K` is 512). The grammar is the
//! `kinglet-sizes` crate's, which the firmware build's budget variables read too, so one size
//! reads the same everywhere; a part's size adds one rule (see [`SMALLEST_PART_BYTES`]).

use crate::echo;
use kinglet_sizes::SizeError;

/// The smallest plain byte count a part's flash or RAM can be: a smaller bare number is almost
/// certainly meant in KiB (the unit `budget` took before), so it is refused with a hint rather
/// than read as bytes.
pub const SMALLEST_PART_BYTES: u64 = 1024;

/// Parses a part's size in bytes, at most `max` bytes.
pub fn parse(s: &str, max: u64) -> Result<u64, String> {
    let size = kinglet_sizes::parse(s, max).map_err(|e| match e {
        SizeError::NotASize => format!("{e}, not {}", echo::quoted(s)),
        SizeError::NotWholeBytes => format!("{} is {e}", echo::quoted(s)),
        SizeError::TooLarge { max } => format!(
            "{} is larger than {max} bytes, the most a Cortex-M addresses",
            echo::quoted(s)
        ),
    })?;
    if size.plain && size.bytes < SMALLEST_PART_BYTES {
        let bytes = size.bytes;
        return Err(format!(
            "{bytes} bytes is smaller than any part; sizes are in bytes, write {bytes}K for KiB"
        ));
    }
    Ok(size.bytes)
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
