//! Owned tensors of a model about to be packed, and their encoding into a blob.
use anyhow::{anyhow, bail, Result};
use kinglet_runtime::encode::{encode, max_encoded_len};
use kinglet_runtime::format::{
    Activation, InputQuantDesc, LayerDesc, LayerQuantDesc, ModelDesc, OutputKind, Precision,
    ScalerDesc, WeightLayout, MAX_LAYERS,
};

/// Little-endian bytes of a slice of `f32`.
pub fn f32_bytes(v: &[f32]) -> Vec<u8> {
    v.iter().flat_map(|x| x.to_le_bytes()).collect()
}

/// Little-endian bytes of a slice of `i32`.
pub fn i32_bytes(v: &[i32]) -> Vec<u8> {
    v.iter().flat_map(|x| x.to_le_bytes()).collect()
}

/// Little-endian bytes of a slice of `i64`.
pub fn i64_bytes(v: &[i64]) -> Vec<u8> {
    v.iter().flat_map(|x| x.to_le_bytes()).collect()
}

/// Bytes of a slice of `i8`.
pub fn i8_bytes(v: &[i8]) -> Vec<u8> {
    v.iter().map(|&x| x as u8).collect()
}

/// int8 quantisation of one layer.
#[derive(Debug, Clone, PartialEq)]
pub struct OwnedLayerQuant {
    /// Per-channel weight scales.
    pub weight_scale: Vec<f32>,
    /// Per-channel fixed-point multipliers.
    pub multiplier: Vec<i32>,
    /// Per-channel shifts.
    pub shift: Vec<i8>,
    /// Output scale.
    pub output_scale: f32,
    /// Output zero point.
    pub output_zero_point: i8,
}

/// One layer's tensors, already in wire bytes.
#[derive(Debug, Clone, PartialEq)]
pub struct OwnedLayer {
    /// Input width.
    pub inputs: usize,
    /// Output width.
    pub outputs: usize,
    /// Activation.
    pub activation: Activation,
    /// Weight bytes (int8, or little-endian f32), output-major.
    pub weights: Vec<u8>,
    /// Bias bytes (little-endian i32 or f32).
    pub bias: Vec<u8>,
    /// int8 parameters.
    pub quant: Option<(OwnedLayerQuant, [Vec<u8>; 3])>,
}

impl OwnedLayer {
    /// An int8 layer.
    pub fn int8(
        inputs: usize,
        outputs: usize,
        activation: Activation,
        w: &[i8],
        b: &[i32],
        q: OwnedLayerQuant,
    ) -> Self {
        let bytes = [
            f32_bytes(&q.weight_scale),
            i32_bytes(&q.multiplier),
            i8_bytes(&q.shift),
        ];
        OwnedLayer {
            inputs,
            outputs,
            activation,
            weights: i8_bytes(w),
            bias: i32_bytes(b),
            quant: Some((q, bytes)),
        }
    }

    /// An f32 layer.
    pub fn f32(
        inputs: usize,
        outputs: usize,
        activation: Activation,
        w: &[f32],
        b: &[f32],
    ) -> Self {
        OwnedLayer {
            inputs,
            outputs,
            activation,
            weights: f32_bytes(w),
            bias: f32_bytes(b),
            quant: None,
        }
    }
}

/// Input quantisation of an int8 model, with the integer input tables.
#[derive(Debug, Clone, PartialEq)]
pub struct OwnedInputQuant {
    /// Scale of the quantised input.
    pub scale: f32,
    /// Zero point of the quantised input.
    pub zero_point: i8,
    /// Integer path multipliers.
    pub int_mult: Vec<i32>,
    /// Integer path addends.
    pub int_add: Vec<i64>,
    /// Integer path shifts.
    pub int_shift: Vec<u8>,
}

