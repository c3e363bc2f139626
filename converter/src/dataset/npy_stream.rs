//! Reading the feature rows of a C-order `.npy` file a chunk of rows at a time: the header is
//! parsed once, then `npyz` decodes the data from a buffered file as the rows are asked for, so
//! no more than one chunk of rows is in memory. A Fortran-order array (rows are not contiguous)
//! is read whole by [`super::load_npy`] instead.
//!
//! The rows, values and errors are those of [`super::load_npy`]: the same shape and type checks,
//! the same f64 → f32 conversion and the same finiteness error naming numpy's row and column.
use std::fs::File;
use std::io::{self, BufReader, Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};

use npyz::{DType, NpyFile, NpyHeader, Order, TypeChar};

use super::npy_array::{check_header_in, dtype_name, NpyArrayError, MAX_HEADER_LEN};
use super::{Dataset, DatasetError};

/// The decoded values, one at a time, as f64.
type Values = Box<dyn Iterator<Item = io::Result<f64>>>;

/// The rows of a C-order numeric `.npy` features file, read on demand.
pub struct NpyRows {
    path: PathBuf,
    rows: usize,
    width: usize,
    next_row: usize,
    header_bytes: u64,
    row_bytes: u64,
    values: Values,
}

impl std::fmt::Debug for NpyRows {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("NpyRows")
            .field("path", &self.path)
            .field("rows", &self.rows)
            .field("width", &self.width)
            .field("next_row", &self.next_row)
            .finish_non_exhaustive()
    }
}

fn values_of<T>(file: NpyFile<BufReader<File>>, to_f64: fn(T) -> f64) -> Result<Values, String>
where
    T: npyz::Deserialize + 'static,
{
    let reader = file.data::<T>().map_err(|e| e.to_string())?;
    Ok(Box::new(reader.map(move |r| r.map(to_f64))))
}

impl NpyRows {
    /// Opens `path` and checks its header; `Ok(None)` for a Fortran-order array (read it whole).
    ///
    /// # Errors
    /// Those of [`super::load_npy`] for the header, shape, element type and file length.
    pub fn open(path: &Path) -> Result<Option<Self>, DatasetError> {
        let npy = |source| DatasetError::Npy {
            path: path.to_path_buf(),
            source,
        };
        let content = |message: String| DatasetError::NpyContent {
            path: path.to_path_buf(),
            message,
        };
        let mut file = File::open(path).map_err(|e| npy(NpyArrayError::Io(e)))?;
        let file_len = file
            .metadata()
            .map_err(|e| npy(NpyArrayError::Io(e)))?
            .len();
        let mut prefix = Vec::new();
        (&mut file)
            .take(12 + MAX_HEADER_LEN)
            .read_to_end(&mut prefix)
            .map_err(|e| npy(NpyArrayError::Io(e)))?;
        check_header_in(&prefix, file_len).map_err(npy)?;
        let mut rest = prefix.as_slice();
        let header = NpyHeader::from_reader(&mut rest)
            .map_err(|e| npy(NpyArrayError::Header(e.to_string())))?;
        let header_bytes = (prefix.len() - rest.len()) as u64;
        let dtype = header.dtype();
        let name = dtype_name(&dtype);
        let shape: Vec<usize> = header
            .shape()
            .iter()
            .map(|&d| {
                usize::try_from(d).map_err(|_| {
                    npy(NpyArrayError::Header(format!(
                        "axis length {d} is too large"
                    )))
                })
            })
            .collect::<Result<_, _>>()?;
        let item_bytes = dtype.num_bytes().unwrap_or(usize::MAX) as u64;
        let expected = header.len().saturating_mul(item_bytes);
        let found = file_len.saturating_sub(header_bytes);
        if found < expected {
            return Err(npy(NpyArrayError::Truncated { expected, found }));
        }
        if header.order() == Order::Fortran && shape.len() > 1 {
            return Ok(None);
        }
        let ts = match &dtype {
            DType::Plain(ts) => ts.clone(),
            _ => return Err(npy(NpyArrayError::UnsupportedDtype(name))),
        };
        if matches!(ts.type_char(), TypeChar::UnicodeStr | TypeChar::ByteStr) {
            return Err(content(format!(
                "features must be numbers (float or integer), found {name}"
            )));
        }
        let (rows, width) = match shape.split_first() {
            Some((&rows, rest)) if !rest.is_empty() => (rows, rest.iter().product::<usize>()),
            _ => {
                return Err(content(format!(
                    "features must be a 2-D array (rows, features), found shape {shape:?}; \
                     for a single feature save x.reshape(-1, 1)"
                )))
            }
        };
        if rows == 0 {
            return Err(content(format!("no rows (shape {shape:?})")));
        }
        if width == 0 {
            return Err(content(format!("no features per row (shape {shape:?})")));
        }
        file.seek(SeekFrom::Start(header_bytes))
            .map_err(|e| npy(NpyArrayError::Io(e)))?;
        let data = NpyFile::with_header(header, BufReader::with_capacity(1 << 20, file));
        let unsupported = |_| npy(NpyArrayError::UnsupportedDtype(name.clone()));
        let values = match (ts.type_char(), ts.size_field()) {
            (TypeChar::Float, 4) => values_of::<f32>(data, f64::from),
            (TypeChar::Float, 8) => values_of::<f64>(data, |x| x),
            (TypeChar::Int, 1) => values_of::<i8>(data, f64::from),
            (TypeChar::Int, 2) => values_of::<i16>(data, f64::from),
            (TypeChar::Int, 4) => values_of::<i32>(data, f64::from),
            (TypeChar::Int, 8) => values_of::<i64>(data, |x| x as f64),
            (TypeChar::Uint, 1) => values_of::<u8>(data, f64::from),
            (TypeChar::Uint, 2) => values_of::<u16>(data, f64::from),
            (TypeChar::Uint, 4) => values_of::<u32>(data, f64::from),
            (TypeChar::Uint, 8) => values_of::<u64>(data, |x| x as f64),
            _ => Err(String::new()),
        }
        .map_err(unsupported)?;
        Ok(Some(NpyRows {
            path: path.to_path_buf(),
            rows,
            width,
            next_row: 0,
            header_bytes,
            row_bytes: (width as u64).saturating_mul(item_bytes),
            values,
        }))
    }

