//! The owned layer table: every field of `kinglet_runtime::unstable::wire::format::ModelDesc` (`FORMAT.md` §3),
//! tensors as wire bytes that a test or a fuzz target may edit freely, lengths included.
use kinglet_runtime::unstable::wire::format::{
    Activation as WireActivation, InputQuantDesc, InputWidth, LayerDesc, LayerQuantDesc, ModelDesc,
    OutputKind, PointwiseDesc, Precision, ScalerDesc, WeightLayout, MAX_LAYERS,
};

use crate::error::BuildError;
use crate::le;

/// int8 parameters of one layer, as wire bytes.
#[derive(Debug, Clone, PartialEq)]
pub struct OwnedQuant {
    /// `outputs` little-endian `f32` weight scales.
    pub weight_scale: Vec<u8>,
    /// `outputs` little-endian `i32` multipliers.
    pub multiplier: Vec<u8>,
    /// `outputs` `i8` shifts.
    pub shift: Vec<u8>,
    /// Output scale.
    pub output_scale: f32,
    /// Output zero point.
    pub output_zero_point: i8,
}

impl OwnedQuant {
    /// From typed values.
    pub fn new(
        weight_scale: &[f32],
        multiplier: &[i32],
        shift: &[i8],
        output_scale: f32,
        output_zero_point: i8,
    ) -> Self {
        OwnedQuant {
            weight_scale: le::f32s(weight_scale),
            multiplier: le::i32s(multiplier),
            shift: le::i8s(shift),
            output_scale,
            output_zero_point,
        }
    }
}

/// A layer's activation, owned (`FORMAT.md` §3.3): the wire enum with the pointwise record's
/// bytes in a `Vec`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Activation {
    /// No activation.
    Linear,
    /// The fused ReLU.
    Relu,
    /// A pointwise activation record (format version 4).
    Pointwise {
        /// The kind byte.
        kind: u8,
        /// int8: the zero point of the requantised values before the table; f32: 0.
        input_zero_point: i8,
        /// f32: the parameters as little-endian f32; int8: the 256-entry table.
        data: Vec<u8>,
    },
}

impl Activation {
    /// Copies a decoded layer's activation.
    pub fn from_desc(l: &LayerDesc<'_>) -> Self {
        match (l.activation, l.pointwise()) {
            (_, Some(p)) => Activation::Pointwise {
                kind: p.kind,
                input_zero_point: p.input_zero_point,
                data: p.data.to_vec(),
            },
            (WireActivation::Relu, None) => Activation::Relu,
            _ => Activation::Linear,
        }
    }

    /// The borrowed activation and its pointwise record.
    pub fn as_desc(&self) -> (WireActivation, Option<PointwiseDesc<'_>>) {
        match self {
            Activation::Linear => (WireActivation::Linear, None),
            Activation::Relu => (WireActivation::Relu, None),
            Activation::Pointwise {
                kind,
                input_zero_point,
                data,
            } => (
                WireActivation::Pointwise,
                Some(PointwiseDesc {
                    kind: *kind,
                    input_zero_point: *input_zero_point,
                    data,
                }),
            ),
        }
    }
}

/// One dense layer, as wire bytes.
#[derive(Debug, Clone, PartialEq)]
pub struct OwnedLayer {
    /// Input width.
    pub inputs: u32,
    /// Output width.
    pub outputs: u32,
    /// Activation.
    pub activation: Activation,
    /// Order of `weights`.
    pub layout: WeightLayout,
    /// Weights: `i8`, or little-endian `f32`, in `layout`.
    pub weights: Vec<u8>,
    /// Biases: little-endian `i32` or `f32`.
    pub bias: Vec<u8>,
    /// int8 parameters (int8 models only).
    pub quant: Option<OwnedQuant>,
}

impl OwnedLayer {
    /// An output-major int8 layer from typed values.
    pub fn int8(
        inputs: u32,
        outputs: u32,
        activation: Activation,
        weights: &[i8],
        bias: &[i32],
        quant: OwnedQuant,
    ) -> Self {
        OwnedLayer {
            inputs,
            outputs,
            activation,
            layout: WeightLayout::OutputMajor,
            weights: le::i8s(weights),
            bias: le::i32s(bias),
            quant: Some(quant),
        }
    }

