//! Reading one `.npy` array (as written by `numpy.save`) into a flat, C-order vector, whatever
//! its element type or axis order. Shared by the dataset loader and the plain model importer.

use std::path::Path;

use npyz::{DType, NpyFile, NpyHeader, Order, TypeChar};

/// Why a `.npy` file could not be read. The caller adds the file name.
#[derive(Debug, thiserror::Error)]
pub enum NpyArrayError {
    /// The file could not be opened or read.
    #[error("cannot read the file")]
    Io(#[source] std::io::Error),
    /// The header is not a valid `.npy` header.
    #[error("not a valid .npy file ({0})")]
    Header(String),
    /// The element type is not one this reader handles.
    #[error("unsupported element type {0} (use float32, float64, an integer type or strings)")]
    UnsupportedDtype(String),
    /// The header promises more data than the file holds.
    #[error(
        "the file is truncated: the header promises {expected} bytes of data but {found} follow"
    )]
    Truncated {
        /// Bytes of data the shape and element type call for.
        expected: u64,
        /// Bytes present after the header.
        found: u64,
    },
    /// The data could not be decoded.
    #[error("cannot decode the data")]
    Decode(#[source] std::io::Error),
}

/// The element values of an array, converted to C (row-major) order.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum NpyValues {
    /// `float32` elements.
    F32(Vec<f32>),
    /// `float64` elements.
    F64(Vec<f64>),
    /// Signed integer elements of any width.
    Int(Vec<i64>),
    /// Unsigned integer elements of any width.
    UInt(Vec<u64>),
    /// `str` (`U`) or `bytes` (`S`) elements.
    Str(Vec<String>),
}

/// A whole `.npy` array: shape, numpy's name for its element type, and values in C order.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct NpyArray {
    /// Length along each axis.
    pub shape: Vec<usize>,
    /// Numpy's name for the element type, such as `float32` or `<U7`.
    pub dtype: String,
    /// The values, in C (row-major) order even when the file is Fortran-ordered.
    pub values: NpyValues,
}

impl NpyValues {
    /// Values as `f64` when the elements are floats (float32 or float64), else `None`.
    pub fn floats(&self) -> Option<Vec<f64>> {
        match self {
            NpyValues::F32(v) => Some(v.iter().map(|&x| f64::from(x)).collect()),
            NpyValues::F64(v) => Some(v.clone()),
            _ => None,
        }
    }

    /// The values as `f64`, one at a time, for any numeric element type (integers converted),
    /// else `None`: without a second copy of a large array.
    pub fn number_iter(&self) -> Option<Box<dyn Iterator<Item = f64> + '_>> {
        match self {
            NpyValues::F32(v) => Some(Box::new(v.iter().map(|&x| f64::from(x)))),
            NpyValues::F64(v) => Some(Box::new(v.iter().copied())),
            NpyValues::Int(v) => Some(Box::new(v.iter().map(|&x| x as f64))),
            NpyValues::UInt(v) => Some(Box::new(v.iter().map(|&x| x as f64))),
            NpyValues::Str(_) => None,
        }
    }
}

/// Numpy's name for a dtype, for messages (`float32`, `int64`, `<U7`, ...).
pub(crate) fn dtype_name(dtype: &DType) -> String {
    match dtype {
        DType::Plain(ts) => {
            let bits = ts.size_field().saturating_mul(8);
            match ts.type_char() {
                TypeChar::Float => format!("float{bits}"),
                TypeChar::Int => format!("int{bits}"),
                TypeChar::Uint => format!("uint{bits}"),
                TypeChar::Bool => "bool".to_string(),
                TypeChar::Complex => format!("complex{bits}"),
                _ => ts.to_string(),
            }
        }
        other => other.descr(),
    }
}

/// Reads the `.npy` file at `path`.
pub(crate) fn read_npy(path: &Path) -> Result<NpyArray, NpyArrayError> {
    let bytes = std::fs::read(path).map_err(NpyArrayError::Io)?;
    parse_npy(&bytes)
}

/// Longest header accepted: numpy's own reader refuses headers over 10,000 bytes by default
/// (`numpy.lib.format`, `max_header_size`, recalled from memory) for the same reason as here.
pub(crate) const MAX_HEADER_LEN: u64 = 10_000;

