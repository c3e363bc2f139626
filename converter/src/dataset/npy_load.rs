//! Loading feature rows (and labels) from `.npy` arrays saved with `numpy.save`.

use std::path::Path;

use super::npy_array::{read_npy, NpyArray, NpyValues};
use super::{Dataset, DatasetError};

/// Loads a features array and, optionally, a labels array.
///
/// Features: shape `(rows, features)` of float32, float64 or any integer type; more axes are
/// flattened per row in C order. Labels: shape `(rows,)` (or `(rows, 1)`) of integers or strings.
/// Values must be finite and fit in f32.
pub fn load_npy(features: &Path, labels: Option<&Path>) -> Result<Dataset, DatasetError> {
    let (rows, width, arr) = read_features(features)?;
    let values = arr
        .values
        .number_iter()
        .ok_or_else(|| not_numbers(features, &arr))?;
    let mut out = Vec::with_capacity(rows * width);
    for (k, v) in values.enumerate() {
        let f = v as f32;
        if !f.is_finite() {
            return Err(DatasetError::NotFiniteNpy {
                path: features.to_path_buf(),
                row: k / width,
                column: k % width,
                value: v,
            });
        }
        out.push(f);
    }
    let labels = match labels {
        None => None,
        Some(lp) => Some(load_labels(lp, rows)?),
    };
    Ok(Dataset {
        rows,
        width,
        features: out,
        labels,
        source: features.display().to_string(),
    })
}

/// The error for a features array of strings.
pub(super) fn not_numbers(path: &Path, arr: &NpyArray) -> DatasetError {
    DatasetError::NpyContent {
        path: path.to_path_buf(),
        message: format!(
            "features must be numbers (float or integer), found {}",
            arr.dtype
        ),
    }
}

/// Reads a features array: rows, features per row (the product of the other axes), the array.
pub(super) fn read_features(path: &Path) -> Result<(usize, usize, NpyArray), DatasetError> {
    let content = |message: String| DatasetError::NpyContent {
        path: path.to_path_buf(),
        message,
    };
    let arr = read_npy(path).map_err(|source| DatasetError::Npy {
        path: path.to_path_buf(),
        source,
    })?;
    let (rows, width) = match arr.shape.split_first() {
        Some((&rows, rest)) if !rest.is_empty() => (rows, rest.iter().product::<usize>()),
        _ => {
            return Err(content(format!(
                "features must be a 2-D array (rows, features), found shape {:?}; \
                 for a single feature save x.reshape(-1, 1)",
                arr.shape
            )))
        }
    };
    if rows == 0 {
        return Err(content(format!("no rows (shape {:?})", arr.shape)));
    }
    if width == 0 {
        return Err(content(format!(
            "no features per row (shape {:?})",
            arr.shape
        )));
    }
    Ok((rows, width, arr))
}

/// Reads a 1-D label array of integers or strings, `rows` long.
pub(super) fn load_labels(path: &Path, rows: usize) -> Result<Vec<String>, DatasetError> {
    load_labels_as(path, rows)
}

