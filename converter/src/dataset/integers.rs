//! Rows of raw integers for the runtime's integer input paths (`Input::I16` counts,
//! `Input::U8` pixels): every feature must be a whole number inside the type's range, or the
//! load fails naming the row and the column. Nothing is rounded or clamped: the values a
//! firmware feeds its model are exactly the values written in the file.
//!
//! CSV fields are judged by their decimal text, exactly (`3`, `-12`, `3.0`, `1.2e1` are whole;
//! `2.5`, `1.0000000000000000001` are not), so no float rounding can make a value look whole.
//! `.npy` arrays of any integer type are range-checked; float arrays must hold whole values.
use std::path::Path;

use super::csv_load::{read_csv_with, FieldAt};
use super::load_file::misplaced_options;
use super::npy_array::NpyValues;
use super::npy_load::{load_labels, not_numbers, read_features};
use super::{CsvOptions, Dataset, DatasetError, LoadOptions};

/// An integer input type of the runtime.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IntegerType {
    /// Signed 16-bit counts (`Input::I16`).
    I16,
    /// Unsigned bytes (`Input::U8`).
    U8,
}

impl IntegerType {
    /// The type's Rust name: `i16`, `u8`.
    pub fn name(self) -> &'static str {
        match self {
            IntegerType::I16 => "i16",
            IntegerType::U8 => "u8",
        }
    }

    /// Smallest value.
    pub fn min(self) -> i64 {
        match self {
            IntegerType::I16 => i64::from(i16::MIN),
            IntegerType::U8 => 0,
        }
    }

    /// Largest value.
    pub fn max(self) -> i64 {
        match self {
            IntegerType::I16 => i64::from(i16::MAX),
            IntegerType::U8 => i64::from(u8::MAX),
        }
    }
}

/// The raw values, row-major.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum IntegerValues {
    /// `i16` counts.
    I16(Vec<i16>),
    /// `u8` bytes.
    U8(Vec<u8>),
}

/// Integer rows: the exact values, and the same values as an f32 [`Dataset`] (every `i16` and
/// `u8` is exact in f32) for the float side of a comparison.
#[derive(Debug, Clone, PartialEq)]
pub struct IntegerRows {
    /// The rows as f32 features, with the labels and the source name.
    pub data: Dataset,
    /// The same values in their integer type.
    pub values: IntegerValues,
}

/// What a decimal text is, as far as an integer path goes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Decimal {
    /// A whole number of at most 18 digits.
    Whole(i64),
    /// A whole number too large for the check (beyond every integer input type).
    Huge,
    /// Has a fractional part (or is NaN or infinite).
    Fractional,
    /// Not a number.
    NotANumber,
}

/// Judges `s` exactly from its digits. Hand-written rather than a decimal crate: the rule is
/// one predicate (no non-zero digit after the decimal point once the exponent is applied), and
/// Rust's own float parser already decides what counts as a number.
fn decimal(s: &str) -> Decimal {
    let Ok(v) = s.parse::<f64>() else {
        return Decimal::NotANumber;
    };
    if !v.is_finite() {
        // `inf`, `NaN` and overflowing exponents: Rust's parser accepts them as numbers.
        return Decimal::Fractional;
    }
    let (negative, body) = match s.as_bytes().first() {
        Some(b'-') => (true, s.get(1..).unwrap_or("")),
        Some(b'+') => (false, s.get(1..).unwrap_or("")),
        _ => (false, s),
    };
    let (mantissa, exponent) = match body.find(['e', 'E']) {
        Some(i) => (
            body.get(..i).unwrap_or(""),
            body.get(i + 1..).unwrap_or("0"),
        ),
        None => (body, "0"),
    };
    let (int_part, frac_part) = mantissa.split_once('.').unwrap_or((mantissa, ""));
    let mut digits: Vec<u8> = int_part.bytes().chain(frac_part.bytes()).collect();
    let significant = digits.iter().position(|&d| d != b'0');
    let Some(first) = significant else {
        return Decimal::Whole(0);
    };
    digits.drain(..first);
    let Ok(exp) = exponent.parse::<i64>() else {
        // An exponent beyond i64 with non-zero digits: vanishingly small or huge.
        return if exponent.starts_with('-') {
            Decimal::Fractional
        } else {
            Decimal::Huge
        };
    };
    let mut exp = exp.saturating_sub(frac_part.len() as i64);
    while digits.last() == Some(&b'0') {
        digits.pop();
        exp = exp.saturating_add(1);
    }
    if exp < 0 {
        return Decimal::Fractional;
    }
    if digits.len() as i64 + exp > 18 {
        return Decimal::Huge;
    }
    let mut n: i64 = 0;
    for d in digits {
        n = n * 10 + i64::from(d - b'0');
    }
    for _ in 0..exp {
        n *= 10;
    }
    Decimal::Whole(if negative { -n } else { n })
}