    /// An output-major f32 layer from typed values.
    pub fn f32(
        inputs: u32,
        outputs: u32,
        activation: Activation,
        weights: &[f32],
        bias: &[f32],
    ) -> Self {
        OwnedLayer {
            inputs,
            outputs,
            activation,
            layout: WeightLayout::OutputMajor,
            weights: le::f32s(weights),
            bias: le::f32s(bias),
            quant: None,
        }
    }

    /// Copies a decoded layer.
    pub fn from_desc(l: &LayerDesc<'_>) -> Self {
        OwnedLayer {
            inputs: l.inputs,
            outputs: l.outputs,
            activation: Activation::from_desc(l),
            layout: l.layout,
            weights: l.weights.to_vec(),
            bias: l.bias.to_vec(),
            quant: l.quant.map(|q| OwnedQuant {
                weight_scale: q.weight_scale.to_vec(),
                multiplier: q.multiplier.to_vec(),
                shift: q.shift.to_vec(),
                output_scale: q.output_scale,
                output_zero_point: q.output_zero_point,
            }),
        }
    }

    /// The borrowed layer.
    pub fn as_desc(&self) -> LayerDesc<'_> {
        let (activation, record) = self.activation.as_desc();
        LayerDesc {
            inputs: self.inputs,
            outputs: self.outputs,
            activation: WireActivation::Linear,
            act_kind: 0,
            act_zero_point: 0,
            act_data: &[],
            layout: self.layout,
            weights: &self.weights,
            bias: &self.bias,
            quant: self.quant.as_ref().map(|q| LayerQuantDesc {
                weight_scale: &q.weight_scale,
                multiplier: &q.multiplier,
                shift: &q.shift,
                output_scale: q.output_scale,
                output_zero_point: q.output_zero_point,
            }),
        }
        .with_activation(activation, record)
    }
}

/// Input quantisation of an int8 model, as wire bytes.
#[derive(Debug, Clone, PartialEq)]
pub struct OwnedInput {
    /// Scale of the quantised input.
    pub scale: f32,
    /// Zero point of the quantised input.
    pub zero_point: i8,
    /// Little-endian `i32` integer-path multipliers.
    pub int_mult: Vec<u8>,
    /// Little-endian `i64` integer-path addends.
    pub int_add: Vec<u8>,
    /// `u8` integer-path shifts.
    pub int_shift: Vec<u8>,
    /// The input tensor's element type (int16: format version 7, zero point 0).
    pub width: InputWidth,
}

impl OwnedInput {
    /// From typed values.
    pub fn new(
        scale: f32,
        zero_point: i8,
        int_mult: &[i32],
        int_add: &[i64],
        int_shift: &[u8],
    ) -> Self {
        OwnedInput {
            scale,
            zero_point,
            int_mult: le::i32s(int_mult),
            int_add: le::i64s(int_add),
            int_shift: int_shift.to_vec(),
            width: InputWidth::I8,
        }
    }
}

/// A whole layer table.
#[derive(Debug, Clone, PartialEq)]
pub struct OwnedModel {
    /// Width of the raw input.
    pub input_len: u32,
    /// Precision of every layer.
    pub precision: Precision,
    /// The scaler's offset and scale bytes (little-endian `f32`).
    pub scaler: Option<(Vec<u8>, Vec<u8>)>,
    /// Input quantisation (int8 models only).
    pub input_quant: Option<OwnedInput>,
    /// The layers; a blob holds at most [`MAX_LAYERS`] (see [`OwnedModel::as_desc`]).
    pub layers: Vec<OwnedLayer>,
    /// What turns the last layer's outputs into scores.
    pub output: OutputKind,
    /// Class labels joined by `\n` (empty: none).
    pub labels: String,
}

