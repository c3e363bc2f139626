//! Per-layer fidelity: how closely each int8 tensor (dequantised) follows the float tensor at
//! the same place, as a signal-to-quantisation-noise ratio over all rows:
//!
//! `SQNR = 10·log10(Σ x_f² / Σ (x_f − x_q)²)` dB,
//!
//! the usual definition of SQNR (signal power over error power; common practice). Sums run over
//! every element of the tensor in every row, in f64.
//!
//! The noise is split by where the float value lies: **clipping** noise comes from the values
//! beyond the int8 tensor's range (below `(−128 − zero_point)·scale` or above
//! `(127 − zero_point)·scale`: they saturate to an end), **rounding** noise from the values
//! within it. The two add up to the total. For a layer's output the part "within" also carries
//! the error that reached the layer through its input; the split says where each value sits, not
//! where its error was made.
use serde::Serialize;

/// Running sums for one tensor.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize)]
pub struct Energy {
    /// `Σ x_f²`.
    pub signal: f64,
    /// `Σ (x_f − x_q)²`.
    pub noise: f64,
    /// Values beyond the int8 tensor's range.
    pub clipped: u64,
    /// The part of `noise` from those values.
    pub clip_noise: f64,
    /// The part of `noise` from the values within the range.
    pub round_noise: f64,
}

/// The real values an int8 tensor of `scale` and `zero_point` can hold: those of -128 and 127
/// dequantised, as the runtime dequantises.
pub fn int8_bounds(scale: f32, zero_point: i8) -> (f32, f32) {
    let real = |q: i8| (f32::from(q) - f32::from(zero_point)) * scale;
    (real(-128), real(127))
}

impl Energy {
    /// Adds one float value and its dequantised int8 counterpart, from a tensor whose int8
    /// values cover `bounds` ([`int8_bounds`]).
    pub fn add(&mut self, float: f32, quant: f32, bounds: (f32, f32)) {
        let (f, q) = (f64::from(float), f64::from(quant));
        let d2 = (f - q) * (f - q);
        self.signal += f * f;
        self.noise += d2;
        if float < bounds.0 || float > bounds.1 {
            self.clipped += 1;
            self.clip_noise += d2;
        } else {
            self.round_noise += d2;
        }
    }

    /// Adds another tensor's sums.
    pub fn merge(&mut self, other: &Energy) {
        self.signal += other.signal;
        self.noise += other.noise;
        self.clipped += other.clipped;
        self.clip_noise += other.clip_noise;
        self.round_noise += other.round_noise;
    }

    /// The share of the noise that clipping causes, in `[0, 1]`; `None` without noise.
    pub fn clip_share(&self) -> Option<f64> {
        (self.noise > 0.0).then(|| (self.clip_noise / self.noise).clamp(0.0, 1.0))
    }

    /// The SQNR the tensor would have with its rounding noise alone (nothing clipped), in dB.
    pub fn rounding_sqnr_db(&self) -> Option<f64> {
        (self.round_noise > 0.0 && self.signal > 0.0)
            .then(|| 10.0 * (self.signal / self.round_noise).log10())
    }

    /// The SQNR in dB; `None` when it is not a finite number (no noise at all, or no signal).
    pub fn sqnr_db(&self) -> Option<f64> {
        if self.noise > 0.0 && self.signal > 0.0 {
            Some(10.0 * (self.signal / self.noise).log10())
        } else {
            None
        }
    }

    /// Words for an SQNR that is not a number.
    pub fn why_undefined(&self) -> Option<&'static str> {
        match (self.signal > 0.0, self.noise > 0.0) {
            (true, true) => None,
            (_, false) => Some("no error: int8 equals float"),
            (false, true) => Some("float tensor is all zeros"),
        }
    }
}

