//! `.npy` arrays (numpy's format, `numpy.lib.format`) in memory, written by npyz, for tests and
//! benchmarks that hand the converter's loaders a file.
use npyz::WriterBuilder;

/// The bytes of a C-order `.npy` array of `shape` holding `data` (numpy's dtype for `T`).
pub fn npy_bytes<T: npyz::AutoSerialize>(shape: &[u64], data: &[T]) -> Vec<u8> {
    let mut out = Vec::new();
    let mut w = npyz::WriteOptions::new()
        .default_dtype()
        .shape(shape)
        .writer(&mut out)
        .begin_nd()
        .expect("writing to a Vec cannot fail");
    for v in data {
        w.push(v).expect("writing to a Vec cannot fail");
    }
    w.finish().expect("writing to a Vec cannot fail");
    out
}

#[cfg(test)]
mod tests {
    #[test]
    fn reads_back_with_its_shape_and_values() {
        let b = super::npy_bytes(&[2, 1], &[1.5f32, -2.0]);
        assert!(b.starts_with(b"\x93NUMPY"));
        let f = npyz::NpyFile::new(&b[..]).unwrap();
        assert_eq!(f.shape(), [2, 1]);
        assert_eq!(f.into_vec::<f32>().unwrap(), [1.5, -2.0]);
        // The payload is the raw little-endian elements, last.
        assert!(b.ends_with(&[0, 0, 0xC0, 0x3F, 0, 0, 0, 0xC0]));
    }
}