    /// Rows in the file.
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// Features per row.
    pub fn width(&self) -> usize {
        self.width
    }

    /// Bytes of the file read so far (header and the rows returned).
    pub fn bytes_read(&self) -> u64 {
        self.header_bytes
            .saturating_add(self.row_bytes.saturating_mul(self.next_row as u64))
    }

    /// The next rows, at most `max_rows` (at least one), as a dataset without labels; `None`
    /// after the last row.
    ///
    /// # Errors
    /// A value that is not finite in f32 ([`DatasetError::NotFiniteNpy`], with the file's row
    /// index), or a read error (the file shrank while it was read).
    pub fn next_chunk(&mut self, max_rows: usize) -> Result<Option<Dataset>, DatasetError> {
        let n = max_rows.max(1).min(self.rows - self.next_row);
        if n == 0 {
            return Ok(None);
        }
        let mut out = Vec::with_capacity(n * self.width);
        for k in 0..n * self.width {
            let v = match self.values.next() {
                Some(Ok(v)) => v,
                Some(Err(e)) => return Err(self.decode_error(e)),
                None => {
                    return Err(self.decode_error(io::Error::from(io::ErrorKind::UnexpectedEof)))
                }
            };
            let f = v as f32;
            if !f.is_finite() {
                return Err(DatasetError::NotFiniteNpy {
                    path: self.path.clone(),
                    row: self.next_row + k / self.width,
                    column: k % self.width,
                    value: v,
                });
            }
            out.push(f);
        }
        self.next_row += n;
        Ok(Some(Dataset {
            rows: n,
            width: self.width,
            features: out,
            labels: None,
            source: self.path.display().to_string(),
        }))
    }

    fn decode_error(&self, e: io::Error) -> DatasetError {
        DatasetError::Npy {
            path: self.path.clone(),
            source: NpyArrayError::Decode(e),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dataset::load_npy;
    use crate::dataset::npy_array::tests::write_npy;

    fn chunks(path: &Path, n: usize) -> Vec<Dataset> {
        let mut r = NpyRows::open(path).unwrap().unwrap();
        let mut out = Vec::new();
        while let Some(c) = r.next_chunk(n).unwrap() {
            out.push(c);
        }
        assert_eq!(r.bytes_read(), std::fs::metadata(path).unwrap().len());
        out
    }

    #[test]
    fn chunks_join_to_the_whole_file_for_every_type() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        let v: Vec<f64> = (0..21).map(|i| f64::from(i) * 0.5 - 3.0).collect();
        write_npy(&x, &v, &[7, 3], Order::C);
        let whole = load_npy(&x, None).unwrap();
        let parts = chunks(&x, 3);
        assert_eq!(parts.iter().map(|c| c.rows).collect::<Vec<_>>(), [3, 3, 1]);
        let joined: Vec<f32> = parts.iter().flat_map(|c| c.features.clone()).collect();
        assert_eq!(joined, whole.features);
        let u: Vec<u16> = (0..12).collect();
        write_npy(&x, &u, &[3, 2, 2], Order::C);
        let parts = chunks(&x, 2);
        assert_eq!(parts[0].width, 4);
        let joined: Vec<f32> = parts.iter().flat_map(|c| c.features.clone()).collect();
        assert_eq!(joined, load_npy(&x, None).unwrap().features);
    }

    #[test]
    fn fortran_order_is_left_to_the_whole_file_reader() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        write_npy(&x, &[1.0f32, 2.0, 3.0, 4.0], &[2, 2], Order::Fortran);
        assert!(NpyRows::open(&x).unwrap().is_none());
    }

    fn line(e: &DatasetError) -> String {
        crate::error_line::one_line(e)
    }

    #[test]
    fn errors_match_the_whole_file_reader() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.npy");
        write_npy(&x, &[1.0f32, 2.0, 3.0, f32::NAN], &[2, 2], Order::C);
        let mut r = NpyRows::open(&x).unwrap().unwrap();
        assert!(r.next_chunk(1).unwrap().is_some());
        let e = r.next_chunk(1).unwrap_err();
        assert_eq!(line(&e), line(&load_npy(&x, None).unwrap_err()));
        // A truncated file is refused before any row is read, as the whole-file reader does.
        write_npy(&x, &[1.0f32; 8], &[4, 2], Order::C);
        let bytes = std::fs::read(&x).unwrap();
        std::fs::write(&x, &bytes[..bytes.len() - 5]).unwrap();
        let e = NpyRows::open(&x).unwrap_err();
        assert_eq!(line(&e), line(&load_npy(&x, None).unwrap_err()));
        assert!(line(&e).contains("truncated"), "{e}");
        for (shape, data) in [(vec![3u64], 3usize), (vec![0, 2], 0)] {
            write_npy(&x, &vec![1.0f32; data], &shape, Order::C);
            let e = NpyRows::open(&x).unwrap_err();
            assert_eq!(line(&e), line(&load_npy(&x, None).unwrap_err()));
        }
    }
}
