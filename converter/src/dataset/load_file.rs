//! One entry point for rows from a file: the extension chooses the reader (`.npy`: numpy
//! arrays, anything else: CSV), so `pack`, `vet` and every later command make that choice the
//! same way.
use std::path::{Path, PathBuf};

use super::{load_csv, load_npy, CsvOptions, Dataset, DatasetError, LabelColumn};

/// How to read a rows file; the fields that do not apply to its kind must be `None`.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct LoadOptions {
    /// CSV only: the label column.
    pub label: Option<LabelColumn>,
    /// CSV only: whether the first row is a header (`None`: detect).
    pub has_header: Option<bool>,
    /// `.npy` only: a 1-D `.npy` array of labels, one per row.
    pub label_file: Option<PathBuf>,
}

/// Whether `path` names a `.npy` file (by its extension, in any case).
pub fn is_npy(path: &Path) -> bool {
    path.extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("npy"))
}

/// Loads the rows of `path`: `.npy` features (and labels from `label_file`), or CSV.
///
/// # Errors
/// A label column for a `.npy` file or a label file for a CSV ([`DatasetError::LabelColumnForNpy`],
/// [`DatasetError::LabelFileForCsv`]: an option that would otherwise be silently ignored), and
/// every error of [`load_csv`] and [`load_npy`].
pub fn load_file(path: &Path, opts: &LoadOptions) -> Result<Dataset, DatasetError> {
    if misplaced_options(path, opts)? {
        return load_npy(path, opts.label_file.as_deref());
    }
    load_csv(
        path,
        &CsvOptions {
            label: opts.label.clone(),
            has_header: opts.has_header,
        },
    )
}

/// Whether `path` is a `.npy` file, after refusing the options that do not apply to its kind.
pub(super) fn misplaced_options(path: &Path, opts: &LoadOptions) -> Result<bool, DatasetError> {
    let npy = is_npy(path);
    if npy && opts.label.is_some() {
        return Err(DatasetError::LabelColumnForNpy {
            path: path.to_path_buf(),
        });
    }
    if !npy && opts.label_file.is_some() {
        return Err(DatasetError::LabelFileForCsv {
            path: path.to_path_buf(),
        });
    }
    Ok(npy)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn extension_chooses_the_reader_and_misplaced_options_are_refused() {
        let dir = tempfile::tempdir().unwrap();
        let csv = dir.path().join("r.CSV");
        std::fs::write(&csv, "a,b,label\n1,2,x\n3,4,y\n").unwrap();
        let d = load_file(
            &csv,
            &LoadOptions {
                label: Some(LabelColumn::Name("label".into())),
                ..LoadOptions::default()
            },
        )
        .unwrap();
        assert_eq!((d.rows, d.width), (2, 2));
        let e = load_file(
            &csv,
            &LoadOptions {
                label_file: Some(dir.path().join("l.npy")),
                ..LoadOptions::default()
            },
        )
        .unwrap_err();
        assert!(matches!(e, DatasetError::LabelFileForCsv { .. }), "{e}");
        let npy = dir.path().join("r.NPY");
        let e = load_file(
            &npy,
            &LoadOptions {
                label: Some(LabelColumn::Index(0)),
                ..LoadOptions::default()
            },
        )
        .unwrap_err();
        assert!(matches!(e, DatasetError::LabelColumnForNpy { .. }), "{e}");
        assert!(is_npy(&npy) && !is_npy(&csv));
    }
}
