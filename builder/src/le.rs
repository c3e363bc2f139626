//! Typed values to the little-endian bytes the blob's tensors hold (`FORMAT.md` §3).

/// Little-endian bytes of `f32` values.
pub fn f32s(v: &[f32]) -> Vec<u8> {
    v.iter().flat_map(|x| x.to_le_bytes()).collect()
}

/// Little-endian bytes of `i32` values.
pub fn i32s(v: &[i32]) -> Vec<u8> {
    v.iter().flat_map(|x| x.to_le_bytes()).collect()
}

/// Little-endian bytes of `i64` values.
pub fn i64s(v: &[i64]) -> Vec<u8> {
    v.iter().flat_map(|x| x.to_le_bytes()).collect()
}

/// Bytes of `i8` values (two's complement).
pub fn i8s(v: &[i8]) -> Vec<u8> {
    v.iter().map(|&x| x as u8).collect()
}

#[cfg(test)]
mod tests {
    #[test]
    fn little_endian_bytes() {
        // 1.0f32 = 0x3F800000 (IEEE 754 binary32).
        assert_eq!(super::f32s(&[1.0]), [0, 0, 0x80, 0x3F]);
        assert_eq!(super::i32s(&[-2]), [0xFE, 0xFF, 0xFF, 0xFF]);
        assert_eq!(super::i64s(&[1 << 32]), [0, 0, 0, 0, 1, 0, 0, 0]);
        assert_eq!(super::i8s(&[-128, 127]), [0x80, 0x7F]);
    }
}