impl OwnedModel {
    /// Copies a decoded table.
    pub fn from_desc(d: &ModelDesc<'_>) -> Self {
        OwnedModel {
            input_len: d.input_len,
            precision: d.precision,
            scaler: d.scaler.map(|s| (s.offset.to_vec(), s.scale.to_vec())),
            input_quant: d.input_quant.map(|q| OwnedInput {
                scale: q.scale,
                zero_point: q.zero_point,
                int_mult: q.int_mult.to_vec(),
                int_add: q.int_add.to_vec(),
                int_shift: q.int_shift.to_vec(),
                width: q.width,
            }),
            layers: d.layers.iter().map(OwnedLayer::from_desc).collect(),
            output: d.output,
            labels: d.labels.to_string(),
        }
    }

    /// The borrowed table. A `ModelDesc` holds at most [`MAX_LAYERS`] layers: further ones are
    /// left out here (a blob with more is written by [`crate::raw_blob_with_layers`]).
    pub fn as_desc(&self) -> ModelDesc<'_> {
        let mut layers = heapless::Vec::<LayerDesc<'_>, MAX_LAYERS>::new();
        for l in self.layers.iter().take(MAX_LAYERS) {
            let _ = layers.push(l.as_desc());
        }
        ModelDesc {
            input_len: self.input_len,
            precision: self.precision,
            scaler: self.scaler.as_ref().map(|(o, s)| ScalerDesc {
                offset: o,
                scale: s,
            }),
            input_quant: self.input_quant.as_ref().map(|q| InputQuantDesc {
                scale: q.scale,
                zero_point: q.zero_point,
                int_mult: &q.int_mult,
                int_add: &q.int_add,
                int_shift: &q.int_shift,
                width: q.width,
            }),
            layers,
            output: self.output,
            labels: &self.labels,
        }
    }

    /// Leaves out the integer input path's tables (format version 5, `FORMAT.md` §3.4): an int8
    /// blob of this table takes `f32` features only. Nothing changes on an f32 table.
    pub fn drop_integer_input(&mut self) {
        if let Some(q) = &mut self.input_quant {
            q.int_mult.clear();
            q.int_add.clear();
            q.int_shift.clear();
        }
    }

    /// Leaves out every layer's report-only weight scales (format version 5, `FORMAT.md`
    /// §3.4). Nothing changes on an f32 table.
    pub fn drop_weight_scales(&mut self) {
        for q in self.layers.iter_mut().filter_map(|l| l.quant.as_mut()) {
            q.weight_scale.clear();
        }
    }

    /// The scratch bytes the runtime's planner gives the (possibly invalid) table of
    /// [`OwnedModel::as_desc`].
    pub fn planned_scratch(&self) -> u32 {
        crate::raw::planned_scratch(&self.as_desc())
    }

    /// The valid blob of this table, weights in the layouts the layers have, through the
    /// runtime's validating encoder.
    pub fn encode_to_vec(&self) -> Result<Vec<u8>, BuildError> {
        self.fits()?;
        encode_desc(&self.as_desc())
    }

    /// The valid blob of this table with every layer's weights in `target` (converted from the
    /// layout each has); `Blocked4x4` data is aligned to a multiple of 4 within the blob
    /// ([`crate::blocked::encode_aligned`]).
    pub fn encode_in(&self, target: WeightLayout) -> Result<Vec<u8>, BuildError> {
        self.encode_layouts(&vec![target; self.layers.len()])
    }

    /// [`OwnedModel::encode_in`] with one layout per layer: layer `k` in `layouts[k]` (a layer
    /// past the end of `layouts` keeps the layout it has).
    pub fn encode_layouts(&self, layouts: &[WeightLayout]) -> Result<Vec<u8>, BuildError> {
        self.fits()?;
        let targets: Vec<WeightLayout> = self
            .layers
            .iter()
            .enumerate()
            .map(|(k, l)| layouts.get(k).copied().unwrap_or(l.layout))
            .collect();
        let data = self
            .layers
            .iter()
            .zip(&targets)
            .map(|(l, &t)| crate::blocked::weights_in(self.precision, l, t))
            .collect::<Result<Vec<_>, _>>()?;
        let blocked: Vec<bool> = targets
            .iter()
            .map(|&t| t != WeightLayout::OutputMajor)
            .collect();
        crate::blocked::encode_aligned(&data, &blocked, |fields| {
            let mut d = self.as_desc();
            for ((l, f), &t) in d.layers.iter_mut().zip(fields).zip(&targets) {
                l.layout = t;
                l.weights = f;
            }
            encode_desc(&d)
        })
    }

    /// [`OwnedModel::as_desc`] written without validation, with the scratch field
    /// [`OwnedModel::planned_scratch`] gives: see [`crate::raw_blob`].
    pub fn raw_blob(&self) -> Vec<u8> {
        crate::raw_blob(&self.as_desc(), self.planned_scratch())
    }

    fn fits(&self) -> Result<(), BuildError> {
        if self.layers.len() > MAX_LAYERS {
            return Err(BuildError::TooManyLayers(self.layers.len()));
        }
        Ok(())
    }
}

