//! Statistics for comparing two classifiers on the same rows: the difference of two paired
//! proportions (accuracy of the float model minus accuracy of the int8 model) with a confidence
//! interval, and McNemar's exact test on the discordant rows.
//!
//! Sources:
//! - Wilson score interval for one proportion: E. B. Wilson, "Probable inference, the law of
//!   succession, and statistical inference", JASA 22 (1927) 209–212.
//! - Interval for a difference of paired proportions: R. G. Newcombe, "Improved confidence
//!   intervals for the difference between binomial proportions based on paired data",
//!   Statistics in Medicine 17 (1998) 2635–2650, method 10 (hybrid score interval without
//!   continuity correction): Wilson limits of each margin, combined with the phi correlation of
//!   the 2×2 table. The formula below is as we recall it from that paper (from memory); the unit
//!   tests check it against a hand-worked example, and `tests/python/vet_ref.py` recomputes it
//!   from scipy's Wilson limits.
//! - McNemar's exact test: Q. McNemar, Psychometrika 12 (1947) 153–157; exact form: the
//!   discordant count `b` is Binomial(b + c, 1/2) under no difference; the two-sided p-value is
//!   `min(1, 2·P(X ≤ min(b, c)))` (the same as `scipy.stats.binomtest(b, b + c, 0.5)`).
use serde::Serialize;

/// The standard normal quantile Φ⁻¹(0.975), for two-sided 95% intervals
/// (`scipy.stats.norm.ppf(0.975)` = 1.959963984540054).
pub const Z_95: f64 = 1.959_963_984_540_054;

/// Name of the interval method, as printed in reports.
pub const INTERVAL_METHOD: &str =
    "Newcombe (1998) hybrid score interval for paired proportions, method 10";

/// Name of the test, as printed in reports.
pub const TEST_METHOD: &str = "McNemar exact test (two-sided binomial on discordant rows)";

/// The 2×2 table of two classifiers judged on the same labelled rows.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize)]
pub struct PairedCounts {
    /// Rows both got right (Newcombe's `a`).
    pub both_right: u64,
    /// Rows only the first (float) model got right (`b`).
    pub first_only: u64,
    /// Rows only the second (int8) model got right (`c`).
    pub second_only: u64,
    /// Rows both got wrong (`d`).
    pub both_wrong: u64,
}

impl PairedCounts {
    /// Tallies one row.
    pub fn add(&mut self, first_right: bool, second_right: bool) {
        match (first_right, second_right) {
            (true, true) => self.both_right += 1,
            (true, false) => self.first_only += 1,
            (false, true) => self.second_only += 1,
            (false, false) => self.both_wrong += 1,
        }
    }

    /// Rows tallied.
    pub fn total(&self) -> u64 {
        self.both_right + self.first_only + self.second_only + self.both_wrong
    }

    /// `p1 - p2 = (b - c) / n`; 0 for no rows.
    pub fn difference(&self) -> f64 {
        let n = self.total();
        if n == 0 {
            return 0.0;
        }
        (self.first_only as f64 - self.second_only as f64) / n as f64
    }
}

/// Wilson score interval for `x` successes in `n` trials at normal quantile `z`.
/// `n = 0` gives the uninformative `(0, 1)`.
pub fn wilson(x: u64, n: u64, z: f64) -> (f64, f64) {
    if n == 0 {
        return (0.0, 1.0);
    }
    let nf = n as f64;
    let p = x as f64 / nf;
    let z2 = z * z;
    let denom = 1.0 + z2 / nf;
    let centre = (p + z2 / (2.0 * nf)) / denom;
    let half = z * (p * (1.0 - p) / nf + z2 / (4.0 * nf * nf)).sqrt() / denom;
    // The exact limits at the ends are 0 and 1; the formula only reaches them up to rounding.
    let lo = if x == 0 {
        0.0
    } else {
        (centre - half).max(0.0)
    };
    let hi = if x == n {
        1.0
    } else {
        (centre + half).min(1.0)
    };
    (lo, hi)
}

/// The phi coefficient of the 2×2 table, `(ad - bc) / sqrt((a+b)(c+d)(a+c)(b+d))`; 0 when a
/// margin is empty (Newcombe 1998 sets it to 0 then).
pub fn phi(t: &PairedCounts) -> f64 {
    let (a, b, c, d) = (
        t.both_right as f64,
        t.first_only as f64,
        t.second_only as f64,
        t.both_wrong as f64,
    );
    let denom = (a + b) * (c + d) * (a + c) * (b + d);
    if denom <= 0.0 {
        return 0.0;
    }
    (a * d - b * c) / denom.sqrt()
}

