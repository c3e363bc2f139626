//! How a firmware feeds its model: the input type (`Input::F32`, `Input::I16`, `Input::U8`) and
//! the entry point (`Model::infer` or `Model::classify`), and rows loaded for that input type.
use kinglet_runtime::Input;
use serde::Serialize;
use std::path::Path;

use crate::dataset::{
    load_file, load_file_integers, Dataset, DatasetError, IntegerRows, IntegerType, IntegerValues,
    LoadOptions,
};

/// The runtime input type rows are fed through.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Feed {
    /// Float features, `Input::F32` (scaled in f32, then quantised on int8 models).
    #[default]
    F32,
    /// Raw signed 16-bit counts, `Input::I16` (integer-only on int8 models).
    I16,
    /// Raw bytes, `Input::U8` (integer-only on int8 models).
    U8,
}

impl Feed {
    /// `f32`, `i16` or `u8`.
    pub fn name(self) -> &'static str {
        match self {
            Feed::F32 => "f32",
            Feed::I16 => "i16",
            Feed::U8 => "u8",
        }
    }

    /// The runtime's name for it: `Input::F32`, ...
    pub fn input_name(self) -> &'static str {
        match self {
            Feed::F32 => "Input::F32",
            Feed::I16 => "Input::I16",
            Feed::U8 => "Input::U8",
        }
    }

    /// The integer type of an integer path.
    pub fn integer(self) -> Option<IntegerType> {
        match self {
            Feed::F32 => None,
            Feed::I16 => Some(IntegerType::I16),
            Feed::U8 => Some(IntegerType::U8),
        }
    }
}

/// The runtime entry point that gives the class.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Entry {
    /// `Model::infer`: scores, then the argmax of the scores.
    #[default]
    Infer,
    /// `Model::classify`: the class alone, the argmax of the last layer's outputs (integer
    /// arithmetic on int8 models).
    Classify,
}

impl Entry {
    /// `infer` or `classify`.
    pub fn name(self) -> &'static str {
        match self {
            Entry::Infer => "infer",
            Entry::Classify => "classify",
        }
    }

    /// `Model::infer` or `Model::classify`.
    pub fn call_name(self) -> &'static str {
        match self {
            Entry::Infer => "Model::infer",
            Entry::Classify => "Model::classify",
        }
    }
}

/// Rows for one input type: the f32 features (for an integer path, the same values as f32) and,
/// for an integer path, the exact integers.
#[derive(Debug, Clone, PartialEq)]
pub struct Rows {
    /// The features as f32, with labels and the source name.
    pub data: Dataset,
    /// The exact values of an integer path.
    pub integers: Option<IntegerValues>,
    /// The file's data row (0-based, header not counted) of the first row here: 0 unless
    /// [`Rows::select`] took a later range.
    pub first_row: usize,
}

impl Rows {
    /// Float rows fed as `Input::F32`.
    pub fn floats(data: Dataset) -> Self {
        Rows {
            data,
            integers: None,
            first_row: 0,
        }
    }

    /// The input type the rows are fed through.
    pub fn feed(&self) -> Feed {
        match self.integers {
            None => Feed::F32,
            Some(IntegerValues::I16(_)) => Feed::I16,
            Some(IntegerValues::U8(_)) => Feed::U8,
        }
    }

    /// Row `r` (0-based) as the runtime input (empty past the last row).
    pub fn input(&self, r: usize) -> Input<'_> {
        input_at(&self.data, self.integers.as_ref(), r)
    }

    /// Keeps the rows `start..end` (0-based, end excluded), labels included.
    ///
    /// # Errors
    /// An empty range, or one past the last row.
    pub fn select(self, start: usize, end: usize) -> Result<Rows, SelectError> {
        let rows = self.data.rows;
        if start >= end {
            return Err(SelectError::Empty { start, end });
        }
        if end > rows {
            return Err(SelectError::PastTheEnd {
                source_name: self.data.source,
                start,
                end,
                rows,
            });
        }
        let w = self.data.width;
        let span = start * w..end * w;
        let data = Dataset {
            rows: end - start,
            features: self.data.features.get(span.clone()).unwrap_or(&[]).to_vec(),
            labels: self
                .data
                .labels
                .map(|l| l.get(start..end).unwrap_or(&[]).to_vec()),
            ..self.data
        };
        let integers = self.integers.map(|v| match v {
            IntegerValues::I16(v) => IntegerValues::I16(v.get(span).unwrap_or(&[]).to_vec()),
            IntegerValues::U8(v) => IntegerValues::U8(v.get(span).unwrap_or(&[]).to_vec()),
        });
        Ok(Rows {
            data,
            integers,
            first_row: self.first_row + start,
        })
    }
}

