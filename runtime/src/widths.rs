//! The input and output widths of a blob, read at compile time: `const fn`s that walk the
//! postcard-encoded layer table (`FORMAT.md` §3) far enough to find them, so a firmware can
//! size its feature and score buffers from the blob it embeds, as it sizes the scratch buffer with
//! [`crate::scratch_bytes`]:
//!
//! ```
//! # const MODEL: &[u8] = &[0; 4]; // in firmware: kinglet_runtime::embed_blob!("model.kgl")
//! let mut scores = [0f32; kinglet_runtime::output_len(MODEL)];
//! let features = [0i16; kinglet_runtime::input_len(MODEL)];
//! # assert!(scores.is_empty() && features.is_empty());
//! ```
//!
//! They check nothing beyond what they read: bytes without a Kinglet header, or a table that
//! ends early, give 0. [`crate::Model::parse`] validates the blob, and `infer` checks every
//! buffer's length, so a buffer sized from a damaged blob is refused at run time, not overrun.
use crate::wire::header::HEADER_LEN;

/// Byte `i` of `b`, or `None` past the end (`slice::get` is not callable in a `const fn`).
#[allow(clippy::indexing_slicing)]
const fn at(b: &[u8], i: usize) -> Option<u8> {
    if i < b.len() {
        Some(b[i])
    } else {
        None
    }
}

/// A LEB128 varint (postcard's unsigned integers and lengths) at `i`: its value and the
/// offset after it.
const fn varint(b: &[u8], mut i: usize) -> Option<(u64, usize)> {
    let mut value = 0u64;
    let mut shift = 0;
    while shift < 64 {
        let Some(byte) = at(b, i) else {
            return None;
        };
        value |= ((byte & 0x7F) as u64) << shift;
        i += 1;
        if byte & 0x80 == 0 {
            return Some((value, i));
        }
        shift += 7;
    }
    None
}

/// Skips a byte string (varint length, then the bytes) at `i`.
const fn skip_bytes(b: &[u8], i: usize) -> Option<usize> {
    let Some((len, next)) = varint(b, i) else {
        return None;
    };
    if len > (b.len() - next) as u64 {
        return None;
    }
    Some(next + len as usize)
}

/// Skips `n` byte strings at `i`.
const fn skip_n_bytes(b: &[u8], mut i: usize, mut n: usize) -> Option<usize> {
    while n > 0 {
        let Some(next) = skip_bytes(b, i) else {
            return None;
        };
        i = next;
        n -= 1;
    }
    Some(i)
}

/// Skips an `Option` at `i` whose value is `strings` byte strings then `fixed` raw bytes.
const fn skip_option(b: &[u8], i: usize, strings: usize, fixed: usize) -> Option<usize> {
    match at(b, i) {
        Some(0) => Some(i + 1),
        Some(1) => match skip_n_bytes(b, i + 1, strings) {
            Some(next) if next + fixed <= b.len() => Some(next + fixed),
            _ => None,
        },
        _ => None,
    }
}

/// The last layer's `outputs` of the table in `b`, walking every layer.
const fn last_outputs(b: &[u8]) -> Option<u64> {
    if b.len() < HEADER_LEN || !matches!(b, [b'K', b'G', b'L', b'T', ..]) {
        return None;
    }
    // input_len, precision.
    let Some((_, i)) = varint(b, HEADER_LEN) else {
        return None;
    };
    let Some((_, i)) = varint(b, i) else {
        return None;
    };
    // scaler: offset, scale. input_quant: its tag (0 none, 1 int8, 2 int16), scale (f32),
    // zero point (i8), then int_mult, int_add, int_shift.
    let Some(i) = skip_option(b, i, 2, 0) else {
        return None;
    };
    let i = match at(b, i) {
        Some(0) => i + 1,
        Some(1 | 2) => match skip_n_bytes(b, i + 1 + 5, 3) {
            Some(next) => next,
            None => return None,
        },
        _ => return None,
    };
    let Some((layers, mut i)) = varint(b, i) else {
        return None;
    };
    if layers == 0 || layers > crate::wire::format::MAX_LAYERS as u64 {
        return None;
    }
    let mut k = 0;
    let mut outputs = 0;
    while k < layers {
        // inputs, outputs, activation (variant 2, Pointwise, is followed by its record: the
        // kind and zero point bytes, then the data), layout.
        let Some((_, next)) = varint(b, i) else {
            return None;
        };
        let Some((o, next)) = varint(b, next) else {
            return None;
        };
        let Some((activation, next)) = varint(b, next) else {
            return None;
        };
        let next = if activation == 2 {
            match skip_bytes(b, next + 2) {
                Some(after) => after,
                None => return None,
            }
        } else {
            next
        };
        let Some((_, next)) = varint(b, next) else {
            return None;
        };
        // weights, bias; quant: weight_scale, multiplier, shift, then output scale (f32) and
        // zero point (i8).
        let Some(next) = skip_n_bytes(b, next, 2) else {
            return None;
        };
        let Some(next) = skip_option(b, next, 3, 5) else {
            return None;
        };
        outputs = o;
        i = next;
        k += 1;
    }
    Some(outputs)
}