/// Newcombe's hybrid score interval (method 10) for `p1 - p2`, where `p1 = (a + b) / n` and
/// `p2 = (a + c) / n`:
///
/// `L = θ - sqrt((p1 - l1)² - 2φ(p1 - l1)(u2 - p2) + (u2 - p2)²)`,
/// `U = θ + sqrt((u1 - p1)² - 2φ(u1 - p1)(p2 - l2) + (p2 - l2)²)`,
///
/// with `θ = p1 - p2`, `(l1, u1)` and `(l2, u2)` the Wilson limits of `p1` and `p2`.
pub fn newcombe_paired(t: &PairedCounts, z: f64) -> (f64, f64) {
    let n = t.total();
    if n == 0 {
        return (-1.0, 1.0);
    }
    let nf = n as f64;
    let x1 = t.both_right + t.first_only;
    let x2 = t.both_right + t.second_only;
    let (p1, p2) = (x1 as f64 / nf, x2 as f64 / nf);
    let (l1, u1) = wilson(x1, n, z);
    let (l2, u2) = wilson(x2, n, z);
    let f = phi(t);
    let theta = p1 - p2;
    let root = |x: f64, y: f64| (x * x - 2.0 * f * x * y + y * y).max(0.0).sqrt();
    let delta = root(p1 - l1, u2 - p2);
    let epsilon = root(u1 - p1, p2 - l2);
    ((theta - delta).max(-1.0), (theta + epsilon).min(1.0))
}

/// `P(X ≤ m)` for `X ~ Binomial(n, 1/2)` by the pmf recurrence `p(k+1) = p(k)·(n−k)/(k+1)` from
/// `p(0) = 2^-n`: no underflow for `n ≤ 1000`, and exact for small `n`, where every term is a
/// short binary fraction.
fn half_cdf_recurrence(n: u64, m: u64) -> f64 {
    let mut p = 0.5f64.powi(n as i32);
    let mut sum = p;
    for k in 0..m {
        p *= (n - k) as f64 / (k + 1) as f64;
        sum += p;
    }
    sum
}

/// `P(X ≤ m)` for `X ~ Binomial(n, 1/2)` in log space (`ln C(n, k) − n ln 2` via ln Γ), for
/// large `n`.
fn half_cdf_log(n: u64, m: u64) -> f64 {
    let nf = n as f64;
    let ln_n_fact = libm::lgamma(nf + 1.0);
    let ln_half_n = nf * std::f64::consts::LN_2;
    let log_terms: Vec<f64> = (0..=m)
        .map(|k| {
            let kf = k as f64;
            ln_n_fact - libm::lgamma(kf + 1.0) - libm::lgamma(nf - kf + 1.0) - ln_half_n
        })
        .collect();
    let top = log_terms.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let sum: f64 = log_terms.iter().map(|t| (t - top).exp()).sum();
    top.exp() * sum
}