/// The fidelity of one tensor in the report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StageFidelity {
    /// 0 for the quantised input, k for the output of layer k (before softmax or sigmoid).
    pub index: usize,
    /// What the tensor is, for people.
    pub name: String,
    /// Elements per row.
    pub width: usize,
    /// SQNR in dB (`null` when undefined, see `note`).
    pub sqnr_db: Option<f64>,
    /// The sums behind it (with the clipping / rounding split).
    pub energy: Energy,
    /// Values beyond the int8 tensor's range, over all rows.
    pub clipped: u64,
    /// The share of the noise from those values (`null` without noise).
    pub clip_share: Option<f64>,
    /// The SQNR with the rounding noise alone, in dB (`null` when undefined).
    pub rounding_sqnr_db: Option<f64>,
    /// Why `sqnr_db` is undefined, if it is.
    pub note: Option<String>,
}

impl StageFidelity {
    /// Builds the report row from the summed energy.
    pub fn new(index: usize, name: String, width: usize, energy: Energy) -> Self {
        StageFidelity {
            index,
            name,
            width,
            sqnr_db: energy.sqnr_db(),
            clipped: energy.clipped,
            clip_share: energy.clip_share(),
            rounding_sqnr_db: energy.rounding_sqnr_db(),
            energy,
            note: energy.why_undefined().map(str::to_string),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hand_worked_sqnr() {
        // x_f = [3, 4], x_q = [3, 4.5]: signal 25, noise 0.25, ratio 100 → 20 dB.
        let mut e = Energy::default();
        let wide = (-10.0, 10.0);
        e.add(3.0, 3.0, wide);
        e.add(4.0, 4.5, wide);
        assert_eq!(
            e,
            Energy {
                signal: 25.0,
                noise: 0.25,
                clipped: 0,
                clip_noise: 0.0,
                round_noise: 0.25,
            }
        );
        assert_eq!(e.clip_share(), Some(0.0));
        assert_eq!(e.rounding_sqnr_db(), e.sqnr_db());
        assert!((e.sqnr_db().unwrap() - 20.0).abs() < 1e-12);
        let mut twice = e;
        twice.merge(&e);
        assert!((twice.sqnr_db().unwrap() - 20.0).abs() < 1e-12);
    }

    #[test]
    fn undefined_cases_are_named() {
        let mut exact = Energy::default();
        exact.add(1.0, 1.0, (-1.0, 1.0));
        assert_eq!(exact.sqnr_db(), None);
        assert_eq!(exact.why_undefined(), Some("no error: int8 equals float"));
        let mut zero = Energy::default();
        zero.add(0.0, 0.5, (-1.0, 1.0));
        assert_eq!(zero.sqnr_db(), None);
        assert_eq!(zero.why_undefined(), Some("float tensor is all zeros"));
        let s = StageFidelity::new(0, "input".into(), 1, zero);
        assert_eq!(s.note.as_deref(), Some("float tensor is all zeros"));
    }

    #[test]
    fn hand_worked_split() {
        // Range [0, 2.55] (scale 0.01, zero point -128). 3.0 saturates to 2.55 (clipping,
        // 0.45² = 0.2025); 1.004 dequantises to 1.00 (rounding, 0.004² = 1.6e-5).
        let b = int8_bounds(0.01, -128);
        assert_eq!(b.0, 0.0);
        assert!((b.1 - 2.55).abs() < 1e-6);
        let mut e = Energy::default();
        e.add(3.0, 2.55, b);
        e.add(1.004, 1.0, b);
        assert_eq!(e.clipped, 1);
        assert!((e.clip_noise - 0.2025).abs() < 1e-6);
        assert!((e.round_noise - 1.6e-5).abs() < 1e-9);
        assert!((e.clip_noise + e.round_noise - e.noise).abs() < 1e-15);
        let share = e.clip_share().unwrap();
        assert!((share - 0.2025 / (0.2025 + 1.6e-5)).abs() < 1e-4);
        // 10·log10((9 + 1.008016) / 1.6e-5) ≈ 57.96 dB from rounding alone.
        assert!((e.rounding_sqnr_db().unwrap() - 57.96).abs() < 0.01);
    }
}