/// [`load_labels`] into any collection of labels (a [`super::RowLabels`] keeps each distinct
/// label once).
pub(super) fn load_labels_as<C: FromIterator<String>>(
    path: &Path,
    rows: usize,
) -> Result<C, DatasetError> {
    let arr = read_npy(path).map_err(|source| DatasetError::Npy {
        path: path.to_path_buf(),
        source,
    })?;
    let n = match arr.shape.as_slice() {
        [n] | [n, 1] => *n,
        other => {
            return Err(DatasetError::NpyContent {
                path: path.to_path_buf(),
                message: format!("labels must be a 1-D array (rows,), found shape {other:?}"),
            })
        }
    };
    let labels: C = match arr.values {
        NpyValues::Int(v) => v.iter().map(i64::to_string).collect(),
        NpyValues::UInt(v) => v.iter().map(u64::to_string).collect(),
        NpyValues::Str(v) => v.into_iter().collect(),
        NpyValues::F32(_) | NpyValues::F64(_) => {
            return Err(DatasetError::NpyContent {
                path: path.to_path_buf(),
                message: format!(
                "labels must be integers or strings, found {}; save y.astype(int) or y.astype(str)",
                arr.dtype
            ),
            })
        }
    };
    if n != rows {
        return Err(DatasetError::LabelCount {
            path: path.to_path_buf(),
            labels: n,
            rows,
        });
    }
    Ok(labels)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dataset::npy_array::tests::write_npy;
    use npyz::Order;

    #[test]
    fn f64_features_with_int_labels() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        let y = dir.path().join("y.npy");
        write_npy(&x, &[0.5f64, 1.5, 2.5, 3.5, 4.5, 5.5], &[3, 2], Order::C);
        write_npy(&y, &[2i64, 0, 1], &[3], Order::C);
        let d = load_npy(&x, Some(&y)).unwrap();
        assert_eq!((d.rows, d.width), (3, 2));
        assert_eq!(d.row(2), &[4.5, 5.5]);
        assert_eq!(d.labels, Some(vec!["2".into(), "0".into(), "1".into()]));
        assert_eq!(d.source, x.display().to_string());
    }

    #[test]
    fn fortran_order_int_features_and_string_labels() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        // [[1,2],[3,4],[5,6]] stored column-major.
        write_npy(&x, &[1u8, 3, 5, 2, 4, 6], &[3, 2], Order::Fortran);
        let y = dir.path().join("y.npy");
        let names = vec!["a".to_string(), "bb".to_string(), "c".to_string()];
        let mut buf = Vec::new();
        {
            use npyz::WriterBuilder;
            let dtype = npyz::DType::Plain("<U2".parse().unwrap());
            let mut w = npyz::WriteOptions::<String>::new()
                .dtype(dtype)
                .shape(&[3])
                .writer(&mut buf)
                .begin_nd()
                .unwrap();
            w.extend(names.iter().cloned()).unwrap();
            w.finish().unwrap();
        }
        std::fs::write(&y, buf).unwrap();
        let d = load_npy(&x, Some(&y)).unwrap();
        assert_eq!(d.features, vec![1.0, 2.0, 3.0, 4.0, 5.0, 6.0]);
        assert_eq!(d.labels, Some(names));
    }

    #[test]
    fn three_axes_flatten_per_row() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        write_npy(
            &x,
            &(0..8).map(|v| v as f32).collect::<Vec<_>>(),
            &[2, 2, 2],
            Order::C,
        );
        let d = load_npy(&x, None).unwrap();
        assert_eq!((d.rows, d.width), (2, 4));
        assert_eq!(d.row(1), &[4.0, 5.0, 6.0, 7.0]);
    }

    #[test]
    fn one_d_features_are_rejected() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        write_npy(&x, &[1.0f32, 2.0], &[2], Order::C);
        let e = load_npy(&x, None).unwrap_err().to_string();
        assert!(
            e.contains("2-D array (rows, features), found shape [2]"),
            "{e}"
        );
    }

    #[test]
    fn nan_feature_names_row_and_column() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        write_npy(&x, &[1.0f32, 2.0, 3.0, f32::NAN], &[2, 2], Order::C);
        let e = load_npy(&x, None).unwrap_err();
        assert!(
            matches!(
                e,
                DatasetError::NotFiniteNpy {
                    row: 1,
                    column: 1,
                    ..
                }
            ),
            "{e}"
        );
        assert!(
            e.to_string().contains("row index 1, column index 1: NaN"),
            "{e}"
        );
    }

    #[test]
    fn f64_too_large_for_f32_is_rejected() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        write_npy(&x, &[1e300f64, 2.0], &[1, 2], Order::C);
        assert!(matches!(
            load_npy(&x, None),
            Err(DatasetError::NotFiniteNpy {
                row: 0,
                column: 0,
                ..
            })
        ));
    }

    #[test]
    fn label_count_and_type_checked() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        write_npy(&x, &[1.0f32, 2.0], &[2, 1], Order::C);
        let y = dir.path().join("y.npy");
        write_npy(&y, &[1i32, 0, 1], &[3], Order::C);
        let e = load_npy(&x, Some(&y)).unwrap_err().to_string();
        assert!(e.ends_with("3 labels for 2 feature rows"), "{e}");
        write_npy(&y, &[1.0f64, 0.0], &[2], Order::C);
        let e = load_npy(&x, Some(&y)).unwrap_err().to_string();
        assert!(
            e.contains("labels must be integers or strings, found float64"),
            "{e}"
        );
        write_npy(&y, &[1i32, 0], &[2, 1], Order::C);
        assert_eq!(
            load_npy(&x, Some(&y)).unwrap().labels,
            Some(vec!["1".into(), "0".into()])
        );
        write_npy(&y, &[1i32, 0], &[1, 2], Order::C);
        assert!(load_npy(&x, Some(&y))
            .unwrap_err()
            .to_string()
            .contains("1-D"));
    }

    #[test]
    fn bool_features_and_missing_files() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        write_npy(&x, &[true, false], &[1, 2], Order::C);
        let e = load_npy(&x, None).unwrap_err();
        assert!(matches!(e, DatasetError::Npy { .. }), "{e}");
        let missing = dir.path().join("none.npy");
        assert!(matches!(
            load_npy(&missing, None),
            Err(DatasetError::Npy { .. })
        ));
    }

    #[test]
    fn empty_rows_rejected() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        write_npy::<f32>(&x, &[], &[0, 3], Order::C);
        assert!(load_npy(&x, None)
            .unwrap_err()
            .to_string()
            .contains("no rows"));
    }
}