/// McNemar's exact two-sided p-value for discordant counts `b` and `c`.
pub fn mcnemar_exact(b: u64, c: u64) -> f64 {
    let n = b + c;
    if n == 0 || b == c {
        return 1.0;
    }
    let m = b.min(c);
    let tail = if n <= 1000 {
        half_cdf_recurrence(n, m)
    } else {
        half_cdf_log(n, m)
    };
    (2.0 * tail).min(1.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn t(a: u64, b: u64, c: u64, d: u64) -> PairedCounts {
        PairedCounts {
            both_right: a,
            first_only: b,
            second_only: c,
            both_wrong: d,
        }
    }

    #[test]
    fn wilson_hand_worked() {
        // x = 8, n = 21, z = 1.96 (rounded, for hand arithmetic): p = 0.380952,
        // z² = 3.8416, denom = 1 + 3.8416/21 = 1.182933,
        // centre = (0.380952 + 3.8416/42) / 1.182933 = 0.472419 / 1.182933 = 0.399362,
        // half = 1.96·sqrt(0.380952·0.619048/21 + 3.8416/1764) / 1.182933
        //      = 1.96·sqrt(0.0112299 + 0.0021778) / 1.182933 = 1.96·0.115792 / 1.182933 = 0.191855,
        // so (0.399362 - 0.191855, 0.399362 + 0.191855) = (0.207507, 0.591217).
        let (lo, hi) = wilson(8, 21, 1.96);
        assert!((lo - 0.207507).abs() < 2e-6, "{lo}");
        assert!((hi - 0.591217).abs() < 2e-6, "{hi}");
        assert_eq!(wilson(0, 10, Z_95).0, 0.0);
        assert_eq!(wilson(10, 10, Z_95).1, 1.0);
        assert_eq!(wilson(0, 0, Z_95), (0.0, 1.0));
    }

    #[test]
    fn newcombe_hand_worked() {
        // a, b, c, d = 1, 1, 7, 12 (n = 21), z = 1.96. p1 = 2/21 = 0.095238, p2 = 8/21.
        // Wilson(2, 21): centre = (0.095238 + 0.091467)/1.182933 = 0.157832,
        //   half = 1.96·sqrt(0.095238·0.904762/21 + 0.002178)/1.182933
        //        = 1.96·sqrt(0.004103 + 0.002178)/1.182933 = 1.96·0.079253/1.182933 = 0.131314,
        //   so l1 = 0.026518, u1 = 0.289146. Wilson(8, 21) from the test above: l2 = 0.207507,
        //   u2 = 0.591217.
        // phi = (1·12 - 1·7)/sqrt(2·19·8·13) = 5/sqrt(3952) = 0.079536.
        // θ = -6/21 = -0.285714.
        // δ = sqrt(0.068720² - 2·0.079536·0.068720·0.210265 + 0.210265²)
        //   = sqrt(0.004722 - 0.002298 + 0.044211) = sqrt(0.046635) = 0.215952 → L = -0.501666
        // ε = sqrt(0.193908² - 2·0.079536·0.193908·0.173445 + 0.173445²)
        //   = sqrt(0.037600 - 0.005350 + 0.030083) = sqrt(0.062333) = 0.249666 → U = -0.036048
        let (lo, hi) = newcombe_paired(&t(1, 1, 7, 12), 1.96);
        assert!((lo - -0.501666).abs() < 2e-6, "{lo}");
        assert!((hi - -0.036048).abs() < 2e-6, "{hi}");
    }

    #[test]
    fn newcombe_all_agree_is_symmetric_and_contains_zero() {
        // Every row judged the same by both: θ = 0, b = c = 0.
        let (lo, hi) = newcombe_paired(&t(90, 0, 0, 10), Z_95);
        assert!(lo < 0.0 && hi > 0.0);
        assert!((lo + hi).abs() < 1e-12, "symmetric: {lo} {hi}");
        // Both perfect: both margins' Wilson intervals are (l, 1), phi = 0 (empty margin).
        let (lo, hi) = newcombe_paired(&t(50, 0, 0, 0), Z_95);
        let (l, _) = wilson(50, 50, Z_95);
        assert!((lo + (1.0 - l)).abs() < 1e-12 && (hi - (1.0 - l)).abs() < 1e-12);
    }

    #[test]
    fn mcnemar_hand_worked() {
        // b = 0, c = 5: P(X ≤ 0) = 1/32, two-sided 2/32 = 0.0625.
        assert!((mcnemar_exact(0, 5) - 0.0625).abs() < 1e-14);
        // b = 1, c = 5: P(X ≤ 1) = (1 + 6)/64, two-sided 14/64 = 0.21875.
        assert!((mcnemar_exact(1, 5) - 0.21875).abs() < 1e-14);
        assert!((mcnemar_exact(5, 1) - 0.21875).abs() < 1e-14);
        assert_eq!(mcnemar_exact(0, 0), 1.0);
        assert_eq!(mcnemar_exact(3, 3), 1.0);
        // b = 2, c = 3: P(X ≤ 2) = (1 + 5 + 10)/32 = 0.5, doubled and capped at 1.
        assert_eq!(mcnemar_exact(2, 3), 1.0);
        // Large n does not underflow: b = 0, c = 1020 gives 2·2^-1020 = 2^-1019 (log path).
        let p = mcnemar_exact(0, 1020);
        assert!(p > 0.0 && (p.log2() - -1019.0).abs() < 1e-6, "{p}");
        // The two ways of summing agree where they meet.
        for m in [0, 10, 300, 480, 499] {
            let (r, l) = (half_cdf_recurrence(1000, m), half_cdf_log(1000, m));
            assert!(((r - l) / r).abs() < 1e-10, "m = {m}: {r} vs {l}");
        }
    }

    #[test]
    fn counts_and_difference() {
        let mut c = PairedCounts::default();
        c.add(true, true);
        c.add(true, false);
        c.add(true, false);
        c.add(false, true);
        c.add(false, false);
        assert_eq!(c, t(1, 2, 1, 1));
        assert_eq!(c.total(), 5);
        assert!((c.difference() - 0.2).abs() < 1e-15);
        assert!((phi(&t(1, 1, 7, 12)) - 5.0 / 3952f64.sqrt()).abs() < 1e-15);
        assert_eq!(phi(&t(5, 0, 0, 0)), 0.0);
    }
}