/// Deepest bracket nesting accepted in the header text. A plain array's header nests 2 deep
/// (`{... 'shape': (3, 4), }`); a structured dtype a few more.
const MAX_HEADER_NESTING: usize = 8;

/// Checks the header before the `.npy` reader sees it (found by fuzzing `dataset_load`):
/// - the header length the preamble declares (a u16 at byte 8 in format 1.0, a u32 in 2.0 and
///   3.0) must fit in the file and in [`MAX_HEADER_LEN`]: the reader allocates that length
///   before reading, so a 56-byte file declaring a 3.6 GB header asked for 3.6 GB;
/// - brackets may nest at most [`MAX_HEADER_NESTING`] deep: the reader's header parser slows
///   down steeply with nesting (a 118-byte header nesting 37 deep took 14 s under the fuzzer).
fn check_header(bytes: &[u8]) -> Result<(), NpyArrayError> {
    check_header_in(bytes, bytes.len() as u64)
}

/// [`check_header`] on the first bytes of a file of `file_len` bytes (`bytes` holds at least the
/// preamble and, when the file has them, [`MAX_HEADER_LEN`] bytes after it).
pub(crate) fn check_header_in(bytes: &[u8], file_len: u64) -> Result<(), NpyArrayError> {
    if !bytes.starts_with(b"\x93NUMPY") {
        return Ok(()); // the reader reports the bad magic
    }
    let (declared, start): (Option<u64>, usize) = match bytes.get(6) {
        Some(1) => (
            bytes
                .get(8..10)
                .map(|b| u64::from(u16::from_le_bytes([b[0], b[1]]))),
            10,
        ),
        Some(2 | 3) => (
            bytes
                .get(8..12)
                .map(|b| u64::from(u32::from_le_bytes([b[0], b[1], b[2], b[3]]))),
            12,
        ),
        _ => return Ok(()), // the reader reports the unknown version
    };
    let Some(n) = declared else {
        return Ok(()); // too short for a length: the reader reports it
    };
    let follows = file_len.saturating_sub(start as u64);
    if n > follows {
        return Err(NpyArrayError::Header(format!(
            "the header is declared as {n} bytes but only {follows} follow"
        )));
    }
    if n > MAX_HEADER_LEN {
        return Err(NpyArrayError::Header(format!(
            "the header is {n} bytes; at most {MAX_HEADER_LEN} are accepted"
        )));
    }
    let text = bytes
        .get(start..start.saturating_add(n as usize).min(bytes.len()))
        .unwrap_or(&[]);
    let (mut depth, mut deepest) = (0usize, 0usize);
    for &c in text {
        match c {
            b'(' | b'[' | b'{' => {
                depth += 1;
                deepest = deepest.max(depth);
            }
            b')' | b']' | b'}' => depth = depth.saturating_sub(1),
            _ => {}
        }
    }
    if deepest > MAX_HEADER_NESTING {
        return Err(NpyArrayError::Header(format!(
            "the header nests brackets {deepest} deep; at most {MAX_HEADER_NESTING} are accepted"
        )));
    }
    Ok(())
}

