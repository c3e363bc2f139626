//! Classification metrics on predicted and true class indices: accuracy, the confusion matrix,
//! per-class precision and recall, and agreement between two sets of predictions.
//!
//! Conventions follow scikit-learn 1.9 (`sklearn.metrics.confusion_matrix`: rows are true
//! classes, columns predicted; `precision_recall_fscore_support(..., zero_division=0)`: a class
//! never predicted has precision 0, a class with no rows has recall 0). The digits tests check
//! these functions against scikit-learn's output on the same predictions.
use serde::Serialize;

/// A `classes × classes` confusion matrix: `counts[t][p]` rows of true class `t` predicted `p`.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Confusion {
    /// Row-major counts, true class first.
    pub counts: Vec<Vec<u64>>,
}

/// Precision and recall of one class.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ClassScores {
    /// `tp / (tp + fp)`, or 0 when the class is never predicted.
    pub precision: f64,
    /// `tp / (tp + fn)`, or 0 when the class has no rows.
    pub recall: f64,
    /// Rows of this class (`tp + fn`).
    pub support: u64,
    /// Rows predicted as this class (`tp + fp`).
    pub predicted: u64,
}

impl ClassScores {
    /// True when precision is 0 only because the class is never predicted.
    pub fn precision_undefined(&self) -> bool {
        self.predicted == 0
    }

    /// True when recall is 0 only because the class has no rows.
    pub fn recall_undefined(&self) -> bool {
        self.support == 0
    }
}

impl Confusion {
    /// Tallies `(true, predicted)` pairs over `classes` classes. Pairs outside the range are
    /// ignored (labels are resolved against the model's classes before this).
    pub fn new(classes: usize, truth: &[usize], predicted: &[usize]) -> Self {
        let mut counts = vec![vec![0u64; classes]; classes];
        for (&t, &p) in truth.iter().zip(predicted) {
            if let Some(c) = counts.get_mut(t).and_then(|row| row.get_mut(p)) {
                *c += 1;
            }
        }
        Confusion { counts }
    }

    /// Number of classes.
    pub fn classes(&self) -> usize {
        self.counts.len()
    }

    /// Rows on the diagonal.
    pub fn correct(&self) -> u64 {
        self.counts
            .iter()
            .enumerate()
            .map(|(i, row)| row.get(i).copied().unwrap_or(0))
            .sum()
    }

    /// All rows tallied.
    pub fn total(&self) -> u64 {
        self.counts.iter().flatten().sum()
    }

    /// `correct / total`, 0 for no rows.
    pub fn accuracy(&self) -> f64 {
        ratio(self.correct(), self.total())
    }

    /// Precision and recall of every class, in class order.
    pub fn per_class(&self) -> Vec<ClassScores> {
        (0..self.classes())
            .map(|k| {
                let tp = self.at(k, k);
                let support: u64 = self.counts.get(k).map_or(0, |r| r.iter().sum());
                let predicted: u64 = self
                    .counts
                    .iter()
                    .map(|r| r.get(k).copied().unwrap_or(0))
                    .sum();
                ClassScores {
                    precision: ratio(tp, predicted),
                    recall: ratio(tp, support),
                    support,
                    predicted,
                }
            })
            .collect()
    }

    /// The count at true class `t`, predicted class `p` (0 outside the matrix).
    pub fn at(&self, t: usize, p: usize) -> u64 {
        self.counts
            .get(t)
            .and_then(|r| r.get(p))
            .copied()
            .unwrap_or(0)
    }
}

/// `num / den`, or 0 when `den` is 0 (scikit-learn's `zero_division=0`).
pub fn ratio(num: u64, den: u64) -> f64 {
    if den == 0 {
        0.0
    } else {
        num as f64 / den as f64
    }
}

/// Rows where two prediction lists agree.
pub fn agreement(a: &[usize], b: &[usize]) -> u64 {
    a.iter().zip(b).filter(|(x, y)| x == y).count() as u64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn all_agree_perfect() {
        let y = [0, 1, 2, 2, 1];
        let c = Confusion::new(3, &y, &y);
        assert_eq!(c.correct(), 5);
        assert_eq!(c.accuracy(), 1.0);
        assert!(c
            .per_class()
            .iter()
            .all(|s| s.precision == 1.0 && s.recall == 1.0));
        assert_eq!(agreement(&y, &y), 5);
    }

    #[test]
    fn hand_worked_three_classes() {
        // truth 0 0 1 1 2 2, predicted 0 1 1 1 2 0:
        // matrix [[1,1,0],[0,2,0],[1,0,1]]; class 0: tp 1, predicted 2, support 2 → P 1/2, R 1/2;
        // class 1: tp 2, predicted 3 → P 2/3, R 1; class 2: tp 1, predicted 1 → P 1, R 1/2.
        let t = [0, 0, 1, 1, 2, 2];
        let p = [0, 1, 1, 1, 2, 0];
        let c = Confusion::new(3, &t, &p);
        assert_eq!(c.counts, vec![vec![1, 1, 0], vec![0, 2, 0], vec![1, 0, 1]]);
        assert_eq!(c.correct(), 4);
        let s = c.per_class();
        assert_eq!((s[0].precision, s[0].recall), (0.5, 0.5));
        assert_eq!((s[1].precision, s[1].recall), (2.0 / 3.0, 1.0));
        assert_eq!((s[2].precision, s[2].recall), (1.0, 0.5));
        assert_eq!(agreement(&t, &p), 4);
    }

    #[test]
    fn class_never_predicted_has_precision_zero() {
        // Class 2 has rows but is never predicted: precision 0 by convention, recall 0.
        let t = [0, 1, 2, 2];
        let p = [0, 1, 1, 0];
        let s = Confusion::new(3, &t, &p).per_class();
        assert_eq!(s[2].precision, 0.0);
        assert!(s[2].precision_undefined());
        assert_eq!(s[2].recall, 0.0);
        assert!(!s[2].recall_undefined());
        // Class with no rows at all: recall undefined, set to 0.
        let s = Confusion::new(3, &[0, 1], &[0, 1]).per_class();
        assert!(s[2].recall_undefined() && s[2].recall == 0.0);
    }

    #[test]
    fn out_of_range_pairs_are_ignored() {
        let c = Confusion::new(2, &[0, 5, 1], &[0, 0, 7]);
        assert_eq!(c.total(), 1);
        assert_eq!(c.at(9, 9), 0);
    }
}
