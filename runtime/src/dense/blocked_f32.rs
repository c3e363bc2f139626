//! What every f32 `Blocked4x4` kernel (portable, soft-float `m0`, Cortex-M4F `asm!`) shares:
//! cutting the weight field and the inputs, and finishing a block's rows (bias, ReLU, store).
//! The accumulation, which is where the kernels differ, stays in each kernel.
use super::DenseF32;
use crate::wire::layout::{self, BLOCK_ROWS};

/// A layer's blocked f32 weights without their alignment bytes, its inputs, and the bytes of
/// one 4-row block.
pub(crate) struct Cut<'a> {
    /// The padded blocks, `block_len` bytes each.
    pub data: &'a [u8],
    /// The `inputs` little-endian f32 inputs (empty if `input` is shorter).
    pub x: &'a [u8],
    /// Bytes of one block: 4 rows of the padded input width.
    pub block_len: usize,
}

/// Cuts the layer's `Blocked4x4` f32 weight field (for `outputs` rows) and `input`; `None` if
/// the field's length does not fit the shape (validation has ruled that out).
#[inline(always)]
pub(crate) fn cut<'a>(p: &DenseF32<'a>, outputs: usize, input: &'a [u8]) -> Option<Cut<'a>> {
    let (_, data) = layout::split(p.weights, p.inputs, outputs, 4)?;
    Some(Cut {
        data,
        x: input.get(..p.inputs * 4).unwrap_or(&[]),
        block_len: layout::padded(p.inputs) * BLOCK_ROWS * 4,
    })
}

/// Adds each row's bias (the next ones from `biases`) to its sum, clamps negatives to 0 when
/// `relu`, and stores the rows of `out` (up to 4).
#[inline(always)]
pub(crate) fn finish(
    acc: &[f32; BLOCK_ROWS],
    biases: &mut impl Iterator<Item = f32>,
    relu: bool,
    out: &mut [[u8; 4]],
) {
    for (o, (a, b)) in out.iter_mut().zip(acc.iter().zip(biases)) {
        let mut v = a + b;
        if relu && v < 0.0 {
            v = 0.0;
        }
        *o = v.to_le_bytes();
    }
}