/// Parses the bytes of a `.npy` file.
pub(crate) fn parse_npy(bytes: &[u8]) -> Result<NpyArray, NpyArrayError> {
    check_header(bytes)?;
    let mut rest = bytes;
    let header =
        NpyHeader::from_reader(&mut rest).map_err(|e| NpyArrayError::Header(e.to_string()))?;
    let dtype = header.dtype();
    let name = dtype_name(&dtype);
    let shape: Vec<usize> = header
        .shape()
        .iter()
        .map(|&d| {
            usize::try_from(d)
                .map_err(|_| NpyArrayError::Header(format!("axis length {d} is too large")))
        })
        .collect::<Result<_, _>>()?;
    let order = header.order();
    // Check the data length before decoding: the decoder reserves room for the whole array
    // up front, so an absurd header must not reach it.
    let item_bytes = dtype.num_bytes().unwrap_or(usize::MAX) as u64;
    let expected = header.len().saturating_mul(item_bytes);
    let found = rest.len() as u64;
    if found < expected {
        return Err(NpyArrayError::Truncated { expected, found });
    }
    let file = NpyFile::with_header(header, rest);
    let ts = match &dtype {
        DType::Plain(ts) => ts.clone(),
        _ => return Err(NpyArrayError::UnsupportedDtype(name)),
    };
    let values = match (ts.type_char(), ts.size_field()) {
        (TypeChar::Float, 4) => NpyValues::F32(decode::<f32>(file)?),
        (TypeChar::Float, 8) => NpyValues::F64(decode::<f64>(file)?),
        (TypeChar::Int, 1) => NpyValues::Int(widen(decode::<i8>(file)?)),
        (TypeChar::Int, 2) => NpyValues::Int(widen(decode::<i16>(file)?)),
        (TypeChar::Int, 4) => NpyValues::Int(widen(decode::<i32>(file)?)),
        (TypeChar::Int, 8) => NpyValues::Int(decode::<i64>(file)?),
        (TypeChar::Uint, 1) => NpyValues::UInt(widen(decode::<u8>(file)?)),
        (TypeChar::Uint, 2) => NpyValues::UInt(widen(decode::<u16>(file)?)),
        (TypeChar::Uint, 4) => NpyValues::UInt(widen(decode::<u32>(file)?)),
        (TypeChar::Uint, 8) => NpyValues::UInt(decode::<u64>(file)?),
        (TypeChar::UnicodeStr | TypeChar::ByteStr, _) => NpyValues::Str(decode::<String>(file)?),
        _ => return Err(NpyArrayError::UnsupportedDtype(name)),
    };
    let values = if order == Order::Fortran && shape.len() > 1 {
        match values {
            NpyValues::F32(v) => NpyValues::F32(fortran_to_c(&v, &shape)),
            NpyValues::F64(v) => NpyValues::F64(fortran_to_c(&v, &shape)),
            NpyValues::Int(v) => NpyValues::Int(fortran_to_c(&v, &shape)),
            NpyValues::UInt(v) => NpyValues::UInt(fortran_to_c(&v, &shape)),
            NpyValues::Str(v) => NpyValues::Str(fortran_to_c(&v, &shape)),
        }
    } else {
        values
    };
    Ok(NpyArray {
        shape,
        dtype: name,
        values,
    })
}

fn decode<T: npyz::Deserialize>(file: NpyFile<&[u8]>) -> Result<Vec<T>, NpyArrayError> {
    file.into_vec::<T>().map_err(NpyArrayError::Decode)
}

fn widen<T: Copy, U: From<T>>(v: Vec<T>) -> Vec<U> {
    v.into_iter().map(U::from).collect()
}

