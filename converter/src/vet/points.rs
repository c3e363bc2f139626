//! Percentage points as the reports print them: two decimals, and as many more as it takes for
//! a small non-zero value to show (a 100,000-row interval of ±0.003 pp printed as "-0.00 to
//! 0.00" reads as no interval at all), never a negative zero.

/// `x` percentage points, without the unit.
pub fn pp(x: f64) -> String {
    if !x.is_finite() {
        return format!("{x}");
    }
    let a = x.abs();
    // Two significant digits below 0.005, at most 6 decimals (1e-6 pp is below any row count
    // a report can have).
    let decimals = if a == 0.0 || a >= 0.005 {
        2
    } else {
        ((-a.log10()).ceil() as usize + 1).min(6)
    };
    let s = format!("{x:.decimals$}");
    if s.trim_start_matches('-')
        .bytes()
        .all(|b| b == b'0' || b == b'.')
    {
        s.trim_start_matches('-').to_string()
    } else {
        s
    }
}

#[cfg(test)]
mod tests {
    use super::pp;

    #[test]
    fn small_values_keep_two_significant_digits() {
        assert_eq!(pp(1.234), "1.23");
        assert_eq!(pp(-0.5), "-0.50");
        assert_eq!(pp(0.0031), "0.0031");
        assert_eq!(pp(-0.0031), "-0.0031");
        assert_eq!(pp(0.00049), "0.00049");
        assert_eq!(pp(0.005), "0.01");
    }

    #[test]
    fn zero_is_never_negative() {
        assert_eq!(pp(0.0), "0.00");
        assert_eq!(pp(-0.0), "0.00");
        assert_eq!(pp(-1e-12), "0.000000");
        assert_eq!(pp(-0.001), "-0.0010");
    }
}