fn not_whole(path: &Path, place: String, value: String, ty: IntegerType) -> DatasetError {
    DatasetError::NotWhole {
        path: path.to_path_buf(),
        place,
        value,
        ty: ty.name(),
        min: ty.min(),
        max: ty.max(),
    }
}

fn out_of_range(path: &Path, place: String, value: String, ty: IntegerType) -> DatasetError {
    DatasetError::OutOfRange {
        path: path.to_path_buf(),
        place,
        value,
        ty: ty.name(),
        min: ty.min(),
        max: ty.max(),
    }
}

fn csv_place(at: &FieldAt<'_>) -> String {
    format!("line {}, column {}", at.line, at.column())
}

fn csv_field(text: &str, at: &FieldAt<'_>, ty: IntegerType) -> Result<i64, DatasetError> {
    let echo = || crate::echo::text(text);
    match decimal(text) {
        Decimal::Whole(v) if (ty.min()..=ty.max()).contains(&v) => Ok(v),
        Decimal::Whole(_) | Decimal::Huge => Err(out_of_range(at.path, csv_place(at), echo(), ty)),
        Decimal::Fractional => Err(not_whole(at.path, csv_place(at), echo(), ty)),
        Decimal::NotANumber => Err(DatasetError::NonNumeric {
            path: at.path.to_path_buf(),
            line: at.line,
            column: at.column(),
            value: text.to_string(),
        }),
    }
}

fn typed(values: Vec<i64>, ty: IntegerType) -> IntegerValues {
    // Every value was range-checked for `ty`.
    match ty {
        IntegerType::I16 => IntegerValues::I16(
            values
                .into_iter()
                .map(|v| i16::try_from(v).unwrap_or(0))
                .collect(),
        ),
        IntegerType::U8 => IntegerValues::U8(
            values
                .into_iter()
                .map(|v| u8::try_from(v).unwrap_or(0))
                .collect(),
        ),
    }
}

fn rows(values: Vec<i64>, ty: IntegerType, data: Dataset) -> IntegerRows {
    let features = values.iter().map(|&v| v as f32).collect();
    IntegerRows {
        data: Dataset { features, ..data },
        values: typed(values, ty),
    }
}

