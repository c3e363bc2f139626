//! Repeated rows: the accuracy interval and McNemar's test assume independent rows, and a row
//! that appears twice counts twice, which narrows the interval without new evidence.
//!
//! Rows are counted by a 64-bit hash of their values' bits (`-0.0` taken as `0.0`), not kept:
//! the set of rows seen costs about 9 bytes per row (a `u64` and the table's control byte), and
//! rows can be added a chunk at a time. Equal rows always hash equal, so no repeat is missed; two
//! different rows can collide and count as a repeat. With hash values spread evenly over 2^64,
//! the chance that any pair of `n` distinct rows collides is at most `n (n − 1) / 2 / 2^64`
//! (the birthday bound): below 3·10^-8 for a million rows, below 3·10^-6 for ten million. The
//! hash is SipHash-1-3 with fixed keys (`std::hash::DefaultHasher::new()`): the same in every run
//! of one build.
use std::collections::HashSet;
use std::hash::{DefaultHasher, Hasher};

use crate::dataset::Dataset;

/// Counts the rows that repeat an earlier row, a chunk of rows at a time.
#[derive(Debug, Clone, Default)]
pub struct RepeatCounter {
    seen: HashSet<u64>,
    repeats: u64,
}

/// The 64-bit hash of a row's values (`-0.0` as `0.0`).
fn row_hash(row: &[f32]) -> u64 {
    let mut h = DefaultHasher::new();
    for v in row {
        h.write_u32((v + 0.0).to_bits());
    }
    h.finish()
}

impl RepeatCounter {
    /// A counter expecting about `rows` rows.
    pub fn with_rows(rows: usize) -> Self {
        RepeatCounter {
            seen: HashSet::with_capacity(rows),
            repeats: 0,
        }
    }

    /// Adds the next rows: `features` row-major, `width` per row.
    pub fn add(&mut self, features: &[f32], width: usize) {
        if width == 0 {
            return;
        }
        for row in features.chunks_exact(width) {
            if !self.seen.insert(row_hash(row)) {
                self.repeats += 1;
            }
        }
    }

    /// Rows so far that repeat an earlier one.
    pub fn repeats(&self) -> u64 {
        self.repeats
    }
}

/// How many rows repeat an earlier row exactly (every feature bit for bit; `-0.0` and `0.0`
/// count as the same value, NaN cannot occur in a loaded dataset), up to the hash collisions
/// bounded in the module documentation.
pub fn repeated_rows(data: &Dataset) -> u64 {
    let mut c = RepeatCounter::with_rows(data.rows);
    c.add(&data.features, data.width);
    c.repeats()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn data(rows: &[[f32; 2]]) -> Dataset {
        Dataset {
            rows: rows.len(),
            width: 2,
            features: rows.iter().flatten().copied().collect(),
            labels: None,
            source: "t".into(),
        }
    }

    #[test]
    fn counts_each_repeat_once_per_extra_copy() {
        assert_eq!(repeated_rows(&data(&[[1.0, 2.0], [2.0, 1.0]])), 0);
        assert_eq!(
            repeated_rows(&data(&[[1.0, 2.0], [1.0, 2.0], [1.0, 2.0], [3.0, 4.0]])),
            2
        );
        assert_eq!(repeated_rows(&data(&[[0.0, 1.0], [-0.0, 1.0]])), 1);
    }

    #[test]
    fn chunks_count_as_one_pass_and_distinct_rows_do_not_collide() {
        let rows: Vec<[f32; 2]> = (0..5000)
            .map(|i| [(i % 97) as f32, (i % 89) as f32])
            .collect();
        let whole = repeated_rows(&data(&rows));
        // 97 and 89 are coprime: the pairs repeat with period 8633 > 5000, so all are distinct.
        assert_eq!(whole, 0);
        let twice: Vec<[f32; 2]> = rows.iter().chain(&rows).copied().collect();
        let mut c = RepeatCounter::default();
        for chunk in twice.chunks(777) {
            let flat: Vec<f32> = chunk.iter().flatten().copied().collect();
            c.add(&flat, 2);
        }
        assert_eq!(c.repeats(), 5000);
    }
}
