//! Datasets for calibration and comparison: feature rows (and optional labels) loaded from a
//! CSV file or from `.npy` arrays saved with `numpy.save`.
//!
//! CSV: one row per line, comma-separated, optional header (detected when the first row has a
//! field that is not a number, not counting the label column), optional label column chosen by
//! name or 0-based index. Errors name the file, the line as an editor numbers it, and the column.
//!
//! NPY: a 2-D features array `(rows, features)` of float32, float64 or any integer type (arrays
//! with more axes are flattened per row in C order, so `(rows, 8, 8)` images become 64 features),
//! and an optional 1-D labels array of integers or strings.
//!
//! Integer rows ([`load_file_integers`]) keep the exact whole values for the runtime's `i16` and
//! `u8` input paths; a value that is not whole or is out of the type's range is an error naming
//! its row and column.

mod csv_load;
mod error;
mod integers;
mod labels;
mod load_file;
pub(crate) mod npy_array;
mod npy_load;
mod npy_stream;
mod row_labels;
mod stream;

pub use csv_load::load_csv;
pub use error::DatasetError;
pub use integers::{
    load_csv_integers, load_file_integers, load_npy_integers, IntegerRows, IntegerType,
    IntegerValues,
};
pub use labels::resolve_labels;
pub use load_file::{is_npy, load_file, LoadOptions};
pub use npy_array::NpyArrayError;
pub use npy_load::load_npy;
pub use npy_stream::NpyRows;
pub use row_labels::RowLabels;
pub use stream::RowStream;

/// Feature rows, row-major, with optional labels.
#[derive(Debug, Clone, PartialEq)]
pub struct Dataset {
    /// Number of rows.
    pub rows: usize,
    /// Features per row.
    pub width: usize,
    /// `rows * width` values, row-major.
    pub features: Vec<f32>,
    /// One label per row, as written in the source (class name or class index).
    pub labels: Option<Vec<String>>,
    /// Where the rows came from (file name), for messages.
    pub source: String,
}

impl Dataset {
    /// Row `i` (0-based); an empty slice when `i` is past the last row.
    pub fn row(&self, i: usize) -> &[f32] {
        let start = i.saturating_mul(self.width);
        self.features
            .get(start..start.saturating_add(self.width))
            .unwrap_or(&[])
    }

    /// Checks that rows have `expected` features (the model's input width).
    pub fn check_width(&self, expected: usize) -> Result<(), DatasetError> {
        if self.width == expected {
            Ok(())
        } else {
            Err(DatasetError::WrongWidth {
                source_name: self.source.clone(),
                found: self.width,
                expected,
            })
        }
    }
}

/// Which CSV column holds the labels.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum LabelColumn {
    /// The column with this header name.
    Name(String),
    /// The column at this 0-based index among all CSV columns.
    Index(usize),
}

/// How to read a CSV file.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct CsvOptions {
    /// The label column, if the file has one.
    pub label: Option<LabelColumn>,
    /// Whether the first row is a header; `None` detects it: the first row is a header when one
    /// of its fields (outside a label column given by index) is not a number.
    pub has_header: Option<bool>,
}

/// A `--label` value that is empty.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("the label column must be a column name or a 0-based column index, not empty")]
pub struct ParseLabelColumnError;

impl std::str::FromStr for LabelColumn {
    type Err = ParseLabelColumnError;

    /// A number is a 0-based column index; anything else is a column name.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let t = s.trim();
        if t.is_empty() {
            return Err(ParseLabelColumnError);
        }
        if t.bytes().all(|b| b.is_ascii_digit()) {
            if let Ok(i) = t.parse::<usize>() {
                return Ok(LabelColumn::Index(i));
            }
        }
        Ok(LabelColumn::Name(t.to_string()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ds() -> Dataset {
        Dataset {
            rows: 2,
            width: 3,
            features: vec![1.0, 2.0, 3.0, 4.0, 5.0, 6.0],
            labels: None,
            source: "mem".into(),
        }
    }

    #[test]
    fn row_slices_and_out_of_range_is_empty() {
        let d = ds();
        assert_eq!(d.row(0), &[1.0, 2.0, 3.0]);
        assert_eq!(d.row(1), &[4.0, 5.0, 6.0]);
        assert!(d.row(2).is_empty());
        assert!(d.row(usize::MAX).is_empty());
    }

    #[test]
    fn check_width_names_both_widths() {
        let d = ds();
        assert!(d.check_width(3).is_ok());
        let e = d.check_width(4).unwrap_err().to_string();
        assert_eq!(e, "mem: 3 features per row, but the model takes 4 inputs");
    }

    #[test]
    fn label_column_from_str() {
        assert_eq!("3".parse::<LabelColumn>().unwrap(), LabelColumn::Index(3));
        assert_eq!(" 0 ".parse::<LabelColumn>().unwrap(), LabelColumn::Index(0));
        assert_eq!(
            "species".parse::<LabelColumn>().unwrap(),
            LabelColumn::Name("species".into())
        );
        assert_eq!(
            "-1".parse::<LabelColumn>().unwrap(),
            LabelColumn::Name("-1".into())
        );
        assert_eq!(
            "2a".parse::<LabelColumn>().unwrap(),
            LabelColumn::Name("2a".into())
        );
        assert_eq!("".parse::<LabelColumn>(), Err(ParseLabelColumnError));
        assert_eq!("  ".parse::<LabelColumn>(), Err(ParseLabelColumnError));
    }
}
