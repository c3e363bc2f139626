//! Decoding of `TensorProto` values: from `raw_data` (little-endian) or from the typed fields
//! (`float_data`, `double_data`, `int32_data`, `int64_data`, `uint64_data`, `string_data`).
//! Errors are plain descriptions; callers add the node that reads the tensor.

use super::proto::{data_type as dt, TensorProto};

/// The values of a decoded tensor, widened to one type per family.
#[derive(Debug, Clone, PartialEq)]
pub enum TensorData {
    /// FLOAT and DOUBLE tensors (DOUBLE narrowed to f32).
    Float(Vec<f32>),
    /// Integer and BOOL tensors.
    Int(Vec<i64>),
    /// STRING tensors (UTF-8, invalid bytes replaced).
    Str(Vec<String>),
}

/// A decoded constant tensor.
#[derive(Debug, Clone, PartialEq)]
pub struct Tensor {
    /// Tensor name (may be empty for attribute tensors).
    pub name: String,
    /// Shape; empty for a scalar.
    pub dims: Vec<usize>,
    /// Values in row-major order; `dims.iter().product()` of them.
    pub data: TensorData,
}

impl Tensor {
    /// Number of elements.
    pub fn len(&self) -> usize {
        match &self.data {
            TensorData::Float(v) => v.len(),
            TensorData::Int(v) => v.len(),
            TensorData::Str(v) => v.len(),
        }
    }

    /// Float values, all finite, or a description of why not.
    pub fn finite_floats(&self) -> Result<&[f32], String> {
        match &self.data {
            TensorData::Float(v) => {
                if let Some((i, x)) = v.iter().enumerate().find(|(_, x)| !x.is_finite()) {
                    Err(format!(
                        "tensor '{}' has a non-finite value ({x}) at flat index {i}; supported: finite weights",
                        self.name
                    ))
                } else {
                    Ok(v)
                }
            }
            _ => Err(format!(
                "tensor '{}' is not a float tensor; supported: FLOAT or DOUBLE",
                self.name
            )),
        }
    }

    /// Integer values, or a description of why not.
    pub fn ints(&self) -> Result<&[i64], String> {
        match &self.data {
            TensorData::Int(v) => Ok(v),
            _ => Err(format!("tensor '{}' is not an integer tensor", self.name)),
        }
    }

    /// The values rendered as class labels: strings as they are, integers in decimal.
    pub fn labels(&self) -> Result<Vec<String>, String> {
        match &self.data {
            TensorData::Str(v) => Ok(v.clone()),
            TensorData::Int(v) => Ok(v.iter().map(|i| i.to_string()).collect()),
            TensorData::Float(_) => Err(format!(
                "class-label tensor '{}' is a float tensor; supported: STRING or integer labels",
                self.name
            )),
        }
    }

    /// Shape as text, for messages.
    pub fn shape_text(&self) -> String {
        format!("{:?}", self.dims)
    }
}

/// Number of elements of a shape, rejecting negative dims and overflow.
fn element_count(dims: &[i64]) -> Result<usize, String> {
    dims.iter().try_fold(1usize, |acc, &d| {
        let d =
            usize::try_from(d).map_err(|_| format!("negative dimension {d} in shape {dims:?}"))?;
        acc.checked_mul(d)
            .ok_or_else(|| format!("shape {dims:?} has too many elements"))
    })
}

/// Splits `raw` into `n` little-endian values of `N` bytes each.
fn raw_chunks<const N: usize, T>(
    raw: &[u8],
    n: usize,
    conv: impl Fn([u8; N]) -> T,
) -> Result<Vec<T>, String> {
    let want = n.checked_mul(N).ok_or("raw_data size overflows")?;
    if raw.len() != want {
        return Err(format!(
            "raw_data has {} bytes, the shape needs {n} elements of {N} bytes = {want}",
            raw.len()
        ));
    }
    Ok(raw
        .chunks_exact(N)
        .map(|c| {
            let mut a = [0u8; N];
            a.copy_from_slice(c);
            conv(a)
        })
        .collect())
}

/// Checks that a typed field holds exactly `n` values.
fn typed<T: Clone>(field: &[T], n: usize, field_name: &str) -> Result<Vec<T>, String> {
    if field.len() != n {
        return Err(format!(
            "{field_name} has {} values, the shape needs {n}",
            field.len()
        ));
    }
    Ok(field.to_vec())
}