/// Refuses an integer `feed` for an int8 blob packed without the integer input path (format
/// version 5 may leave it out; `runtime/FORMAT.md` §3.4), before any row is run: the runtime
/// would refuse every row with `RunError::NoIntegerInput`. `blob` names the file.
pub fn check_feed(
    model: &kinglet_runtime::Model<'_>,
    feed: Feed,
    blob: &str,
) -> anyhow::Result<()> {
    if feed != Feed::F32 && !model.takes_integer_input() {
        anyhow::bail!(
            "{blob} has no integer input path (it was packed without --integer-input), so --feed {} cannot give it raw integers; pack it again with --integer-input, or use --feed f32",
            feed.name()
        );
    }
    Ok(())
}

/// Row `r` (0-based) of `data`, or of `integers` when given, as the runtime input (empty past
/// the last row).
pub fn input_at<'a>(data: &'a Dataset, integers: Option<&'a IntegerValues>, r: usize) -> Input<'a> {
    let w = data.width;
    let span = r.saturating_mul(w)..r.saturating_mul(w).saturating_add(w);
    match integers {
        None => Input::F32(data.row(r)),
        Some(IntegerValues::I16(v)) => Input::I16(v.get(span).unwrap_or(&[])),
        Some(IntegerValues::U8(v)) => Input::U8(v.get(span).unwrap_or(&[])),
    }
}

/// A row range that selects nothing.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum SelectError {
    /// `start..end` with `end <= start`.
    #[error("the row range {start}..{end} selects no rows (the end is excluded and must be after the start)")]
    Empty {
        /// First row.
        start: usize,
        /// One past the last row.
        end: usize,
    },
    /// The range ends after the last row.
    #[error("the row range {start}..{end} goes past the end: {source_name} has {rows} data rows (0 to {last})", last = rows.saturating_sub(1))]
    PastTheEnd {
        /// The rows' file.
        source_name: String,
        /// First row.
        start: usize,
        /// One past the last row.
        end: usize,
        /// Data rows in the file.
        rows: usize,
    },
}

/// Loads `path` for the input type `feed`: [`load_file`] for f32, [`load_file_integers`] for
/// the integer paths (whole values in range, or an error naming the row and column).
pub fn load_rows(path: &Path, opts: &LoadOptions, feed: Feed) -> Result<Rows, DatasetError> {
    match feed.integer() {
        None => Ok(Rows::floats(load_file(path, opts)?)),
        Some(ty) => {
            let IntegerRows { data, values } = load_file_integers(path, opts, ty)?;
            Ok(Rows {
                data,
                integers: Some(values),
                first_row: 0,
            })
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rows() -> Rows {
        Rows {
            data: Dataset {
                rows: 3,
                width: 2,
                features: vec![1.0, 2.0, 3.0, 4.0, 5.0, 6.0],
                labels: Some(vec!["a".into(), "b".into(), "c".into()]),
                source: "r.csv".into(),
            },
            integers: Some(IntegerValues::U8(vec![1, 2, 3, 4, 5, 6])),
            first_row: 0,
        }
    }

    #[test]
    fn inputs_follow_the_feed_and_selection_keeps_labels() {
        let r = rows();
        assert_eq!(r.feed(), Feed::U8);
        assert!(matches!(r.input(1), Input::U8(&[3, 4])));
        assert!(matches!(r.input(3), Input::U8(&[])));
        let s = r.clone().select(1, 3).unwrap();
        assert_eq!(s.data.rows, 2);
        assert_eq!(s.data.features, [3.0, 4.0, 5.0, 6.0]);
        assert_eq!(s.data.labels, Some(vec!["b".into(), "c".into()]));
        assert_eq!(s.integers, Some(IntegerValues::U8(vec![3, 4, 5, 6])));
        assert_eq!(s.first_row, 1);
        assert_eq!(s.select(1, 2).unwrap().first_row, 2);
        let f = Rows::floats(r.data.clone());
        assert_eq!(f.feed(), Feed::F32);
        assert!(matches!(f.input(0), Input::F32(&[1.0, 2.0])));
    }

    #[test]
    fn empty_and_overlong_ranges_are_refused() {
        assert_eq!(
            rows().select(2, 2).unwrap_err().to_string(),
            "the row range 2..2 selects no rows (the end is excluded and must be after the start)"
        );
        assert_eq!(
            rows().select(0, 4).unwrap_err().to_string(),
            "the row range 0..4 goes past the end: r.csv has 3 data rows (0 to 2)"
        );
    }
}
