//! Per-layer fidelity: how closely each int8 tensor (dequantised) follows the float tensor at
//! the same place, as a signal-to-quantisation-noise ratio over all rows:
//!
//! `SQNR = 10·log10(Σ x_f² / Σ (x_f − x_q)²)` dB,
//!
//! the usual definition of SQNR (signal power over error power; common practice). Sums run over
//! every element of the tensor in every row, in f64.
use serde::Serialize;

/// Running sums for one tensor.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize)]
pub struct Energy {
    /// `Σ x_f²`.
    pub signal: f64,
    /// `Σ (x_f − x_q)²`.
    pub noise: f64,
}

impl Energy {
    /// Adds one float value and its dequantised int8 counterpart.
    pub fn add(&mut self, float: f32, quant: f32) {
        let (f, q) = (f64::from(float), f64::from(quant));
        self.signal += f * f;
        self.noise += (f - q) * (f - q);
    }

    /// Adds another tensor's sums.
    pub fn merge(&mut self, other: &Energy) {
        self.signal += other.signal;
        self.noise += other.noise;
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
    /// The sums behind it.
    pub energy: Energy,
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
        e.add(3.0, 3.0);
        e.add(4.0, 4.5);
        assert_eq!(
            e,
            Energy {
                signal: 25.0,
                noise: 0.25
            }
        );
        assert!((e.sqnr_db().unwrap() - 20.0).abs() < 1e-12);
        let mut twice = e;
        twice.merge(&e);
        assert!((twice.sqnr_db().unwrap() - 20.0).abs() < 1e-12);
    }

    #[test]
    fn undefined_cases_are_named() {
        let mut exact = Energy::default();
        exact.add(1.0, 1.0);
        assert_eq!(exact.sqnr_db(), None);
        assert_eq!(exact.why_undefined(), Some("no error: int8 equals float"));
        let mut zero = Energy::default();
        zero.add(0.0, 0.5);
        assert_eq!(zero.sqnr_db(), None);
        assert_eq!(zero.why_undefined(), Some("float tensor is all zeros"));
        let s = StageFidelity::new(0, "input".into(), 1, zero);
        assert_eq!(s.note.as_deref(), Some("float tensor is all zeros"));
    }
}