/// Decodes a tensor. FLOAT, DOUBLE, the integer types, BOOL and STRING are supported.
pub fn decode(t: &TensorProto) -> Result<Tensor, String> {
    let name = t.name.clone().unwrap_or_default();
    if t.data_location == Some(1) || !t.external_data.is_empty() {
        return Err(format!(
            "tensor '{name}' keeps its data in an external file; supported: data stored inside the model"
        ));
    }
    let n = element_count(&t.dims).map_err(|e| format!("tensor '{name}': {e}"))?;
    let dims = t.dims.iter().map(|&d| d as usize).collect();
    let ty = t.data_type.unwrap_or(0);
    let raw = t.raw_data.as_deref().filter(|r| !r.is_empty() || n == 0);
    let data = decode_values(t, ty, n, raw)
        .map_err(|e| format!("tensor '{name}' ({} {:?}): {e}", dt::name(ty), t.dims))?;
    Ok(Tensor { name, dims, data })
}

fn decode_values(
    t: &TensorProto,
    ty: i32,
    n: usize,
    raw: Option<&[u8]>,
) -> Result<TensorData, String> {
    use TensorData::{Float, Int};
    Ok(match (ty, raw) {
        (dt::FLOAT, Some(r)) => Float(raw_chunks::<4, _>(r, n, f32::from_le_bytes)?),
        (dt::FLOAT, None) => Float(typed(&t.float_data, n, "float_data")?),
        // DOUBLE constants are narrowed: the model computes in f32.
        (dt::DOUBLE, Some(r)) => Float(raw_chunks::<8, _>(r, n, |b| f64::from_le_bytes(b) as f32)?),
        (dt::DOUBLE, None) => Float(typed(&t.double_data, n, "double_data")?.into_iter().map(|v| v as f32).collect()),
        (dt::INT64, Some(r)) => Int(raw_chunks::<8, _>(r, n, i64::from_le_bytes)?),
        (dt::INT64, None) => Int(typed(&t.int64_data, n, "int64_data")?),
        (dt::INT32, Some(r)) => Int(raw_chunks::<4, _>(r, n, |b| i64::from(i32::from_le_bytes(b)))?),
        (dt::INT16, Some(r)) => Int(raw_chunks::<2, _>(r, n, |b| i64::from(i16::from_le_bytes(b)))?),
        (dt::UINT16, Some(r)) => Int(raw_chunks::<2, _>(r, n, |b| i64::from(u16::from_le_bytes(b)))?),
        (dt::INT8, Some(r)) => Int(raw_chunks::<1, _>(r, n, |b| i64::from(i8::from_le_bytes(b)))?),
        (dt::UINT8 | dt::BOOL, Some(r)) => Int(raw_chunks::<1, _>(r, n, |b| i64::from(u8::from_le_bytes(b)))?),
        (dt::INT32 | dt::INT16 | dt::UINT16 | dt::INT8 | dt::UINT8 | dt::BOOL, None) => {
            Int(typed(&t.int32_data, n, "int32_data")?.into_iter().map(i64::from).collect())
        }
        (dt::UINT32, Some(r)) => Int(raw_chunks::<4, _>(r, n, |b| i64::from(u32::from_le_bytes(b)))?),
        (dt::UINT64, Some(r)) => {
            let v = raw_chunks::<8, _>(r, n, u64::from_le_bytes)?;
            Int(v.into_iter().map(|u| i64::try_from(u).map_err(|_| format!("UINT64 value {u} is too large"))).collect::<Result<_, _>>()?)
        }
        (dt::UINT32 | dt::UINT64, None) => {
            let v = typed(&t.uint64_data, n, "uint64_data")?;
            Int(v.into_iter().map(|u| i64::try_from(u).map_err(|_| format!("value {u} is too large"))).collect::<Result<_, _>>()?)
        }
        (dt::STRING, _) => TensorData::Str(
            typed(&t.string_data, n, "string_data")?
                .into_iter()
                .map(|b| String::from_utf8_lossy(&b).into_owned())
                .collect(),
        ),
        (other, _) => {
            return Err(format!(
                "data type {} ({other}) is not supported; supported: FLOAT, DOUBLE, integer, BOOL and STRING tensors",
                dt::name(other)
            ))
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn proto(dims: &[i64], ty: i32) -> TensorProto {
        TensorProto {
            dims: dims.to_vec(),
            data_type: Some(ty),
            name: Some("t".into()),
            ..Default::default()
        }
    }

    #[test]
    fn float_from_raw_data_is_little_endian() {
        let mut t = proto(&[2, 1], dt::FLOAT);
        // 1.0f32 = 0x3F800000, -2.5f32 = 0xC0200000 (IEEE 754 binary32).
        t.raw_data = Some(vec![0x00, 0x00, 0x80, 0x3F, 0x00, 0x00, 0x20, 0xC0]);
        let d = decode(&t).unwrap();
        assert_eq!(d.dims, vec![2, 1]);
        assert_eq!(d.data, TensorData::Float(vec![1.0, -2.5]));
    }

    #[test]
    fn float_from_float_data() {
        let mut t = proto(&[3], dt::FLOAT);
        t.float_data = vec![0.5, 1.5, -3.0];
        assert_eq!(
            decode(&t).unwrap().finite_floats().unwrap(),
            &[0.5, 1.5, -3.0]
        );
    }

    #[test]
    fn double_from_both_fields_is_narrowed() {
        let mut t = proto(&[2], dt::DOUBLE);
        t.double_data = vec![0.1, 2.0];
        assert_eq!(
            decode(&t).unwrap().data,
            TensorData::Float(vec![0.1f64 as f32, 2.0])
        );
        let mut r = proto(&[1], dt::DOUBLE);
        r.raw_data = Some(0.25f64.to_le_bytes().to_vec());
        assert_eq!(decode(&r).unwrap().data, TensorData::Float(vec![0.25]));
    }

    #[test]
    fn int32_and_int64_fields_and_raw() {
        let mut a = proto(&[2], dt::INT32);
        a.int32_data = vec![-1, 7];
        assert_eq!(decode(&a).unwrap().ints().unwrap(), &[-1, 7]);
        let mut b = proto(&[2], dt::INT64);
        b.int64_data = vec![-1, 784];
        assert_eq!(decode(&b).unwrap().ints().unwrap(), &[-1, 784]);
        let mut c = proto(&[2], dt::INT64);
        c.raw_data = Some([(-1i64).to_le_bytes(), 784i64.to_le_bytes()].concat());
        assert_eq!(decode(&c).unwrap().ints().unwrap(), &[-1, 784]);
        let mut d = proto(&[1], dt::INT32);
        d.raw_data = Some((-5i32).to_le_bytes().to_vec());
        assert_eq!(decode(&d).unwrap().ints().unwrap(), &[-5]);
    }

    #[test]
    fn strings_and_labels() {
        let mut t = proto(&[2], dt::STRING);
        t.string_data = vec![b"cat".to_vec(), b"dog".to_vec()];
        assert_eq!(decode(&t).unwrap().labels().unwrap(), vec!["cat", "dog"]);
        let mut i = proto(&[3], dt::INT64);
        i.int64_data = vec![0, 1, 10];
        assert_eq!(decode(&i).unwrap().labels().unwrap(), vec!["0", "1", "10"]);
    }

    #[test]
    fn scalar_has_one_element() {
        let mut t = proto(&[], dt::FLOAT);
        t.float_data = vec![255.0];
        let d = decode(&t).unwrap();
        assert!(d.dims.is_empty());
        assert_eq!(d.len(), 1);
    }

    #[test]
    fn wrong_sizes_and_types_are_described() {
        let mut t = proto(&[2, 2], dt::FLOAT);
        t.raw_data = Some(vec![0; 12]);
        let e = decode(&t).unwrap_err();
        assert!(
            e.contains("raw_data has 12 bytes") && e.contains("'t'"),
            "{e}"
        );
        let mut f = proto(&[3], dt::FLOAT);
        f.float_data = vec![1.0];
        assert!(decode(&f)
            .unwrap_err()
            .contains("float_data has 1 values, the shape needs 3"));
        let h = proto(&[1], dt::FLOAT16);
        assert!(decode(&h).unwrap_err().contains("FLOAT16"));
        let neg = proto(&[-1], dt::FLOAT);
        assert!(decode(&neg).unwrap_err().contains("negative dimension"));
        let huge = proto(&[i64::MAX, i64::MAX], dt::FLOAT);
        assert!(decode(&huge).unwrap_err().contains("too many elements"));
        let mut ext = proto(&[1], dt::FLOAT);
        ext.data_location = Some(1);
        assert!(decode(&ext).unwrap_err().contains("external file"));
    }

    #[test]
    fn non_finite_values_are_reported_with_index() {
        let mut t = proto(&[3], dt::FLOAT);
        t.float_data = vec![1.0, f32::NAN, 2.0];
        let e = decode(&t).unwrap().finite_floats().unwrap_err();
        assert!(e.contains("non-finite") && e.contains("index 1"), "{e}");
    }
}
