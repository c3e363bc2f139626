//! Little-endian element access over byte slices: no alignment assumptions, no casts.

/// Iterates the little-endian `f32` values in `bytes` (a trailing partial element is ignored;
/// validation guarantees there is none).
pub(crate) fn f32s(bytes: &[u8]) -> impl Iterator<Item = f32> + '_ {
    bytes
        .as_chunks::<4>()
        .0
        .iter()
        .map(|c| f32::from_le_bytes(*c))
}

/// Iterates the little-endian `i32` values in `bytes`.
pub(crate) fn i32s(bytes: &[u8]) -> impl Iterator<Item = i32> + '_ {
    bytes
        .as_chunks::<4>()
        .0
        .iter()
        .map(|c| i32::from_le_bytes(*c))
}

/// Iterates the little-endian `i64` values in `bytes`.
pub(crate) fn i64s(bytes: &[u8]) -> impl Iterator<Item = i64> + '_ {
    bytes
        .as_chunks::<8>()
        .0
        .iter()
        .map(|c| i64::from_le_bytes(*c))
}

/// The `i`-th little-endian `f32` in `bytes`, if present.
pub(crate) fn f32_at(bytes: &[u8], i: usize) -> Option<f32> {
    bytes
        .as_chunks::<4>()
        .0
        .get(i)
        .map(|c| f32::from_le_bytes(*c))
}

/// The `i`-th little-endian `i32` in `bytes`, if present.
pub(crate) fn i32_at(bytes: &[u8], i: usize) -> Option<i32> {
    bytes
        .as_chunks::<4>()
        .0
        .get(i)
        .map(|c| i32::from_le_bytes(*c))
}

/// The `i`-th little-endian `i64` in `bytes`, if present.
pub(crate) fn i64_at(bytes: &[u8], i: usize) -> Option<i64> {
    bytes
        .as_chunks::<8>()
        .0
        .get(i)
        .map(|c| i64::from_le_bytes(*c))
}

/// Writes `v` little-endian as the `i`-th `f32` of `bytes`; does nothing out of range.
pub(crate) fn put_f32(bytes: &mut [u8], i: usize, v: f32) {
    if let Some(c) = bytes.as_chunks_mut::<4>().0.get_mut(i) {
        *c = v.to_le_bytes();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_unaligned_little_endian() {
        // 1.0f32 = 0x3F800000, stored at an odd offset.
        let bytes = [0xAA, 0x00, 0x00, 0x80, 0x3F, 0x01, 0x00, 0x00, 0x80];
        assert_eq!(f32_at(&bytes[1..], 0), Some(1.0));
        assert_eq!(i32_at(&bytes[5..], 0), Some(i32::MIN + 1));
        assert_eq!(f32_at(&bytes[1..], 2), None);
        assert_eq!(f32s(&bytes[1..]).count(), 2);
    }

    #[test]
    fn writes_in_range_only() {
        let mut b = [0u8; 6];
        put_f32(&mut b, 0, -2.0);
        put_f32(&mut b, 1, 5.0); // out of range: ignored
        assert_eq!(b, [0, 0, 0, 0xC0, 0, 0]);
        assert_eq!(i64s(&[1, 0, 0, 0, 0, 0, 0, 0]).next(), Some(1));
        assert_eq!(i64_at(&[0xFF; 8], 0), Some(-1));
        assert_eq!(i32s(&[2, 0, 0, 0]).next(), Some(2));
    }
}
