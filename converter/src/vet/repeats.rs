//! Repeated rows: the accuracy interval and McNemar's test assume independent rows, and a row
//! that appears twice counts twice, which narrows the interval without new evidence.
use std::collections::HashSet;
use std::hash::{Hash, Hasher};

use crate::dataset::Dataset;

/// A row compared and hashed by its values' bits (`-0.0` taken as `0.0`), borrowed from the
/// dataset: the set of rows seen costs a pointer per row, not a copy of every row.
struct RowKey<'a>(&'a [f32]);

impl RowKey<'_> {
    fn bits(&self) -> impl Iterator<Item = u32> + '_ {
        self.0.iter().map(|v| (v + 0.0).to_bits())
    }
}

impl PartialEq for RowKey<'_> {
    fn eq(&self, other: &Self) -> bool {
        self.bits().eq(other.bits())
    }
}

impl Eq for RowKey<'_> {}

impl Hash for RowKey<'_> {
    fn hash<H: Hasher>(&self, state: &mut H) {
        for b in self.bits() {
            state.write_u32(b);
        }
    }
}

/// How many rows repeat an earlier row exactly (every feature bit for bit; `-0.0` and `0.0`
/// count as the same value, NaN cannot occur in a loaded dataset).
pub fn repeated_rows(data: &Dataset) -> u64 {
    if data.width == 0 {
        return 0;
    }
    let mut seen = HashSet::with_capacity(data.rows);
    data.features
        .chunks_exact(data.width)
        .filter(|row| !seen.insert(RowKey(row)))
        .count() as u64
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
}
