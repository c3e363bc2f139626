//! Geometry of the [`WeightLayout::Nibble4x4`](crate::wire::format::WeightLayout::Nibble4x4)
//! weight layout (`FORMAT.md` §3.5): int4 weights, two per byte, shared by the reader, the
//! kernels and the packer.
//!
//! The matrix is padded to `R × C` weights (`R` = outputs, `C` = inputs, each rounded up to a
//! multiple of 4) and cut into blocks of 4 rows and groups of 4 inputs, as `Blocked4x4`
//! (`super::layout`). A group of a block is 8 bytes: bytes 0–3 hold rows 0 and 1 of the block
//! for inputs 0–3 of the group, bytes 4–7 rows 2 and 3; in each byte the even row is the low
//! nibble and the odd row the high nibble. So weight `(o, i)` sits in byte
//! `((o / 4) · (C / 4) + i / 4) · 8 + ((o % 4) / 2) · 4 + i % 4`, nibble `o % 2`.
//!
//! A nibble stores `w + 8` (excess-8, "offset binary"), `w` in `[−8, 7]`, so a byte read as an
//! unsigned number is `u = 16 · (w_hi + 8) + (w_lo + 8)`. That is what makes the kernels short:
//! `Σ u x` and `Σ (u mod 16) x` are two unsigned multiply-accumulates per byte (no sign
//! handling, no shifts of the weights), and the two rows follow as
//! `Σ w_lo x = Σ (u mod 16) x − 8 Σ x` and `Σ w_hi x = (Σ u x − Σ (u mod 16) x) / 16 − 8 Σ x`
//! (`super::super::dense::int4`). Padding weights are zero: the nibble 8, the byte `0x88`. The
//! data may be preceded by up to 3 zero bytes that align it within the blob.
pub use super::layout::{pad_for, padded, BLOCK_ROWS, GROUP, MAX_PAD};

/// Bytes of one group of one block: 4 rows × 4 inputs, two weights per byte.
pub const GROUP_BYTES: usize = BLOCK_ROWS * GROUP / 2;
/// The byte of two zero weights.
pub const ZERO_PAIR: u8 = 0x88;
/// Smallest int4 weight.
pub const MIN: i8 = -8;
/// Largest int4 weight.
pub const MAX: i8 = 7;

/// Bytes of the padded matrix: `padded(outputs) · padded(inputs) / 2`.
pub const fn bytes(inputs: usize, outputs: usize) -> usize {
    (padded(outputs) / 2).saturating_mul(padded(inputs))
}

/// The byte holding weight `(o, i)` among [`bytes`], and whether it is the high nibble;
/// `inputs` is the real input width.
pub const fn index(o: usize, i: usize, inputs: usize) -> (usize, bool) {
    let groups = padded(inputs) / GROUP;
    let byte = ((o / BLOCK_ROWS) * groups + i / GROUP) * GROUP_BYTES
        + ((o % BLOCK_ROWS) / 2) * GROUP
        + i % GROUP;
    (byte, o % 2 == 1)
}

/// The nibble of an int4 weight `w` in `[−8, 7]` (excess-8); `None` outside that range.
pub const fn encode(w: i8) -> Option<u8> {
    if w < MIN || w > MAX {
        None
    } else {
        Some((w + 8) as u8)
    }
}

/// The int4 weight of the nibble in the low 4 bits of `n`.
pub const fn decode(n: u8) -> i8 {
    (n & 0x0F) as i8 - 8
}

/// The weight `(o, i)` of the data (no alignment bytes); `None` past the end.
pub fn get(data: &[u8], o: usize, i: usize, inputs: usize) -> Option<i8> {
    let (at, high) = index(o, i, inputs);
    let b = *data.get(at)?;
    Some(decode(if high { b >> 4 } else { b }))
}

/// Splits a `Nibble4x4` field into its alignment bytes and its [`bytes`] of data; `None` if the
/// length is not that plus 0 to 3.
pub fn split(weights: &[u8], inputs: usize, outputs: usize) -> Option<(&[u8], &[u8])> {
    let pad = weights.len().checked_sub(bytes(inputs, outputs))?;
    if pad > MAX_PAD {
        return None;
    }
    weights.split_at_checked(pad)
}