/// A model ready to encode.
#[derive(Debug, Clone, PartialEq)]
pub struct OwnedModel {
    /// Input width.
    pub input_len: usize,
    /// Precision.
    pub precision: Precision,
    /// Scaler offset and scale, as f32 values.
    pub scaler: Option<(Vec<f32>, Vec<f32>)>,
    /// Input quantisation (int8 only).
    pub input_quant: Option<OwnedInputQuant>,
    /// Layers.
    pub layers: Vec<OwnedLayer>,
    /// Output function.
    pub output: OutputKind,
    /// Class labels (empty: none).
    pub labels: Vec<String>,
}

fn wire_u32(v: usize, what: &str) -> Result<u32> {
    u32::try_from(v).map_err(|_| anyhow!("{what} {v} is too large for the format"))
}

impl OwnedModel {
    /// Encodes the model into a blob in the shipped weight layout, `Blocked4x4` (see
    /// [`super::layout`]); the encoder applies the reader's validation rules.
    pub fn encode(&self) -> Result<Vec<u8>> {
        self.encode_with(WeightLayout::Blocked4x4)
    }

    /// Encodes the model with every layer's weights in `target`.
    pub fn encode_with(&self, target: WeightLayout) -> Result<Vec<u8>> {
        let data = self
            .layers
            .iter()
            .map(|l| {
                super::layout::reorder(self.precision, l.inputs, l.outputs, &l.weights, target)
            })
            .collect::<Result<Vec<_>>>()?;
        let blocked = vec![target == WeightLayout::Blocked4x4; data.len()];
        super::layout::encode_aligned(&data, &blocked, |fields| self.encode_fields(target, fields))
    }

    /// Encodes with the given weight fields (already in `target`, alignment bytes included).
    fn encode_fields(&self, target: WeightLayout, fields: &[Vec<u8>]) -> Result<Vec<u8>> {
        if self.layers.len() > MAX_LAYERS {
            bail!(
                "the model has {} dense layers; the format holds at most {MAX_LAYERS}",
                self.layers.len()
            );
        }
        if let Some(bad) = self.labels.iter().find(|l| l.contains('\n')) {
            bail!("class label {bad:?} contains a line break");
        }
        let scaler_bytes = self
            .scaler
            .as_ref()
            .map(|(o, s)| (f32_bytes(o), f32_bytes(s)));
        let iq_bytes = self.input_quant.as_ref().map(|q| {
            (
                i32_bytes(&q.int_mult),
                i64_bytes(&q.int_add),
                q.int_shift.clone(),
            )
        });
        let labels = self.labels.join("\n");
        let mut layers = heapless::Vec::<LayerDesc<'_>, MAX_LAYERS>::new();
        for (k, (l, weights)) in self.layers.iter().zip(fields).enumerate() {
            let desc = LayerDesc {
                inputs: wire_u32(l.inputs, "layer width")?,
                outputs: wire_u32(l.outputs, "layer width")?,
                activation: l.activation,
                layout: target,
                weights,
                bias: &l.bias,
                quant: l.quant.as_ref().map(|(q, b)| LayerQuantDesc {
                    weight_scale: &b[0],
                    multiplier: &b[1],
                    shift: &b[2],
                    output_scale: q.output_scale,
                    output_zero_point: q.output_zero_point,
                }),
            };
            layers
                .push(desc)
                .map_err(|_| anyhow!("layer {k}: too many layers"))?;
        }
        let desc =
            ModelDesc {
                input_len: wire_u32(self.input_len, "input width")?,
                precision: self.precision,
                scaler: scaler_bytes.as_ref().map(|(o, s)| ScalerDesc {
                    offset: o,
                    scale: s,
                }),
                input_quant: self.input_quant.as_ref().zip(iq_bytes.as_ref()).map(
                    |(q, (m, a, s))| InputQuantDesc {
                        scale: q.scale,
                        zero_point: q.zero_point,
                        int_mult: m,
                        int_add: a,
                        int_shift: s,
                    },
                ),
                layers,
                output: self.output,
                labels: &labels,
            };
        let mut out = vec![0u8; max_encoded_len(&desc)];
        let n = encode(&desc, &mut out).map_err(|e| anyhow!("{e}"))?;
        out.truncate(n);
        Ok(out)
    }
}
