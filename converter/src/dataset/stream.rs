//! Rows from a file a chunk at a time, for commands that need not hold every row: a C-order
//! `.npy` file is decoded as its rows are asked for ([`super::npy_stream`]); a CSV file is read
//! once through to check every field (the whole-file loader's checks, in file order, so the
//! first bad field is the one reported) and count the rows and collect the labels, then again a
//! chunk of records at a time. A Fortran-order `.npy` array is read whole by
//! [`super::load_npy`] and handed out in chunks (the same rows, without the memory saving).
//! Labels are held whole (a few bytes per row).
use std::fs::File;
use std::io::BufReader;
use std::path::{Path, PathBuf};

use super::csv_load::{finite_f32, CsvReader};
use super::load_file::misplaced_options;
use super::npy_load::load_labels_as;
use super::npy_stream::NpyRows;
use super::{load_npy, CsvOptions, Dataset, DatasetError, LoadOptions, RowLabels};

/// Records a CSV check pass reads at a time.
const CSV_CHECK_ROWS: usize = 4096;

type CsvFile = CsvReader<BufReader<File>, BufReader<File>>;

enum Inner {
    Npy(NpyRows),
    Csv(Box<CsvFile>),
    Held { data: Dataset, next: usize },
}

fn open_csv(path: &Path, opts: &CsvOptions) -> Result<CsvFile, DatasetError> {
    let open = || {
        File::open(path)
            .map(BufReader::new)
            .map_err(|source| DatasetError::Io {
                path: path.to_path_buf(),
                source,
            })
    };
    CsvReader::open(open()?, open()?, path, opts)
}

/// A file's rows, read a chunk at a time.
pub struct RowStream {
    inner: Inner,
    path: PathBuf,
    csv: CsvOptions,
    rows: usize,
    width: usize,
    source: String,
    labels: Option<RowLabels>,
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
    /// Opens the rows of `path` as [`super::load_file`] reads them (the same options, checks and
    /// errors; a `.npy` file's values are checked as their chunk is read).
    ///
    /// # Errors
    /// Those of [`super::load_file`].
    pub fn open(path: &Path, opts: &LoadOptions) -> Result<Self, DatasetError> {
        let csv = CsvOptions {
            label: opts.label.clone(),
            has_header: opts.has_header,
        };
        if misplaced_options(path, opts)? {
            let Some(npy) = NpyRows::open(path)? else {
                return Ok(Self::held(load_npy(path, opts.label_file.as_deref())?));
            };
            let labels = match &opts.label_file {
                None => None,
                Some(lp) => Some(load_labels_as(lp, npy.rows())?),
            };
            return Ok(RowStream {
                rows: npy.rows(),
                width: npy.width(),
                source: path.display().to_string(),
                labels,
                inner: Inner::Npy(npy),
                path: path.to_path_buf(),
                csv,
            });
        }
        let mut check = open_csv(path, &csv)?;
        let mut labels: Option<RowLabels> = None;
        while let Some(c) =
            check.next_chunk(CSV_CHECK_ROWS, &mut |t, at| finite_f32(t, at).map(|_| ()))?
        {
            if let Some(l) = c.labels {
                let table = labels.get_or_insert_with(RowLabels::default);
                l.iter().for_each(|x| table.push(x));
            }
        }
        if check.rows == 0 {
            return Err(DatasetError::NoDataRows {
                path: path.to_path_buf(),
            });
        }
        let reader = open_csv(path, &csv)?;
        Ok(RowStream {
            rows: check.rows,
            width: check.width,
            source: path.display().to_string(),
            labels,
            inner: Inner::Csv(Box::new(reader)),
            path: path.to_path_buf(),
            csv,
        })
    }

