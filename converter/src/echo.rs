//! Echoing the user's input back in an error, at a readable length. A CSV field of a million
//! digits, or an f64 of 1e300 printed in full (301 digits), would otherwise make a one-line error
//! a megabyte long.

/// Longest field echoed whole, in characters.
pub const MAX_ECHO_CHARS: usize = 40;

/// `s` as written when it is short; else its first characters, an ellipsis and its length.
pub fn text(s: &str) -> String {
    let n = s.chars().count();
    if n <= MAX_ECHO_CHARS {
        s.to_string()
    } else {
        let head: String = s.chars().take(MAX_ECHO_CHARS - 8).collect();
        format!("{head}… ({n} characters)")
    }
}

/// [`text`] in double quotes, with the quoting and escapes of Rust's `{:?}`.
pub fn quoted(s: &str) -> String {
    let n = s.chars().count();
    if n <= MAX_ECHO_CHARS {
        format!("{s:?}")
    } else {
        let head: String = s.chars().take(MAX_ECHO_CHARS - 8).collect();
        format!("{head:?}… ({n} characters)")
    }
}

/// A number as a person reads it: plain in the usual range, in scientific notation when it is
/// very large or very small (`1e300`, not 301 digits; `1e-30`, not 31 zeros).
pub fn number(x: f64) -> String {
    let a = x.abs();
    if x.is_finite() && a != 0.0 && !(1e-6..1e16).contains(&a) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn long_fields_are_cut_and_say_how_long_they_were() {
        let field = "9".repeat(1_000_000);
        let t = text(&field);
        assert!(t.len() < 80, "{t}");
        assert!(t.ends_with("… (1000000 characters)"), "{t}");
        assert_eq!(text("four"), "four");
        assert_eq!(quoted("four"), "\"four\"");
        assert!(quoted(&"x".repeat(100)).starts_with("\"xxxx"));
        // Multi-byte characters are cut on a character boundary.
        assert!(text(&"é".repeat(100)).contains("(100 characters)"));
    }

    #[test]
    fn extreme_numbers_are_scientific() {
        assert_eq!(number(1e300), "1e300");
        assert_eq!(number(-1e39), "-1e39");
        assert_eq!(number(1e-30), "1e-30");
        assert_eq!(number(2.5), "2.5");
        assert_eq!(number(0.0), "0");
        assert_eq!(number(f64::NAN), "NaN");
        assert_eq!(number(f64::INFINITY), "inf");
    }
}