/// Loads a CSV file of whole numbers for `ty` (header and label column as [`super::load_csv`]).
pub fn load_csv_integers(
    path: &Path,
    opts: &CsvOptions,
    ty: IntegerType,
) -> Result<IntegerRows, DatasetError> {
    let bytes = std::fs::read(path).map_err(|source| DatasetError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let r = read_csv_with(&bytes, path, opts, |text, at| csv_field(text, at, ty))?;
    let data = Dataset {
        rows: r.rows,
        width: r.width,
        features: Vec::new(),
        labels: r.labels,
        source: path.display().to_string(),
    };
    Ok(rows(r.values, ty, data))
}

/// Loads a `.npy` features array of whole numbers for `ty` (any integer dtype, or float32 /
/// float64 holding whole values) and, optionally, its labels array.
pub fn load_npy_integers(
    features: &Path,
    labels: Option<&Path>,
    ty: IntegerType,
) -> Result<IntegerRows, DatasetError> {
    let (n_rows, width, arr) = read_features(features)?;
    let place = |k: usize| format!("row index {}, column index {}", k / width, k % width);
    let check = |k: usize, v: i128| {
        if (i128::from(ty.min())..=i128::from(ty.max())).contains(&v) {
            Ok(v as i64)
        } else {
            Err(out_of_range(features, place(k), v.to_string(), ty))
        }
    };
    let values: Vec<i64> = match &arr.values {
        NpyValues::Int(v) => v
            .iter()
            .enumerate()
            .map(|(k, &x)| check(k, i128::from(x)))
            .collect::<Result<_, _>>()?,
        NpyValues::UInt(v) => v
            .iter()
            .enumerate()
            .map(|(k, &x)| check(k, i128::from(x)))
            .collect::<Result<_, _>>()?,
        NpyValues::F32(_) | NpyValues::F64(_) => arr
            .values
            .floats()
            .unwrap_or_default()
            .into_iter()
            .enumerate()
            .map(|(k, x)| {
                let echo = || crate::echo::number(x);
                if !x.is_finite() || x.fract() != 0.0 {
                    Err(not_whole(features, place(k), echo(), ty))
                } else if x < ty.min() as f64 || x > ty.max() as f64 {
                    Err(out_of_range(features, place(k), echo(), ty))
                } else {
                    Ok(x as i64)
                }
            })
            .collect::<Result<_, _>>()?,
        NpyValues::Str(_) => return Err(not_numbers(features, &arr)),
    };
    let labels = match labels {
        None => None,
        Some(lp) => Some(load_labels(lp, n_rows)?),
    };
    let data = Dataset {
        rows: n_rows,
        width,
        features: Vec::new(),
        labels,
        source: features.display().to_string(),
    };
    Ok(rows(values, ty, data))
}

/// [`super::load_file`] for an integer path: `.npy` by extension, anything else CSV.
pub fn load_file_integers(
    path: &Path,
    opts: &LoadOptions,
    ty: IntegerType,
) -> Result<IntegerRows, DatasetError> {
    if misplaced_options(path, opts)? {
        return load_npy_integers(path, opts.label_file.as_deref(), ty);
    }
    load_csv_integers(
        path,
        &CsvOptions {
            label: opts.label.clone(),
            has_header: opts.has_header,
        },
        ty,
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dataset::csv_load::read_csv_with;
    use crate::dataset::npy_array::tests::write_npy;
    use npyz::Order;

    #[test]
    fn decimals_are_judged_exactly() {
        for (s, want) in [
            ("0", Decimal::Whole(0)),
            ("-0", Decimal::Whole(0)),
            ("0.000", Decimal::Whole(0)),
            ("+17", Decimal::Whole(17)),
            ("-32768", Decimal::Whole(-32768)),
            ("3.0", Decimal::Whole(3)),
            ("3.", Decimal::Whole(3)),
            ("1.2e1", Decimal::Whole(12)),
            ("1200e-2", Decimal::Whole(12)),
            // numpy.savetxt's default format for the integer 3.
            ("3.000000000000000000e+00", Decimal::Whole(3)),
            ("2.5", Decimal::Fractional),
            (".5", Decimal::Fractional),
            // Parses to exactly 1.0 in f64, but is not a whole number.
            ("1.0000000000000000001", Decimal::Fractional),
            ("1e-99999999999999999999", Decimal::Fractional),
            ("NaN", Decimal::Fractional),
            ("-inf", Decimal::Fractional),
            ("1e300", Decimal::Huge),
            ("1234567890123456789", Decimal::Huge),
            ("0e99999999999999999999", Decimal::Whole(0)),
            ("four", Decimal::NotANumber),
            ("", Decimal::NotANumber),
            ("1_0", Decimal::NotANumber),
        ] {
            assert_eq!(decimal(s), want, "{s:?}");
        }
    }

    fn csv(text: &str, ty: IntegerType) -> Result<Vec<i64>, DatasetError> {
        read_csv_with(
            text.as_bytes(),
            Path::new("px.csv"),
            &CsvOptions::default(),
            |t, at| csv_field(t, at, ty),
        )
        .map(|r| r.values)
    }

    #[test]
    fn csv_values_in_range_load_and_others_name_line_and_column() {
        assert_eq!(
            csv("a,b\n0,255\n3.0,1e2\n", IntegerType::U8).unwrap(),
            [0, 255, 3, 100]
        );
        assert_eq!(
            csv("-32768,32767\n", IntegerType::I16).unwrap(),
            [-32768, 32767]
        );
        let e = csv("a,b\n1,2\n3,2.5\n", IntegerType::U8).unwrap_err();
        assert_eq!(
            e.to_string(),
            "px.csv: line 3, column 'b': 2.5 is not a whole number (the u8 input path takes whole numbers from 0 to 255)"
        );
        let e = csv("a,b\n1,2\n3,256\n", IntegerType::U8).unwrap_err();
        assert_eq!(
            e.to_string(),
            "px.csv: line 3, column 'b': 256 is out of range for the u8 input path (0 to 255)"
        );
        let e = csv("-1,0\n", IntegerType::U8).unwrap_err().to_string();
        assert!(
            e.contains("line 1, column index 0: -1 is out of range"),
            "{e}"
        );
        let e = csv("40000\n", IntegerType::I16).unwrap_err().to_string();
        assert!(e.contains("(-32768 to 32767)"), "{e}");
        // A long field is echoed short.
        let long = format!("1,{}\n", "9".repeat(1000));
        let e = csv(&long, IntegerType::I16).unwrap_err().to_string();
        assert!(e.len() < 200 && e.contains("(1000 characters)"), "{e}");
        let e = csv("a,b\n1,x\n", IntegerType::I16).unwrap_err();
        assert!(matches!(e, DatasetError::NonNumeric { .. }), "{e}");
    }

    #[test]
    fn npy_integers_and_whole_floats_load_others_name_row_and_column() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("x.npy");
        write_npy(&p, &[0i16, 16, 255, 7], &[2, 2], Order::C);
        let r = load_npy_integers(&p, None, IntegerType::U8).unwrap();
        assert_eq!(r.values, IntegerValues::U8(vec![0, 16, 255, 7]));
        assert_eq!(r.data.features, [0.0, 16.0, 255.0, 7.0]);
        assert_eq!((r.data.rows, r.data.width), (2, 2));
        // Fortran order is read in C order, as the float loader does.
        write_npy(&p, &[1u8, 2, 3, 4], &[2, 2], Order::Fortran);
        let r = load_npy_integers(&p, None, IntegerType::I16).unwrap();
        assert_eq!(r.values, IntegerValues::I16(vec![1, 3, 2, 4]));
        write_npy(&p, &[1i64, -1], &[1, 2], Order::C);
        let e = load_npy_integers(&p, None, IntegerType::U8).unwrap_err();
        assert!(
            e.to_string()
                .ends_with("x.npy: row index 0, column index 1: -1 is out of range for the u8 input path (0 to 255)"),
            "{e}"
        );
        write_npy(&p, &[1.0f64, 2.0, 1e300, 0.5], &[2, 2], Order::C);
        let e = load_npy_integers(&p, None, IntegerType::I16).unwrap_err();
        assert!(
            e.to_string()
                .ends_with("row index 1, column index 0: 1e300 is out of range for the i16 input path (-32768 to 32767)"),
            "{e}"
        );
        write_npy(&p, &[1.0f32, 0.5], &[1, 2], Order::C);
        let e = load_npy_integers(&p, None, IntegerType::I16).unwrap_err();
        assert!(e.to_string().contains("0.5 is not a whole number"), "{e}");
        write_npy(&p, &[1.0f32, f32::NAN], &[1, 2], Order::C);
        let e = load_npy_integers(&p, None, IntegerType::U8).unwrap_err();
        assert!(e.to_string().contains("NaN is not a whole number"), "{e}");
        write_npy(&p, &[-32768.0f32, 32767.0], &[1, 2], Order::C);
        let r = load_npy_integers(&p, None, IntegerType::I16).unwrap();
        assert_eq!(r.values, IntegerValues::I16(vec![-32768, 32767]));
    }

    #[test]
    fn misplaced_options_are_refused_as_for_floats() {
        let dir = tempfile::tempdir().unwrap();
        let csv = dir.path().join("r.csv");
        std::fs::write(&csv, "a,label\n1,x\n").unwrap();
        let e = load_file_integers(
            &csv,
            &LoadOptions {
                label_file: Some(dir.path().join("l.npy")),
                ..LoadOptions::default()
            },
            IntegerType::U8,
        )
        .unwrap_err();
        assert!(matches!(e, DatasetError::LabelFileForCsv { .. }), "{e}");
        let r = load_file_integers(
            &csv,
            &LoadOptions {
                label: Some(crate::dataset::LabelColumn::Name("label".into())),
                ..LoadOptions::default()
            },
            IntegerType::U8,
        )
        .unwrap();
        assert_eq!(r.data.labels, Some(vec!["x".to_string()]));
        assert_eq!(r.values, IntegerValues::U8(vec![1]));
    }
}
