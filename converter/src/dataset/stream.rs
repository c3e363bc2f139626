//! Rows from a file a chunk at a time, for commands that need not hold every row: a C-order
//! `.npy` file is decoded as its rows are asked for ([`super::npy_stream`]); a CSV file or a
//! Fortran-order `.npy` array is read whole by [`super::load_file`] and handed out in chunks
//! (the same rows, without the memory saving). Labels are held whole either way (a few bytes per
//! row).
use std::path::Path;

use super::load_file::misplaced_options;
use super::npy_load::load_labels;
use super::npy_stream::NpyRows;
use super::{load_file, load_npy, Dataset, DatasetError, LoadOptions};

enum Inner {
    Npy(NpyRows),
    Held { data: Dataset, next: usize },
}

/// A file's rows, read a chunk at a time.
pub struct RowStream {
    inner: Inner,
    rows: usize,
    width: usize,
    source: String,
    labels: Option<Vec<String>>,
}

impl std::fmt::Debug for RowStream {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RowStream")
            .field("rows", &self.rows)
            .field("width", &self.width)
            .field("source", &self.source)
            .field("streamed", &self.streamed())
            .finish_non_exhaustive()
    }
}

impl RowStream {
    /// Opens the rows of `path` as [`load_file`] reads them (the same options, checks and
    /// errors; a `.npy` file's values are checked as their chunk is read).
    ///
    /// # Errors
    /// Those of [`load_file`].
    pub fn open(path: &Path, opts: &LoadOptions) -> Result<Self, DatasetError> {
        if misplaced_options(path, opts)? {
            let Some(npy) = NpyRows::open(path)? else {
                return Ok(Self::held(load_npy(path, opts.label_file.as_deref())?));
            };
            let labels = match &opts.label_file {
                None => None,
                Some(lp) => Some(load_labels(lp, npy.rows())?),
            };
            return Ok(RowStream {
                rows: npy.rows(),
                width: npy.width(),
                source: path.display().to_string(),
                labels,
                inner: Inner::Npy(npy),
            });
        }
        Ok(Self::held(load_file(path, opts)?))
    }

    /// The rows of a dataset already in memory, in chunks.
    pub fn held(mut data: Dataset) -> Self {
        RowStream {
            rows: data.rows,
            width: data.width,
            source: data.source.clone(),
            labels: data.labels.take(),
            inner: Inner::Held { data, next: 0 },
        }
    }

    /// Whether the rows are read from the file as they are asked for (not held whole).
    pub fn streamed(&self) -> bool {
        matches!(self.inner, Inner::Npy(_))
    }

    /// Rows in the file.
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// Features per row.
    pub fn width(&self) -> usize {
        self.width
    }

    /// Where the rows come from (the file name), for messages.
    pub fn source(&self) -> &str {
        &self.source
    }

    /// The rows' labels, as written (taken: a second call gives `None`).
    pub fn take_labels(&mut self) -> Option<Vec<String>> {
        self.labels.take()
    }

    /// The next rows, at most `max_rows` (at least one), without labels; `None` after the last.
    ///
    /// # Errors
    /// A value of a `.npy` file that is not finite in f32, or a read error.
    pub fn next_chunk(&mut self, max_rows: usize) -> Result<Option<Dataset>, DatasetError> {
        match &mut self.inner {
            Inner::Npy(r) => r.next_chunk(max_rows),
            Inner::Held { data, next } => {
                let n = max_rows.max(1).min(data.rows - *next);
                if n == 0 {
                    return Ok(None);
                }
                let w = data.width;
                let features = data
                    .features
                    .get(*next * w..(*next + n) * w)
                    .unwrap_or(&[])
                    .to_vec();
                *next += n;
                Ok(Some(Dataset {
                    rows: n,
                    width: w,
                    features,
                    labels: None,
                    source: data.source.clone(),
                }))
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dataset::npy_array::tests::write_npy;
    use npyz::Order;

    fn all(mut s: RowStream, n: usize) -> (Vec<f32>, usize) {
        let (mut v, mut chunks) = (Vec::new(), 0);
        while let Some(c) = s.next_chunk(n).unwrap() {
            assert!(c.rows <= n && c.labels.is_none());
            v.extend(c.features);
            chunks += 1;
        }
        (v, chunks)
    }

    #[test]
    fn npy_streams_csv_is_held_and_both_give_the_loaded_rows() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        let y = dir.path().join("y.npy");
        write_npy(
            &x,
            &(0..10).map(|i| i as f32).collect::<Vec<_>>(),
            &[5, 2],
            Order::C,
        );
        write_npy(&y, &[1i64, 0, 1, 1, 0], &[5], Order::C);
        let opts = LoadOptions {
            label_file: Some(y),
            ..LoadOptions::default()
        };
        let whole = load_file(&x, &opts).unwrap();
        let mut s = RowStream::open(&x, &opts).unwrap();
        assert!(s.streamed());
        assert_eq!((s.rows(), s.width()), (5, 2));
        assert_eq!(s.take_labels(), whole.labels);
        assert_eq!(all(s, 2), (whole.features.clone(), 3));

        let csv = dir.path().join("x.csv");
        std::fs::write(&csv, "a,b\n1,2\n3,4\n5,6\n").unwrap();
        let whole = load_file(&csv, &LoadOptions::default()).unwrap();
        let s = RowStream::open(&csv, &LoadOptions::default()).unwrap();
        assert!(!s.streamed());
        assert_eq!(s.source(), whole.source);
        assert_eq!(all(s, 2), (whole.features, 2));
    }

    #[test]
    fn misplaced_options_and_bad_labels_are_refused_as_the_loader_refuses_them() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        let y = dir.path().join("y.npy");
        write_npy(&x, &[1.0f32, 2.0], &[2, 1], Order::C);
        write_npy(&y, &[1i64, 0, 1], &[3], Order::C);
        let opts = LoadOptions {
            label_file: Some(y),
            ..LoadOptions::default()
        };
        let e = RowStream::open(&x, &opts).unwrap_err().to_string();
        assert_eq!(e, load_file(&x, &opts).unwrap_err().to_string());
        let opts = LoadOptions {
            label: Some(crate::dataset::LabelColumn::Index(0)),
            ..LoadOptions::default()
        };
        assert!(matches!(
            RowStream::open(&x, &opts),
            Err(DatasetError::LabelColumnForNpy { .. })
        ));
    }
}
