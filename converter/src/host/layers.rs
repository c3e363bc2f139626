//! A validated blob's layers as plain matrices: weights `[outputs][inputs]` in row-major order
//! whatever the blob's layout (output-major, `Blocked4x4` or int4 `Nibble4x4`), biases and, for int8, the
//! requantisation parameters.
use kinglet_runtime::unstable::requant::activation_range;
use kinglet_runtime::unstable::wire::format::{Activation, LayerDesc, WeightLayout};
use kinglet_runtime::unstable::wire::{layout, nibble};

/// Little-endian 4-byte values of `bytes`.
pub(crate) fn words(bytes: &[u8]) -> impl Iterator<Item = [u8; 4]> + '_ {
    bytes.as_chunks::<4>().0.iter().copied()
}

/// The weights of `l`, one element of `elem` bytes per `(output, input)`, in row-major
/// `[outputs][inputs]` order (blocked layouts unpacked, their padding dropped).
fn elements<'a>(l: &LayerDesc<'a>, elem: usize) -> Vec<&'a [u8]> {
    let (n, m) = (l.inputs as usize, l.outputs as usize);
    match l.layout {
        WeightLayout::OutputMajor => l.weights.chunks_exact(elem).take(n * m).collect(),
        WeightLayout::Blocked4x4 => {
            let Some((_, data)) = layout::split(l.weights, n, m, elem) else {
                return Vec::new();
            };
            (0..m * n)
                .filter_map(|k| {
                    let at = layout::index(k / n, k % n, n) * elem;
                    data.get(at..at + elem)
                })
                .collect()
        }
        // int4 weights are read by `int4_weights`; as elements of bytes they have no meaning.
        WeightLayout::Nibble4x4 => Vec::new(),
    }
}

/// The int4 weights of a `Nibble4x4` layer as int8 values, row-major (padding dropped).
fn int4_weights(l: &LayerDesc<'_>) -> Vec<i8> {
    let (n, m) = (l.inputs as usize, l.outputs as usize);
    let Some((_, data)) = nibble::split(l.weights, n, m) else {
        return Vec::new();
    };
    (0..m * n)
        .filter_map(|k| nibble::get(data, k / n, k % n, n))
        .collect()
}

/// An f32 layer.
#[derive(Debug, Clone, PartialEq)]
pub struct FloatLayer {
    /// Input width.
    pub inputs: usize,
    /// Output width.
    pub outputs: usize,
    /// `[outputs][inputs]`, row-major.
    pub weights: Vec<f32>,
    /// One per output.
    pub bias: Vec<f32>,
    /// A fused ReLU.
    pub relu: bool,
    /// A pointwise activation after the affine map.
    pub pointwise: Option<kinglet_runtime::unstable::pointwise::Pointwise>,
}

impl FloatLayer {
    /// Reads an f32 layer of a validated blob.
    pub fn new(l: &LayerDesc<'_>) -> Self {
        FloatLayer {
            inputs: l.inputs as usize,
            outputs: l.outputs as usize,
            weights: elements(l, 4)
                .into_iter()
                .filter_map(|e| <[u8; 4]>::try_from(e).ok().map(f32::from_le_bytes))
                .collect(),
            bias: words(l.bias).map(f32::from_le_bytes).collect(),
            relu: l.activation == Activation::Relu,
            pointwise: l.pointwise().and_then(|p| {
                use kinglet_runtime::unstable::pointwise::{Kind, Pointwise};
                Kind::from_byte(p.kind).and_then(|k| Pointwise::from_params(k, p.data))
            }),
        }
    }
}

/// An int8 layer.
#[derive(Debug, Clone, PartialEq)]
pub struct Int8Layer {
    /// Input width.
    pub inputs: usize,
    /// Output width.
    pub outputs: usize,
    /// `[outputs][inputs]`, row-major (the int8 weights).
    pub weights: Vec<i8>,
    /// int32 biases, one per output.
    pub bias: Vec<i32>,
    /// Fixed-point multipliers, one per output.
    pub multiplier: Vec<i32>,
    /// Right shifts, one per output.
    pub shift: Vec<i8>,
    /// Output scale.
    pub output_scale: f32,
    /// Output zero point.
    pub zero_point: i8,
    /// The activation's clamp.
    pub act_min: i8,
    /// The activation's upper clamp.
    pub act_max: i8,
    /// The zero point requantisation adds: `zero_point`, or a pointwise table's input one.
    pub requant_zero_point: i8,
    /// A pointwise activation's 256-entry table (indexed by the requantised value + 128).
    pub table: Option<Vec<u8>>,
}

impl Int8Layer {
    /// Reads an int8 layer of a validated blob; `None` for an f32 layer.
    pub fn new(l: &LayerDesc<'_>) -> Option<Self> {
        let q = l.quant.as_ref()?;
        let weights = match l.layout {
            WeightLayout::Nibble4x4 => int4_weights(l),
            _ => elements(l, 1)
                .into_iter()
                .filter_map(|e| e.first().copied())
                .map(|b| match l.layout {
                    WeightLayout::Blocked4x4 => layout::decode_i8(b),
                    _ => b as i8,
                })
                .collect(),
        };
        let (act_min, act_max) = activation_range(l.activation, q.output_zero_point);
        let outputs = l.outputs as usize;
        // One shift per output, or one for the whole layer.
        let shift = (0..outputs)
            .map(|o| q.shift.get(o).or(q.shift.first()).map_or(0, |&s| s as i8))
            .collect();
        Some(Int8Layer {
            inputs: l.inputs as usize,
            outputs,
            weights,
            bias: words(l.bias).map(i32::from_le_bytes).collect(),
            multiplier: words(q.multiplier).map(i32::from_le_bytes).collect(),
            shift,
            output_scale: q.output_scale,
            zero_point: q.output_zero_point,
            act_min,
            act_max,
            requant_zero_point: l
                .pointwise()
                .map_or(q.output_zero_point, |p| p.input_zero_point),
            table: l.pointwise().map(|p| p.data.to_vec()),
        })
    }

    /// The largest `Σ_i |w_oi| · 128` over the outputs: no partial sum of a dot product with
    /// int8 inputs exceeds it in magnitude.
    pub fn dot_bound(&self) -> u64 {
        self.weights
            .chunks(self.inputs.max(1))
            .map(|row| {
                row.iter()
                    .map(|&w| u64::from(w.unsigned_abs()))
                    .sum::<u64>()
                    * 128
            })
            .max()
            .unwrap_or(0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use kinglet_runtime::Model;

    #[test]
    fn blocked_and_output_major_read_the_same_matrix() {
        let owned = kinglet_builder::sample::tiny_int8();
        let blob = owned.encode_to_vec().unwrap();
        let mut blocked = owned.clone();
        for l in &mut blocked.layers {
            l.weights = kinglet_builder::blocked::weights_in(
                kinglet_runtime::Precision::Int8,
                l,
                WeightLayout::Blocked4x4,
            )
            .unwrap();
            l.layout = WeightLayout::Blocked4x4;
        }
        let bblob = blocked.encode_to_vec().unwrap();
        let (a, b) = (Model::parse(&blob).unwrap(), Model::parse(&bblob).unwrap());
        let la: Vec<_> = a.layers().filter_map(|l| Int8Layer::new(l.desc)).collect();
        let lb: Vec<_> = b.layers().filter_map(|l| Int8Layer::new(l.desc)).collect();
        assert_eq!(la.len(), 2);
        assert_eq!(la, lb);
        let first = &owned.layers[0];
        let want: Vec<i8> = first.weights.iter().map(|&w| w as i8).collect();
        assert_eq!(la[0].weights, want);
    }
}