/// The raw input width of the blob's model (features per inference), read at compile time; 0
/// for bytes that do not start with a Kinglet header or end within the field.
pub const fn input_len(blob: &[u8]) -> usize {
    if blob.len() < HEADER_LEN || !matches!(blob, [b'K', b'G', b'L', b'T', ..]) {
        return 0;
    }
    match varint(blob, HEADER_LEN) {
        Some((v, _)) if v <= u32::MAX as u64 => v as usize,
        _ => 0,
    }
}

/// The number of scores one inference writes (the last layer's width; 1 for a sigmoid
/// model), read at compile time by walking the layer table; 0 for bytes that do not start
/// with a Kinglet header or whose table ends early.
pub const fn output_len(blob: &[u8]) -> usize {
    match last_outputs(blob) {
        Some(v) if v <= u32::MAX as u64 => v as usize,
        _ => 0,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Model;

    const DIGITS: &[u8] = crate::embed_blob!("../../firmware-example/models/digits.kgl");
    const VIBRATION: &[u8] = crate::embed_blob!("../../tests/fixtures/blobs/v2-vibration-int8.kgl");
    const VIB_F32: &[u8] = crate::embed_blob!("../../tests/fixtures/blobs/v1-vibration-f32.kgl");
    /// Three layers, two of them with a pointwise tanh record (format version 4).
    const TANH: &[u8] = crate::embed_blob!("../../firmware-example/models/tanh_digits_float.kgl");

    #[test]
    fn widths_in_a_const_context_size_buffers() {
        // The digits model: 64 pixels in, 10 scores out (examples/digits).
        const IN: usize = input_len(DIGITS);
        const OUT: usize = output_len(DIGITS);
        let features = [0f32; IN];
        let scores = [0f32; OUT];
        assert_eq!((features.len(), scores.len()), (64, 10));
    }

    #[test]
    fn agree_with_the_parsed_model_on_every_committed_blob() {
        let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/fixtures/blobs");
        let mut blobs: Vec<Vec<u8>> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| std::fs::read(e.unwrap().path()).unwrap())
            .collect();
        blobs.extend([DIGITS, VIBRATION, VIB_F32, TANH].map(<[u8]>::to_vec));
        assert!(blobs.len() >= 6);
        for b in &blobs {
            assert_ne!((input_len(b), output_len(b)), (0, 0));
            match Model::parse(b) {
                Ok(m) => {
                    assert_eq!(input_len(b), m.input_len());
                    assert_eq!(output_len(b), m.output_len());
                }
                // The int8-only build refuses f32 blobs; the widths are still read.
                Err(crate::FormatError::F32NotBuiltIn) if !cfg!(feature = "f32") => {}
                // So does a build without `int4` refuse int4 blobs.
                Err(crate::FormatError::Int4NotBuiltIn { .. }) if !cfg!(feature = "int4") => {}
                // And a build without `int16-input` an int16-input blob.
                Err(crate::FormatError::Int16InputNotBuiltIn) if !cfg!(feature = "int16-input") => {
                }
                Err(e) => panic!("{e}"),
            }
        }
    }

    #[test]
    fn not_a_blob_or_cut_short_gives_zero() {
        assert_eq!((input_len(&[]), output_len(&[])), (0, 0));
        assert_eq!(input_len(b"PK\x03\x04 not a model, long enough"), 0);
        assert_eq!(output_len(b"PK\x03\x04 not a model, long enough"), 0);
        // Every cut of a real blob short of its last layer reads 0, never a wrong width or a
        // panic (the walk is bounds-checked).
        let b = VIBRATION;
        for n in 0..b.len() {
            let out = output_len(&b[..n]);
            assert!(out == 0 || out == output_len(b), "cut at {n}: {out}");
        }
        assert_eq!(input_len(&b[..HEADER_LEN]), 0);
        // A sigmoid-sized answer is never invented: an 0xFF run is an unterminated varint.
        let mut junk = b[..HEADER_LEN].to_vec();
        junk.extend([0xFF; 12]);
        assert_eq!((input_len(&junk), output_len(&junk)), (0, 0));
    }
}
