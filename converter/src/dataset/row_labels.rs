//! A label column stored once per distinct label: a file of a million rows and ten classes holds
//! ten strings and a million indices (4 bytes a row), not a million strings.
use std::collections::HashMap;

use super::{resolve_labels, DatasetError};

/// Labels as written, one per row: row `k`'s label is `distinct[index[k]]`.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct RowLabels {
    distinct: Vec<String>,
    index: Vec<u32>,
    lookup: HashMap<String, u32>,
}

impl RowLabels {
    /// Adds the next row's label.
    pub fn push(&mut self, label: &str) {
        let k = match self.lookup.get(label) {
            Some(&k) => k,
            None => {
                let k = u32::try_from(self.distinct.len()).unwrap_or(u32::MAX);
                self.distinct.push(label.to_string());
                self.lookup.insert(label.to_string(), k);
                k
            }
        };
        self.index.push(k);
    }

    /// Rows.
    pub fn len(&self) -> usize {
        self.index.len()
    }

    /// Whether there are no rows.
    pub fn is_empty(&self) -> bool {
        self.index.is_empty()
    }

    /// Row `k`'s label.
    pub fn get(&self, k: usize) -> Option<&str> {
        let i = *self.index.get(k)?;
        self.distinct.get(i as usize).map(String::as_str)
    }

    /// [`resolve_labels`] on every row: the same classes, and the same error (naming the first
    /// row whose label is not a class), each distinct label resolved once.
    pub fn resolve(
        &self,
        class_names: &[String],
        classes: usize,
    ) -> Result<Vec<usize>, DatasetError> {
        let each: Vec<Result<usize, DatasetError>> = self
            .distinct
            .iter()
            .map(|d| {
                resolve_labels(std::slice::from_ref(d), class_names, classes)
                    .map(|v| v.first().copied().unwrap_or(0))
            })
            .collect();
        self.index
            .iter()
            .enumerate()
            .map(|(row, &i)| match each.get(i as usize) {
                Some(Ok(k)) => Ok(*k),
                Some(Err(DatasetError::UnknownLabel {
                    label, expected, ..
                })) => Err(DatasetError::UnknownLabel {
                    row: row + 1,
                    label: label.clone(),
                    expected: expected.clone(),
                }),
                _ => resolve_labels(
                    &[self.get(row).unwrap_or("").to_string()],
                    class_names,
                    classes,
                )
                .map(|v| v.first().copied().unwrap_or(0)),
            })
            .collect()
    }
}

impl<S: AsRef<str>> FromIterator<S> for RowLabels {
    fn from_iter<I: IntoIterator<Item = S>>(iter: I) -> Self {
        let mut l = RowLabels::default();
        for s in iter {
            l.push(s.as_ref());
        }
        l
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn s(v: &[&str]) -> Vec<String> {
        v.iter().map(|x| x.to_string()).collect()
    }

    #[test]
    fn resolves_as_resolve_labels_does_with_the_same_errors() {
        let names = s(&["cat", "dog", "bird"]);
        for rows in [
            s(&["dog", "0", " bird ", "2.0", "dog", "dog"]),
            s(&["dog", "cat", "7", "dog", "7"]),
            s(&["cat", "fish"]),
            s(&[]),
        ] {
            let table: RowLabels = rows.iter().collect();
            assert_eq!(table.len(), rows.len());
            let want = resolve_labels(&rows, &names, 3).map_err(|e| e.to_string());
            assert_eq!(table.resolve(&names, 3).map_err(|e| e.to_string()), want);
        }
        let table: RowLabels = ["a", "b", "a", "a"].into_iter().collect();
        assert_eq!(table.distinct.len(), 2);
        assert_eq!(table.get(2), Some("a"));
        assert_eq!(table.get(4), None);
    }
}
