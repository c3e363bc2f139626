//! The last step: scores from the last layer's outputs — softmax, sigmoid, one-vs-rest — and
//! argmax.

/// Softmax in place, max-subtracted for range (`exp` from libm). An empty slice is left as is.
pub fn softmax(scores: &mut [f32]) {
    // `>` rather than `f32::max`: the same result (NaN never wins either way) without a call to
    // `fmaxf` per score on targets without `VMAXNM`.
    let mut max = f32::NEG_INFINITY;
    for &s in scores.iter() {
        if s > max {
            max = s;
        }
    }
    let mut sum = 0.0f32;
    for s in scores.iter_mut() {
        *s = libm::expf(*s - max);
        sum += *s;
    }
    if sum > 0.0 {
        let inv = 1.0 / sum;
        for s in scores.iter_mut() {
            *s *= inv;
        }
    }
}

/// The logistic function `1 / (1 + e^-x)`.
pub fn sigmoid(x: f32) -> f32 {
    1.0 / (1.0 + libm::expf(-x))
}

/// One-vs-rest probabilities in place: `σ(s_k) / Σ_j σ(s_j)`, the logistic function of each
/// score divided by their sum (`FORMAT.md` §3.2; scikit-learn's one-vs-rest `predict_proba`).
///
/// Returns `false`, leaving the scores as they are, when every score is below −80: there
/// `σ(s) = e^s / (1 + e^s)` equals `e^s` to f32 precision and underflows further down, so the
/// caller applies [`softmax`], the same ratio, rather than computing 0/0. Otherwise the sum is
/// at least `σ(−80) ≈ 1.8e-35`, a normal f32 whose reciprocal is finite. An empty slice: `false`.
#[must_use]
pub fn one_vs_rest(scores: &mut [f32]) -> bool {
    if !scores.iter().any(|&s| s >= -80.0) {
        return false;
    }
    let mut sum = 0.0f32;
    for s in scores.iter_mut() {
        *s = sigmoid(*s);
        sum += *s;
    }
    let inv = 1.0 / sum;
    for s in scores.iter_mut() {
        *s *= inv;
    }
    true
}

/// Index and value of the largest score. Ties resolve to the lowest index; NaN never wins.
/// Returns `None` for an empty slice.
pub fn argmax(scores: &[f32]) -> Option<(usize, f32)> {
    let mut best: Option<(usize, f32)> = None;
    for (i, &s) in scores.iter().enumerate() {
        let better = match best {
            None => !s.is_nan(),
            Some((_, b)) => s > b,
        };
        if better {
            best = Some((i, s));
        }
    }
    best
}

/// Index of the largest of the int8 values `q` (bytes holding `i8`); ties resolve to the lowest
/// index; 0 for an empty slice.
pub fn argmax_i8(q: &[u8]) -> usize {
    let mut best = (0, i8::MIN);
    for (i, &v) in q.iter().enumerate() {
        if v as i8 > best.1 || i == 0 {
            best = (i, v as i8);
        }
    }
    best.0
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn softmax_of_equal_logits_is_uniform() {
        let mut s = [3.0f32; 4];
        softmax(&mut s);
        assert_eq!(s, [0.25; 4]);
    }

    #[test]
    fn softmax_sums_to_one_and_survives_large_logits() {
        let mut s = [1000.0f32, 0.0, -1000.0];
        softmax(&mut s);
        assert_eq!(s[0], 1.0);
        assert_eq!(s[2], 0.0);
        let mut t = [0.1f32, 0.2, 0.3, 5.0, -2.0];
        softmax(&mut t);
        let sum: f32 = t.iter().sum();
        assert!((sum - 1.0).abs() < 1e-6);
        // Hand-worked: softmax([0, ln 3]) = [1/4, 3/4].
        let mut u = [0.0f32, 3.0f32.ln()];
        softmax(&mut u);
        assert!((u[0] - 0.25).abs() < 1e-7 && (u[1] - 0.75).abs() < 1e-7);
    }

    #[test]
    fn argmax_ties_resolve_to_lowest_index() {
        assert_eq!(argmax(&[0.1, 0.4, 0.4, 0.1]), Some((1, 0.4)));
        assert_eq!(argmax(&[f32::NAN, 0.2, 0.1]), Some((1, 0.2)));
        assert_eq!(argmax(&[]), None);
        assert_eq!(argmax(&[f32::NAN]), None);
    }

    #[test]
    fn argmax_i8_reads_signed_bytes_and_ties_to_the_lowest() {
        let q = |v: &[i8]| v.iter().map(|&x| x as u8).collect::<Vec<u8>>();
        assert_eq!(argmax_i8(&q(&[-5, 3, -128, 3, 127, 127])), 4);
        assert_eq!(argmax_i8(&q(&[-128, -128])), 0);
        assert_eq!(argmax_i8(&q(&[-1, 0])), 1);
        assert_eq!(argmax_i8(&[]), 0);
    }

    #[test]
    fn one_vs_rest_hand_worked() {
        // σ(0) = 1/2 and σ(ln 3) = 3/4: [1/2, 3/4] / (5/4) = [0.4, 0.6].
        let mut s = [0.0f32, 3.0f32.ln()];
        assert!(one_vs_rest(&mut s));
        assert!(
            (s[0] - 0.4).abs() < 1e-7 && (s[1] - 0.6).abs() < 1e-7,
            "{s:?}"
        );
        // Three scores: σ(0) = 0.5, σ(ln 4) = 0.8, σ(−ln 4) = 0.2; sum 1.5.
        let mut t = [0.0f32, 4.0f32.ln(), -(4.0f32.ln())];
        assert!(one_vs_rest(&mut t));
        let want = [0.5 / 1.5, 0.8 / 1.5, 0.2 / 1.5];
        for (g, w) in t.iter().zip(want) {
            assert!((g - w).abs() < 1e-6, "{t:?}");
        }
        // Far below: the softmax form, not 0/0 (−200 + ln 3 is only exact to f32 steps of
        // 1.5e-5 there).
        let mut u = [-200.0f32, -200.0 + 3.0f32.ln()];
        assert!(!one_vs_rest(&mut u));
        assert_eq!(u, [-200.0f32, -200.0 + 3.0f32.ln()], "left as they are");
        softmax(&mut u);
        assert!(
            (u[0] - 0.25).abs() < 1e-5 && (u[1] - 0.75).abs() < 1e-5,
            "{u:?}"
        );
        let mut e: [f32; 0] = [];
        assert!(!one_vs_rest(&mut e));
    }

    #[test]
    fn sigmoid_hand_worked() {
        assert_eq!(sigmoid(0.0), 0.5);
        assert!((sigmoid(2.0f32) - 0.880_797_1).abs() < 1e-6);
        assert_eq!(sigmoid(-200.0), 0.0);
    }
}
