//! Views of intermediate tensors, handed to a trace callback during inference.
use crate::le;

/// The values of one tensor inside the scratch buffer.
#[derive(Debug, Clone, Copy)]
pub enum Activations<'a> {
    /// int8 values (each byte is an `i8`) with their quantisation.
    Int8 {
        /// One byte per element, reinterpret with `as i8`.
        data: &'a [u8],
        /// Scale of the tensor.
        scale: f32,
        /// Zero point of the tensor.
        zero_point: i8,
    },
    /// Little-endian int16 values (symmetric: zero point 0) with their scale: the input tensor
    /// of an int16-input model (format version 7).
    Int16 {
        /// Two bytes per element.
        data: &'a [u8],
        /// Scale of the tensor.
        scale: f32,
    },
    /// Little-endian f32 values.
    F32 {
        /// Four bytes per element.
        data: &'a [u8],
    },
}

impl Activations<'_> {
    /// Number of elements.
    pub fn len(&self) -> usize {
        match self {
            Activations::Int8 { data, .. } => data.len(),
            Activations::Int16 { data, .. } => data.len() / 2,
            Activations::F32 { data } => data.len() / 4,
        }
    }

    /// Whether the tensor is empty (never, for a validated model).
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Element `i` as a real number (dequantised for int8: `(q - zero_point) * scale`).
    pub fn real(&self, i: usize) -> Option<f32> {
        match self {
            Activations::Int8 {
                data,
                scale,
                zero_point,
            } => data
                .get(i)
                .map(|&q| (f32::from(q as i8) - f32::from(*zero_point)) * scale),
            Activations::Int16 { scale, .. } => self.int16(i).map(|q| f32::from(q) * scale),
            Activations::F32 { data } => le::f32_at(data, i),
        }
    }

    /// Element `i` of an int8 tensor.
    pub fn int8(&self, i: usize) -> Option<i8> {
        match self {
            Activations::Int8 { data, .. } => data.get(i).map(|&q| q as i8),
            Activations::Int16 { .. } | Activations::F32 { .. } => None,
        }
    }

    /// Element `i` of an int16 tensor.
    pub fn int16(&self, i: usize) -> Option<i16> {
        match self {
            Activations::Int16 { data, .. } => data
                .get(2 * i..2 * i + 2)
                .and_then(|b| <[u8; 2]>::try_from(b).ok())
                .map(i16::from_le_bytes),
            Activations::Int8 { .. } | Activations::F32 { .. } => None,
        }
    }
}

/// One step of an inference: `index` 0 is the scaled (and, for int8, quantised) input;
/// `index` k is the output of layer k (1-based), before softmax or sigmoid.
#[derive(Debug, Clone, Copy)]
pub struct Stage<'a> {
    /// 0 for the input, k for the output of the k-th layer.
    pub index: usize,
    /// The tensor's values.
    pub values: Activations<'a>,
}