/// Writes output-major int4 weights `w` (`outputs · inputs`, each in `[−8, 7]`) into `out`
/// ([`bytes`] long) in block order, zero padding. Returns `false` if a length is wrong or a
/// weight out of range (`out` is then unspecified).
pub fn pack(inputs: usize, outputs: usize, w: &[i8], out: &mut [u8]) -> bool {
    if w.len() != inputs.saturating_mul(outputs) || out.len() != bytes(inputs, outputs) {
        return false;
    }
    out.fill(ZERO_PAIR);
    for (k, &v) in w.iter().enumerate() {
        let (at, high) = index(k / inputs, k % inputs, inputs);
        let (Some(n), Some(d)) = (encode(v), out.get_mut(at)) else {
            return false;
        };
        *d = if high {
            (*d & 0x0F) | (n << 4)
        } else {
            (*d & 0xF0) | n
        };
    }
    true
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn index_hand_worked() {
        // 5 inputs → C = 8 (2 groups); 6 outputs → R = 8 (2 blocks): 8 · 8 / 2 bytes.
        assert_eq!(bytes(5, 6), 32);
        assert_eq!(bytes(784, 100), 392 * 100);
        assert_eq!(index(0, 0, 5), (0, false));
        assert_eq!(index(1, 0, 5), (0, true));
        assert_eq!(index(0, 3, 5), (3, false));
        assert_eq!(index(2, 1, 5), (5, false));
        assert_eq!(index(3, 3, 5), (7, true));
        assert_eq!(index(0, 4, 5), (8, false)); // second group of block 0
        assert_eq!(index(4, 0, 5), (16, false)); // block 1
        assert_eq!(index(7, 5, 5), (16 + 8 + 4 + 1, true));
    }

    #[test]
    fn index_is_a_bijection_onto_the_padded_nibbles() {
        for inputs in 1..=9 {
            for outputs in 1..=9 {
                let mut seen = vec![[false; 2]; bytes(inputs, outputs)];
                for o in 0..padded(outputs) {
                    for i in 0..padded(inputs) {
                        let (b, h) = index(o, i, inputs);
                        assert!(!seen[b][usize::from(h)], "{inputs}x{outputs} ({o}, {i})");
                        seen[b][usize::from(h)] = true;
                    }
                }
                assert!(seen.iter().all(|s| s[0] && s[1]));
            }
        }
    }

    #[test]
    fn packing_hand_worked() {
        // 2 outputs × 3 inputs: [[1, 2, 3], [-1, -8, 7]] → one group of one block.
        let w = [1i8, 2, 3, -1, -8, 7];
        let mut out = [0u8; 8];
        assert!(pack(3, 2, &w, &mut out));
        // Byte k: row 0 (low) w + 8, row 1 (high) w + 8; input 3 and rows 2, 3 are padding.
        assert_eq!(out, [0x79, 0x0A, 0xFB, 0x88, 0x88, 0x88, 0x88, 0x88]);
        for o in 0..2 {
            for i in 0..3 {
                assert_eq!(get(&out, o, i, 3), Some(w[o * 3 + i]));
            }
        }
        assert!(!pack(3, 2, &[1, 2, 3, -1, -9, 7], &mut out));
        assert!(!pack(3, 2, &w[..5], &mut out));
    }

    #[test]
    fn excess_8_and_split() {
        for w in MIN..=MAX {
            assert_eq!(encode(w).map(decode), Some(w));
        }
        assert_eq!(encode(0), Some(8));
        assert_eq!((encode(-9), encode(8)), (None, None));
        let field = [0u8; 3 + 8];
        assert_eq!(
            split(&field, 3, 2).map(|(p, d)| (p.len(), d.len())),
            Some((3, 8))
        );
        assert_eq!(split(&field[..7], 3, 2), None);
        assert_eq!(split(&[0u8; 12], 3, 2), None);
    }
}
