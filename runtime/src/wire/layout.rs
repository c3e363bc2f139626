//! Geometry of the [`WeightLayout::Blocked4x4`](crate::wire::format::WeightLayout::Blocked4x4) weight
//! layout (`FORMAT.md` §3.1), shared by the reader, the kernels and the packer.
//!
//! The matrix is padded to `R × C` elements, `R` = outputs and `C` = inputs each rounded up to
//! a multiple of 4, and cut into blocks of 4 rows. A block holds, for each group of 4 inputs in
//! order, the 4 rows' 4 weights of that group: element `(o, i)` sits at
//! `((o / 4) · (C / 4) + i / 4) · 16 + (o % 4) · 4 + i % 4`. One 16-element run feeds 4 rows
//! with 4 inputs, so a kernel loads each input group once for 4 rows.
//!
//! int8 weights are stored excess-128 (the byte `w + 128`, "offset binary"), so that a Cortex-M0
//! can load them with one unsigned byte load; the kernels subtract `128 · Σ x` once per layer.
//! Padding elements are zero weights (the byte 128; `+0.0` for f32). The data may be preceded by
//! up to 3 zero bytes that a writer adds so that the data starts 4-byte aligned within the blob.

/// Rows per block.
pub const BLOCK_ROWS: usize = 4;
/// Inputs per group.
pub const GROUP: usize = 4;
/// Elements of one group of one block: 4 rows × 4 inputs.
pub const GROUP_ELEMS: usize = BLOCK_ROWS * GROUP;
/// The excess-128 byte of a zero int8 weight.
pub const ZERO_I8: u8 = 0x80;
/// Most alignment bytes a writer may put before the data.
pub const MAX_PAD: usize = 3;

/// `n` rounded up to a multiple of 4.
pub const fn padded(n: usize) -> usize {
    n.div_ceil(4).saturating_mul(4)
}

/// Elements of the padded matrix: `padded(outputs) · padded(inputs)`.
pub const fn elements(inputs: usize, outputs: usize) -> usize {
    padded(outputs).saturating_mul(padded(inputs))
}

/// Position of element `(o, i)` among [`elements`]; `inputs` is the real input width.
pub const fn index(o: usize, i: usize, inputs: usize) -> usize {
    let groups = padded(inputs) / GROUP;
    ((o / BLOCK_ROWS) * groups + i / GROUP) * GROUP_ELEMS + (o % BLOCK_ROWS) * GROUP + i % GROUP
}

/// The excess-128 byte of an int8 weight.
pub const fn encode_i8(w: i8) -> u8 {
    (w as u8) ^ 0x80
}

/// The int8 weight of an excess-128 byte.
pub const fn decode_i8(b: u8) -> i8 {
    (b ^ 0x80) as i8
}

/// Splits a blocked weight field into its alignment bytes and its data of `elements · elem_bytes`
/// bytes; `None` if the length is not that plus 0 to 3.
pub fn split(
    weights: &[u8],
    inputs: usize,
    outputs: usize,
    elem_bytes: usize,
) -> Option<(&[u8], &[u8])> {
    let data = elements(inputs, outputs).checked_mul(elem_bytes)?;
    let pad = weights.len().checked_sub(data)?;
    if pad > MAX_PAD {
        return None;
    }
    weights.split_at_checked(pad)
}

/// Writes output-major int8 weights `w` (`outputs · inputs`) into `out` (`elements` bytes) in
/// block order, excess-128, zero padding. Returns `false`, writing nothing, if a length is wrong.
pub fn block_i8(inputs: usize, outputs: usize, w: &[i8], out: &mut [u8]) -> bool {
    if w.len() != inputs.saturating_mul(outputs) || out.len() != elements(inputs, outputs) {
        return false;
    }
    out.fill(ZERO_I8);
    for (k, &v) in w.iter().enumerate() {
        if let Some(d) = out.get_mut(index(k / inputs, k % inputs, inputs)) {
            *d = encode_i8(v);
        }
    }
    true
}

/// Writes output-major f32 weights `w` into `out` (`4 · elements` bytes) in block order,
/// little-endian, `+0.0` padding. Returns `false`, writing nothing, if a length is wrong.
pub fn block_f32(inputs: usize, outputs: usize, w: &[f32], out: &mut [u8]) -> bool {
    if w.len() != inputs.saturating_mul(outputs) || out.len() != 4 * elements(inputs, outputs) {
        return false;
    }
    out.fill(0);
    for (k, &v) in w.iter().enumerate() {
        let at = 4 * index(k / inputs, k % inputs, inputs);
        if let Some(d) = out.get_mut(at..at + 4) {
            d.copy_from_slice(&v.to_le_bytes());
        }
    }
    true
}

/// The alignment bytes a writer puts before data that would otherwise start at blob offset
/// `offset`, so that it starts at a multiple of 4.
pub const fn pad_for(offset: usize) -> usize {
    (4 - offset % 4) % 4
}

