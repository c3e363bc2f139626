//! What the report keeps of the per-row outcomes, added a chunk of rows at a time in row order:
//! a few numbers per row (both classes, the largest score difference, whether `infer` and
//! `classify` split) and running sums (score error, each tensor's [`Energy`]). Every sum is taken
//! in row order, one row after the other, so rows added in chunks of any size give exactly the
//! numbers of all rows added at once.
use super::fidelity::Energy;
use super::run::RowOutcome;

/// The per-row outcomes, reduced to what [`super::summary::summarise_tally`] needs.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Tally {
    /// The float model's class per row.
    pub float: Vec<usize>,
    /// The int8 model's class (through the chosen entry point) per row.
    pub int8: Vec<usize>,
    /// Largest absolute score difference per row.
    pub diffs: Vec<f64>,
    /// Rows (1-based) where the int8 blob's `infer` and `classify` classes differ.
    pub split: Vec<usize>,
    /// `Σ |p_float − p_int8|` over every score of every row, in row order.
    pub sum_abs: f64,
    /// Scores summed in `sum_abs`.
    pub count: u64,
    /// Per traced tensor, the energy summed over the rows in row order.
    pub energy: Vec<Energy>,
}

impl Tally {
    /// An empty tally for `stages` traced tensors.
    pub fn new(stages: usize) -> Self {
        Tally {
            energy: vec![Energy::default(); stages],
            ..Tally::default()
        }
    }

    /// Rows added.
    pub fn rows(&self) -> usize {
        self.float.len()
    }

    /// Adds the outcomes of the next rows, in row order.
    pub fn add(&mut self, outcomes: &[RowOutcome]) {
        for o in outcomes {
            let row = self.rows() + 1;
            self.float.push(o.float_class);
            self.int8.push(o.int8_class);
            self.diffs.push(o.max_score_diff());
            if o.int8_infer_class != o.int8_classify_class {
                self.split.push(row);
            }
            for (f, q) in o.float_scores.iter().zip(&o.int8_scores) {
                self.sum_abs += (f64::from(*f) - f64::from(*q)).abs();
                self.count += 1;
            }
            for (e, r) in self.energy.iter_mut().zip(&o.energy) {
                e.merge(r);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn outcome(k: usize) -> RowOutcome {
        let x = k as f32;
        RowOutcome {
            float_class: k % 3,
            int8_class: (k / 2) % 3,
            int8_infer_class: k % 2,
            int8_classify_class: k % 3 % 2,
            float_scores: vec![0.1 * x, 0.7 / (x + 1.0), 0.2],
            int8_scores: vec![0.1 * x + 0.01, 0.69 / (x + 1.0), 0.21],
            energy: vec![Energy {
                signal: 0.3 * f64::from(x),
                noise: 1e-3 / f64::from(x + 1.0),
                clipped: k as u64 % 2,
                clip_noise: 1e-4,
                round_noise: 1e-3 / f64::from(x + 1.0) - 1e-4,
            }],
        }
    }

    #[test]
    fn chunks_of_any_size_give_the_tally_of_all_rows_at_once() {
        let all: Vec<RowOutcome> = (0..23).map(outcome).collect();
        let mut whole = Tally::new(1);
        whole.add(&all);
        assert_eq!(whole.rows(), 23);
        assert_eq!(whole.count, 69);
        for n in [1, 2, 5, 22] {
            let mut t = Tally::new(1);
            for c in all.chunks(n) {
                t.add(c);
            }
            assert_eq!(t, whole, "chunks of {n}");
        }
        // Rows 1-based: row 1 (k = 0) agrees (0 vs 0); k = 2 gives infer 0, classify 0; k = 3
        // gives infer 1, classify 0: row 4 splits.
        assert!(whole.split.contains(&4) && !whole.split.contains(&1));
    }
}