    /// The same rows from the start again (without the labels), for another pass.
    ///
    /// # Errors
    /// The file cannot be opened again, or has changed.
    pub fn reopen(&self) -> Result<Self, DatasetError> {
        let changed = || DatasetError::NpyContent {
            path: self.path.clone(),
            message: "the file changed while it was read".into(),
        };
        let inner = match &self.inner {
            Inner::Npy(_) => Inner::Npy(NpyRows::open(&self.path)?.ok_or_else(changed)?),
            Inner::Csv(_) => Inner::Csv(Box::new(open_csv(&self.path, &self.csv)?)),
            Inner::Held { data, .. } => Inner::Held {
                data: data.clone(),
                next: 0,
            },
        };
        Ok(RowStream {
            inner,
            path: self.path.clone(),
            csv: self.csv.clone(),
            rows: self.rows,
            width: self.width,
            source: self.source.clone(),
            labels: None,
        })
    }

    /// The rows of a dataset already in memory, in chunks.
    pub fn held(mut data: Dataset) -> Self {
        RowStream {
            rows: data.rows,
            width: data.width,
            source: data.source.clone(),
            labels: data.labels.take().map(|l| l.into_iter().collect()),
            path: PathBuf::from(&data.source),
            csv: CsvOptions::default(),
            inner: Inner::Held { data, next: 0 },
        }
    }

    /// Whether the rows are read from the file as they are asked for (not held whole).
    pub fn streamed(&self) -> bool {
        !matches!(self.inner, Inner::Held { .. })
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
    pub fn take_labels(&mut self) -> Option<RowLabels> {
        self.labels.take()
    }

    /// The next rows, at most `max_rows` (at least one), without labels; `None` after the last.
    ///
    /// # Errors
    /// A value of a `.npy` file that is not finite in f32, or a read error.
    pub fn next_chunk(&mut self, max_rows: usize) -> Result<Option<Dataset>, DatasetError> {
        match &mut self.inner {
            Inner::Npy(r) => r.next_chunk(max_rows),
            Inner::Csv(r) => Ok(r.next_chunk(max_rows, &mut finite_f32)?.map(|c| Dataset {
                rows: c.rows,
                width: c.width,
                features: c.values,
                labels: None,
                source: self.source.clone(),
            })),
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
    use crate::dataset::load_file;
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
        assert_eq!(
            s.take_labels(),
            whole.labels.map(|l| l.into_iter().collect())
        );
        assert_eq!(all(s, 2), (whole.features.clone(), 3));

        let csv = dir.path().join("x.csv");
        std::fs::write(&csv, "a,b,y\n1,2,p\n\n3,4,q\r\n5,6,p\n").unwrap();
        let opts = LoadOptions {
            label: Some(crate::dataset::LabelColumn::Name("y".into())),
            ..LoadOptions::default()
        };
        let whole = load_file(&csv, &opts).unwrap();
        let mut s = RowStream::open(&csv, &opts).unwrap();
        assert!(s.streamed());
        assert_eq!((s.rows(), s.width()), (3, 2));
        assert_eq!(s.source(), whole.source);
        assert_eq!(
            s.take_labels(),
            whole.labels.map(|l| l.into_iter().collect())
        );
        let again = s.reopen().unwrap();
        assert_eq!(all(s, 2), (whole.features.clone(), 2));
        assert_eq!(all(again, 1), (whole.features, 3));
    }

    #[test]
    fn csv_errors_are_the_whole_file_loaders_first_error() {
        let dir = tempfile::tempdir().unwrap();
        let csv = dir.path().join("x.csv");
        let line = |e: &DatasetError| crate::error_line::one_line(e);
        for text in [
            "a,b\n1,2\n\n3,x\n4\n", // a bad number (line 4) before a ragged row (line 5)
            "a,b\n1,2\n3\n4,nan\n", // a ragged row before a NaN
            "1,2\n3,\"4\n5\"\n6,inf\n", // a quoted line break, then inf on line 4
            "a,b\n",                // a header only
            "",                     // nothing
        ] {
            std::fs::write(&csv, text).unwrap();
            let e = RowStream::open(&csv, &LoadOptions::default()).unwrap_err();
            let want = load_file(&csv, &LoadOptions::default()).unwrap_err();
            assert_eq!(line(&e), line(&want), "{text:?}");
        }
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