/// Reorders Fortran-order data (first axis fastest) into C order (last axis fastest).
fn fortran_to_c<T: Clone>(data: &[T], shape: &[usize]) -> Vec<T> {
    let total: usize = shape.iter().product();
    let mut out = Vec::with_capacity(total);
    // Fortran strides: stride[k] = product of shape[..k].
    let mut strides = Vec::with_capacity(shape.len());
    let mut acc = 1usize;
    for &d in shape {
        strides.push(acc);
        acc = acc.saturating_mul(d);
    }
    let mut index = vec![0usize; shape.len()];
    for _ in 0..total {
        let offset: usize = index.iter().zip(&strides).map(|(i, s)| i * s).sum();
        if let Some(v) = data.get(offset) {
            out.push(v.clone());
        }
        // Advance the C-order multi-index: last axis fastest.
        for (k, &d) in shape.iter().enumerate().rev() {
            if let Some(i) = index.get_mut(k) {
                *i += 1;
                if *i < d {
                    break;
                }
                *i = 0;
            }
        }
    }
    out
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use npyz::WriterBuilder;

    /// Writes `data` (C order) with the given shape and order into an in-memory `.npy`.
    pub(crate) fn npy_bytes<T: npyz::AutoSerialize + Clone>(
        data: &[T],
        shape: &[u64],
        order: Order,
    ) -> Vec<u8> {
        let mut buf = Vec::new();
        {
            let mut w = npyz::WriteOptions::<T>::new()
                .default_dtype()
                .shape(shape)
                .order(order)
                .writer(&mut buf)
                .begin_nd()
                .unwrap();
            w.extend(data.iter().cloned()).unwrap();
            w.finish().unwrap();
        }
        buf
    }

    /// Writes an in-memory `.npy` to `path`.
    pub(crate) fn write_npy<T: npyz::AutoSerialize + Clone>(
        path: &Path,
        data: &[T],
        shape: &[u64],
        order: Order,
    ) {
        std::fs::write(path, npy_bytes(data, shape, order)).unwrap();
    }

    #[test]
    fn reads_f32_c_order() {
        let a = parse_npy(&npy_bytes(
            &[1.0f32, 2.0, 3.0, 4.0, 5.0, 6.0],
            &[2, 3],
            Order::C,
        ))
        .unwrap();
        assert_eq!(a.shape, vec![2, 3]);
        assert_eq!(a.dtype, "float32");
        assert_eq!(a.values, NpyValues::F32(vec![1.0, 2.0, 3.0, 4.0, 5.0, 6.0]));
    }

    #[test]
    fn fortran_order_is_reordered_to_c() {
        // Stored column-major: the writer receives elements in storage order.
        // Matrix [[1,2,3],[4,5,6]] in Fortran order is stored as 1,4,2,5,3,6.
        let a = parse_npy(&npy_bytes(
            &[1.0f64, 4.0, 2.0, 5.0, 3.0, 6.0],
            &[2, 3],
            Order::Fortran,
        ))
        .unwrap();
        assert_eq!(a.values, NpyValues::F64(vec![1.0, 2.0, 3.0, 4.0, 5.0, 6.0]));
    }

    #[test]
    fn fortran_3d_reorder() {
        // shape (2,2,2): C value at (i,j,k) = 4i+2j+k; Fortran storage offset = i + 2j + 4k.
        let mut stored = vec![0i64; 8];
        for i in 0..2 {
            for j in 0..2 {
                for k in 0..2 {
                    stored[i + 2 * j + 4 * k] = (4 * i + 2 * j + k) as i64;
                }
            }
        }
        let a = parse_npy(&npy_bytes(&stored, &[2, 2, 2], Order::Fortran)).unwrap();
        assert_eq!(a.values, NpyValues::Int((0..8).collect()));
    }

    #[test]
    fn integer_types_widen() {
        let a = parse_npy(&npy_bytes(&[-3i16, 7], &[2], Order::C)).unwrap();
        assert_eq!(a.dtype, "int16");
        assert_eq!(
            a.values.number_iter().map(Iterator::collect::<Vec<_>>),
            Some(vec![-3.0, 7.0])
        );
        assert_eq!(a.values.floats(), None);
        let b = parse_npy(&npy_bytes(&[200u8, 1], &[2], Order::C)).unwrap();
        assert_eq!(b.values, NpyValues::UInt(vec![200, 1]));
    }

    #[test]
    fn bool_is_unsupported() {
        let e = parse_npy(&npy_bytes(&[true, false], &[2], Order::C)).unwrap_err();
        assert!(
            matches!(e, NpyArrayError::UnsupportedDtype(ref d) if d == "bool"),
            "{e}"
        );
    }

    #[test]
    fn truncated_data_is_reported() {
        let mut b = npy_bytes(&[1.0f32, 2.0, 3.0], &[3], Order::C);
        b.truncate(b.len() - 4);
        let e = parse_npy(&b).unwrap_err();
        assert!(
            matches!(
                e,
                NpyArrayError::Truncated {
                    expected: 12,
                    found: 8
                }
            ),
            "{e}"
        );
    }

    #[test]
    fn garbage_is_a_header_error() {
        let e = parse_npy(b"hello, world").unwrap_err();
        assert!(matches!(e, NpyArrayError::Header(_)), "{e}");
    }

    #[test]
    fn missing_file_is_io() {
        let e = read_npy(Path::new("/nonexistent/kinglet/x.npy")).unwrap_err();
        assert!(matches!(e, NpyArrayError::Io(_)), "{e}");
    }
}