/// `desc` through the runtime's validating encoder.
fn encode_desc(desc: &ModelDesc<'_>) -> Result<Vec<u8>, BuildError> {
    use kinglet_runtime::unstable::encode::{encode, max_encoded_len};
    let mut out = vec![0u8; max_encoded_len(desc)];
    let n = encode(desc, &mut out).map_err(BuildError::Encode)?;
    out.truncate(n);
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sample::{tiny_f32, tiny_int8};

    #[test]
    fn copies_round_trip_through_blobs() {
        for m in [tiny_int8(), tiny_f32()] {
            let blob = m.encode_to_vec().unwrap();
            let parsed = kinglet_runtime::Model::parse(&blob).unwrap();
            assert_eq!(parsed.desc(), &m.as_desc());
            assert_eq!(OwnedModel::from_desc(parsed.desc()), m);
            assert_eq!(
                m.raw_blob(),
                blob,
                "a valid table: raw and validated writers agree"
            );
            assert_eq!(m.planned_scratch() as usize, parsed.scratch_bytes());
        }
    }

    #[test]
    fn sections_left_out_make_a_version_5_blob_that_reads_back() {
        let full = tiny_int8();
        let v3 = full.encode_to_vec().unwrap();
        assert_eq!(v3[4], 1);
        for (drop_int, drop_ws) in [(true, false), (false, true), (true, true)] {
            let mut m = full.clone();
            if drop_int {
                m.drop_integer_input();
            }
            if drop_ws {
                m.drop_weight_scales();
            }
            let blob = m.encode_to_vec().unwrap();
            assert_eq!(u16::from_le_bytes([blob[4], blob[5]]), 5);
            let parsed = kinglet_runtime::Model::parse(&blob).unwrap();
            assert_eq!(parsed.takes_integer_input(), !drop_int);
            assert_eq!(parsed.has_weight_scales(), !drop_ws);
            assert_eq!(OwnedModel::from_desc(parsed.desc()), m);
            let saved = 13 * usize::from(drop_int) + 4 * 6 * usize::from(drop_ws);
            assert_eq!(v3.len() - blob.len(), saved);
        }
        let mut f = tiny_f32();
        f.drop_integer_input();
        f.drop_weight_scales();
        assert_eq!(f, tiny_f32());
    }

    #[test]
    fn refuses_more_layers_than_a_blob_holds() {
        let mut m = tiny_f32();
        let square = OwnedLayer::f32(1, 1, Activation::Linear, &[1.0], &[0.0]);
        m.layers[1].outputs = 1;
        m.layers.extend(std::iter::repeat_n(square, MAX_LAYERS - 1));
        assert_eq!(m.as_desc().layers.len(), MAX_LAYERS);
        assert_eq!(
            m.encode_to_vec().unwrap_err().to_string(),
            "the model has 9 dense layers; the format holds at most 8"
        );
        assert_eq!(
            m.encode_in(WeightLayout::Blocked4x4),
            Err(BuildError::TooManyLayers(9))
        );
    }
}
