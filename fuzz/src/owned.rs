//! An owned, freely editable copy of a layer table, and a raw encoder that writes it into a blob
//! *without* the encoder's validation (so mutated tables reach `Model::parse`), with a correct
//! length and CRC so that the checksum does not stop them at the door.
use kinglet_runtime::format::{
    Activation, InputQuantDesc, LayerDesc, LayerQuantDesc, ModelDesc, OutputKind, Precision,
    ScalerDesc, WeightLayout, MAX_LAYERS,
};
use kinglet_runtime::header::{Header, CHECKED_FROM};
use kinglet_runtime::{CHECKSUM, FORMAT_VERSION, HEADER_LEN};

/// int8 parameters of one layer, as wire bytes.
#[derive(Debug, Clone, PartialEq)]
pub struct OwnedQuant {
    /// `outputs` f32 weight scales.
    pub weight_scale: Vec<u8>,
    /// `outputs` i32 multipliers.
    pub multiplier: Vec<u8>,
    /// `outputs` i8 shifts.
    pub shift: Vec<u8>,
    /// Output scale.
    pub output_scale: f32,
    /// Output zero point.
    pub output_zero_point: i8,
}

/// One layer, as wire bytes.
#[derive(Debug, Clone, PartialEq)]
pub struct OwnedLayer {
    /// Input width.
    pub inputs: u32,
    /// Output width.
    pub outputs: u32,
    /// Activation.
    pub activation: Activation,
    /// Order of the weights.
    pub layout: WeightLayout,
    /// Weights (i8 or f32 LE).
    pub weights: Vec<u8>,
    /// Bias (i32 or f32 LE).
    pub bias: Vec<u8>,
    /// int8 parameters.
    pub quant: Option<OwnedQuant>,
}

/// Input quantisation, as wire bytes.
#[derive(Debug, Clone, PartialEq)]
pub struct OwnedInput {
    /// Scale.
    pub scale: f32,
    /// Zero point.
    pub zero_point: i8,
    /// i32 multipliers.
    pub int_mult: Vec<u8>,
    /// i64 addends.
    pub int_add: Vec<u8>,
    /// u8 shifts.
    pub int_shift: Vec<u8>,
}

/// A whole layer table.
#[derive(Debug, Clone, PartialEq)]
pub struct OwnedModel {
    /// Raw input width.
    pub input_len: u32,
    /// Precision.
    pub precision: Precision,
    /// Scaler offset and scale bytes.
    pub scaler: Option<(Vec<u8>, Vec<u8>)>,
    /// Input quantisation.
    pub input_quant: Option<OwnedInput>,
    /// Layers (at most [`MAX_LAYERS`] are encoded).
    pub layers: Vec<OwnedLayer>,
    /// Output function.
    pub output: OutputKind,
    /// Labels joined by `\n`.
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
            }),
            layers: d
                .layers
                .iter()
                .map(|l| OwnedLayer {
                    inputs: l.inputs,
                    outputs: l.outputs,
                    activation: l.activation,
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
                })
                .collect(),
            output: d.output,
            labels: d.labels.to_string(),
        }
    }

    /// A borrowed table (the first [`MAX_LAYERS`] layers).
    pub fn desc(&self) -> ModelDesc<'_> {
        let mut layers = heapless::Vec::<LayerDesc<'_>, MAX_LAYERS>::new();
        for l in self.layers.iter().take(MAX_LAYERS) {
            let _ = layers.push(LayerDesc {
                inputs: l.inputs,
                outputs: l.outputs,
                activation: l.activation,
                layout: l.layout,
                weights: &l.weights,
                bias: &l.bias,
                quant: l.quant.as_ref().map(|q| LayerQuantDesc {
                    weight_scale: &q.weight_scale,
                    multiplier: &q.multiplier,
                    shift: &q.shift,
                    output_scale: q.output_scale,
                    output_zero_point: q.output_zero_point,
                }),
            });
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
            }),
            layers,
            output: self.output,
            labels: &self.labels,
        }
    }

    /// The arena bytes the (possibly invalid) table would need: the runtime's own planner.
    pub fn planned_arena(&self) -> u32 {
        let elem = self.precision.activation_bytes();
        let plan = kinglet_runtime::arena::ArenaPlan::new(
            self.input_len as usize,
            self.layers
                .iter()
                .take(MAX_LAYERS)
                .map(|l| l.outputs as usize),
            elem,
        );
        u32::try_from(plan.total()).unwrap_or(u32::MAX)
    }
}

/// Serialises `desc` as a version-1 blob with header arena field `arena`, a correct total length
/// and a correct CRC, without validating anything.
pub fn raw_blob(desc: &ModelDesc<'_>, arena: u32) -> Vec<u8> {
    let body = postcard::to_allocvec(desc).unwrap_or_default();
    let mut blob = vec![0u8; HEADER_LEN];
    blob.extend_from_slice(&body);
    seal(&mut blob, arena);
    blob
}

/// Rewrites the header of `blob` (at least [`HEADER_LEN`] bytes) so that its magic, version,
/// flags, length and CRC are right, with arena field `arena`.
pub fn seal(blob: &mut [u8], arena: u32) {
    if blob.len() < HEADER_LEN {
        return;
    }
    let mut h = Header {
        version: FORMAT_VERSION,
        flags: 0,
        total_len: u32::try_from(blob.len()).unwrap_or(u32::MAX),
        crc: 0,
        arena_bytes: arena,
    };
    blob[..HEADER_LEN].copy_from_slice(&h.to_bytes());
    h.crc = CHECKSUM.checksum(&blob[CHECKED_FROM..]);
    blob[..HEADER_LEN].copy_from_slice(&h.to_bytes());
}
