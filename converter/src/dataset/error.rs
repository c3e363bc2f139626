//! Errors from loading a dataset. Each names the file and, where it applies, the line (1-based,
//! as an editor shows it) and the column.

use std::path::PathBuf;

use super::npy_array::NpyArrayError;

/// Why a dataset could not be loaded or used.
#[derive(Debug, thiserror::Error)]
pub enum DatasetError {
    /// The file could not be opened or read.
    #[error("{}: cannot read the file", path.display())]
    Io {
        /// The file.
        path: PathBuf,
        /// What the system said.
        #[source]
        source: std::io::Error,
    },
    /// The CSV reader failed (for example on text that is not UTF-8).
    #[error("{}", path.display())]
    Csv {
        /// The file.
        path: PathBuf,
        /// What the CSV reader said (it includes the line).
        #[source]
        source: csv::Error,
    },
    /// The file holds no records at all.
    #[error("{}: the file is empty", path.display())]
    Empty {
        /// The file.
        path: PathBuf,
    },
    /// The file holds a header but no data rows.
    #[error("{}: the file has a header but no data rows", path.display())]
    NoDataRows {
        /// The file.
        path: PathBuf,
    },
    /// A row has a different number of fields from the first row.
    #[error("{}: line {line}: {found} fields, but the first row has {expected}", path.display())]
    Ragged {
        /// The file.
        path: PathBuf,
        /// 1-based line number.
        line: u64,
        /// Fields on this line.
        found: usize,
        /// Fields on the first row.
        expected: usize,
    },
    /// A feature field is not a number.
    #[error("{}: line {line}, column {column}: {} is not a number", path.display(), crate::echo::quoted(value))]
    NonNumeric {
        /// The file.
        path: PathBuf,
        /// 1-based line number.
        line: u64,
        /// The column: `'name'` with a header, `index N` (0-based) without.
        column: String,
        /// The field as written.
        value: String,
    },
    /// A CSV feature is NaN, infinite, or too large for f32.
    #[error("{}: line {line}, column {column}: {} (features must be finite f32 numbers)", path.display(), crate::echo::text(value))]
    NotFiniteCsv {
        /// The file.
        path: PathBuf,
        /// 1-based line number.
        line: u64,
        /// The column: `'name'` with a header, `index N` (0-based) without.
        column: String,
        /// The field as written.
        value: String,
    },
    /// An `.npy` feature is NaN, infinite, or too large for f32.
    #[error("{}: row index {row}, column index {column}: {} (features must be finite f32 numbers)", path.display(), crate::echo::number(*value))]
    NotFiniteNpy {
        /// The file.
        path: PathBuf,
        /// 0-based row index, as numpy numbers it.
        row: usize,
        /// 0-based column index.
        column: usize,
        /// The value.
        value: f64,
    },
    /// A feature for an integer input path has a fractional part (or is NaN or infinite).
    #[error("{}: {place}: {value} is not a whole number (the {ty} input path takes whole numbers from {min} to {max})", path.display())]
    NotWhole {
        /// The file.
        path: PathBuf,
        /// Where: `line N, column C` (CSV) or `row index R, column index C` (`.npy`).
        place: String,
        /// The value, as written (cut when long).
        value: String,
        /// The input type's name (`i16`, `u8`).
        ty: &'static str,
        /// The type's smallest value.
        min: i64,
        /// The type's largest value.
        max: i64,
    },
    /// A whole feature outside the integer input type's range.
    #[error("{}: {place}: {value} is out of range for the {ty} input path ({min} to {max})", path.display())]
    OutOfRange {
        /// The file.
        path: PathBuf,
        /// Where: `line N, column C` (CSV) or `row index R, column index C` (`.npy`).
        place: String,
        /// The value, as written (cut when long).
        value: String,
        /// The input type's name (`i16`, `u8`).
        ty: &'static str,
        /// The type's smallest value.
        min: i64,
        /// The type's largest value.
        max: i64,
    },
    /// The label column given by name is not in the header.
    #[error("{}: no column named {name:?} for the labels; the header has {available}", path.display())]
    LabelColumnNotFound {
        /// The file.
        path: PathBuf,
        /// The name asked for.
        name: String,
        /// The header's column names, listed.
        available: String,
    },
    /// The label column given by index is past the last column.
    #[error("{}: label column index {index} is out of range: rows have {columns} columns (indices 0 to {})", path.display(), columns.saturating_sub(1))]
    LabelIndexOutOfRange {
        /// The file.
        path: PathBuf,
        /// The index asked for (0-based).
        index: usize,
        /// Columns per row.
        columns: usize,
    },
    /// A label column given by name, but the file is read without a header.
    #[error("{}: the label column is given by name ({name:?}) but the file is read without a header; give its 0-based index instead", path.display())]
    LabelNameWithoutHeader {
        /// The file.
        path: PathBuf,
        /// The name asked for.
        name: String,
    },
    /// Nothing is left for features once the label column is taken out.
    #[error("{}: no feature columns (the only column is the label column)", path.display())]
    NoFeatureColumns {
        /// The file.
        path: PathBuf,
    },
    /// The dataset's width is not what the model takes.
    #[error("{source_name}: {found} features per row, but the model takes {expected} inputs")]
    WrongWidth {
        /// Where the dataset came from.
        source_name: String,
        /// Features per row in the dataset.
        found: usize,
        /// Inputs the model takes.
        expected: usize,
    },
    /// An `.npy` file could not be read.
    #[error("{}", path.display())]
    Npy {
        /// The file.
        path: PathBuf,
        /// What went wrong.
        #[source]
        source: NpyArrayError,
    },
    /// An `.npy` array has a shape or element type that does not fit its role.
    #[error("{}: {message}", path.display())]
    NpyContent {
        /// The file.
        path: PathBuf,
        /// What is wrong, with the shape or type found.
        message: String,
    },
    /// The label array's length differs from the feature rows.
    #[error("{}: {labels} labels for {rows} feature rows", path.display())]
    LabelCount {
        /// The labels file.
        path: PathBuf,
        /// Labels in the file.
        labels: usize,
        /// Rows in the features file.
        rows: usize,
    },
    /// A label column given for a `.npy` features file, which has no columns by name.
    #[error("{} is a .npy file of features only; a label column applies to CSV files", path.display())]
    LabelColumnForNpy {
        /// The file.
        path: PathBuf,
    },
    /// A separate labels file given for a CSV, whose labels are one of its columns.
    #[error("{} is a CSV file; a separate labels file applies to .npy features (name the CSV's label column instead)", path.display())]
    LabelFileForCsv {
        /// The file.
        path: PathBuf,
    },
    /// A label is neither a class name nor a class index.
    #[error("data row {row} (1-based, header not counted): label {label:?} is {expected}")]
    UnknownLabel {
        /// 1-based data row.
        row: usize,
        /// The label as written.
        label: String,
        /// What labels may be.
        expected: String,
    },
}