/// The data (without alignment bytes) of a layer whose weight layout is aligned by a writer
/// (`Blocked4x4`, `Nibble4x4`); `None` for other layouts. `elem` is the element size of the
/// model's precision. A field of the wrong length gives the whole field.
pub fn aligned_data<'a>(l: &crate::wire::format::LayerDesc<'a>, elem: usize) -> Option<&'a [u8]> {
    let (n, m) = (l.inputs as usize, l.outputs as usize);
    let data = match l.layout {
        crate::wire::format::WeightLayout::OutputMajor => return None,
        crate::wire::format::WeightLayout::Blocked4x4 => split(l.weights, n, m, elem),
        crate::wire::format::WeightLayout::Nibble4x4 => crate::wire::nibble::split(l.weights, n, m),
    };
    Some(data.map_or(l.weights, |(_, d)| d))
}

/// For each layer of a parsed `blob`: the number of alignment bytes its `Blocked4x4` or `Nibble4x4` weight
/// field should have so that the data starts at a blob offset that is a multiple of 4 (`None`
/// for other layouts). A writer encodes, asks, re-encodes with these pads, and repeats until
/// nothing changes (earlier pads shift later layers).
pub fn wanted_pads(
    model: &crate::Model<'_>,
    blob: &[u8],
) -> [Option<usize>; crate::wire::format::MAX_LAYERS] {
    let mut pads = [None; crate::wire::format::MAX_LAYERS];
    let elem = model.precision().activation_bytes();
    for (slot, l) in pads.iter_mut().zip(model.layers()) {
        let Some(data) = aligned_data(l.desc, elem) else {
            continue;
        };
        let pad = l.desc.weights.len().saturating_sub(data.len());
        let field = (l.desc.weights.as_ptr() as usize).wrapping_sub(blob.as_ptr() as usize);
        *slot = Some((pad + pad_for(field + pad)) % 4);
    }
    pads
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn index_hand_worked() {
        // 5 inputs → C = 8 (2 groups); 6 outputs → R = 8 (2 blocks).
        assert_eq!(elements(5, 6), 64);
        assert_eq!(index(0, 0, 5), 0);
        assert_eq!(index(0, 3, 5), 3);
        assert_eq!(index(1, 0, 5), 4);
        assert_eq!(index(3, 3, 5), 15);
        assert_eq!(index(0, 4, 5), 16); // second group of block 0
        assert_eq!(index(2, 5, 5), 16 + 8 + 1);
        assert_eq!(index(4, 0, 5), 32); // block 1
        assert_eq!(index(5, 4, 5), 32 + 16 + 4);
    }

    #[test]
    fn index_is_a_bijection_onto_the_padded_matrix() {
        for inputs in 1..=9 {
            for outputs in 1..=9 {
                let mut seen = vec![false; elements(inputs, outputs)];
                for o in 0..padded(outputs) {
                    for i in 0..padded(inputs) {
                        let k = index(o, i, inputs);
                        assert!(!seen[k], "{inputs}x{outputs}: ({o}, {i}) collides");
                        seen[k] = true;
                    }
                }
                assert!(seen.iter().all(|&s| s));
            }
        }
    }

    #[test]
    fn blocking_hand_worked() {
        // 2 outputs × 3 inputs → one block of 4 rows × 4 inputs.
        let w = [1i8, 2, 3, -1, -2, -128];
        let mut out = [0u8; 16];
        assert!(block_i8(3, 2, &w, &mut out));
        let z = ZERO_I8;
        #[rustfmt::skip]
        let expected = [129, 130, 131, z, 127, 126, 0, z, z, z, z, z, z, z, z, z];
        assert_eq!(out, expected);
        assert!(!block_i8(3, 2, &w[..5], &mut out));
        let mut f = [0xFFu8; 64];
        assert!(block_f32(3, 2, &[1.0, 2.0, 3.0, 4.0, 5.0, 6.0], &mut f));
        assert_eq!(f[4 * 4..4 * 5], 4.0f32.to_le_bytes());
        assert_eq!(f[4 * 3..4 * 4], [0; 4]);
    }

    #[test]
    fn excess_128_and_split() {
        assert_eq!(encode_i8(0), ZERO_I8);
        assert_eq!(encode_i8(-128), 0);
        assert_eq!(encode_i8(127), 255);
        for w in i8::MIN..=i8::MAX {
            assert_eq!(decode_i8(encode_i8(w)), w);
        }
        let field = [0u8; 2 + 16];
        assert_eq!(
            split(&field, 3, 2, 1).map(|(p, d)| (p.len(), d.len())),
            Some((2, 16))
        );
        assert_eq!(split(&field[..15], 3, 2, 1), None);
        assert_eq!(split(&[0u8; 20], 3, 2, 1), None);
        assert_eq!(
            [pad_for(0), pad_for(1), pad_for(2), pad_for(3), pad_for(4)],
            [0, 3, 2, 1, 0]
        );
    }
}
