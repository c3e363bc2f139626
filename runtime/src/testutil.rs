//! Owned test models that encode into blobs (tests only).
use crate::encode::{encode, max_encoded_len};
use crate::format::*;

pub(crate) fn i32s(v: &[i32]) -> Vec<u8> {
    v.iter().flat_map(|x| x.to_le_bytes()).collect()
}
pub(crate) fn f32s(v: &[f32]) -> Vec<u8> {
    v.iter().flat_map(|x| x.to_le_bytes()).collect()
}
pub(crate) fn i8s(v: &[i8]) -> Vec<u8> {
    v.iter().map(|&x| x as u8).collect()
}

#[derive(Clone)]
pub(crate) struct OwnedQuant {
    pub weight_scale: Vec<u8>,
    pub multiplier: Vec<u8>,
    pub shift: Vec<u8>,
    pub output_scale: f32,
    pub output_zero_point: i8,
}

#[derive(Clone)]
pub(crate) struct OwnedLayer {
    pub inputs: u32,
    pub outputs: u32,
    pub activation: Activation,
    pub weights: Vec<u8>,
    pub bias: Vec<u8>,
    pub quant: Option<OwnedQuant>,
}

#[derive(Clone)]
pub(crate) struct OwnedInput {
    pub scale: f32,
    pub zero_point: i8,
    pub int_mult: Vec<u8>,
    pub int_add: Vec<u8>,
    pub int_shift: Vec<u8>,
}

#[derive(Clone)]
pub(crate) struct OwnedModel {
    pub input_len: u32,
    pub precision: Precision,
    pub scaler: Option<(Vec<u8>, Vec<u8>)>,
    pub input_quant: Option<OwnedInput>,
    pub layers: Vec<OwnedLayer>,
    pub output: OutputKind,
    pub labels: String,
}

impl OwnedModel {
    pub fn desc(&self) -> ModelDesc<'_> {
        let mut layers = heapless::Vec::new();
        for l in &self.layers {
            let _ = layers.push(LayerDesc {
                inputs: l.inputs,
                outputs: l.outputs,
                activation: l.activation,
                layout: WeightLayout::OutputMajor,
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

    pub fn blob(&self) -> Vec<u8> {
        let d = self.desc();
        let mut out = vec![0u8; max_encoded_len(&d)];
        let n = encode(&d, &mut out).expect("test model encodes");
        out.truncate(n);
        out
    }
}

/// 3 inputs (scaled by (x - 1) * 0.5) → 4 ReLU → 2 softmax, int8, labels "off\non".
pub(crate) fn tiny_int8() -> OwnedModel {
    let half = 1 << 30;
    OwnedModel {
        input_len: 3,
        precision: Precision::Int8,
        scaler: Some((f32s(&[1.0]), f32s(&[0.5]))),
        input_quant: Some(OwnedInput {
            scale: 0.05,
            zero_point: -10,
            // q = round(((x - 1) * 0.5) / 0.05) - 10 = 10x - 20 (in fixed point, shift 4)
            int_mult: i32s(&[160]),
            int_add: (-320i64).to_le_bytes().to_vec(),
            int_shift: vec![4],
        }),
        layers: vec![
            OwnedLayer {
                inputs: 3,
                outputs: 4,
                activation: Activation::Relu,
                weights: i8s(&[1, 2, 3, -4, 5, -6, 7, 8, -9, 10, 11, 12]),
                bias: i32s(&[10, -20, 30, 400]),
                quant: Some(OwnedQuant {
                    weight_scale: f32s(&[0.01; 4]),
                    multiplier: i32s(&[half; 4]),
                    shift: vec![1; 4],
                    output_scale: 0.02,
                    output_zero_point: -5,
                }),
            },
            OwnedLayer {
                inputs: 4,
                outputs: 2,
                activation: Activation::Linear,
                weights: i8s(&[10, -20, 30, -40, -50, 60, -70, 80]),
                bias: i32s(&[-100, 100]),
                quant: Some(OwnedQuant {
                    weight_scale: f32s(&[0.01; 2]),
                    multiplier: i32s(&[half + 12345; 2]),
                    shift: vec![6, 7],
                    output_scale: 0.1,
                    output_zero_point: 2,
                }),
            },
        ],
        output: OutputKind::Softmax,
        labels: "off\non".into(),
    }
}

/// 2 inputs → 3 ReLU → 1 sigmoid, f32, no scaler.
pub(crate) fn tiny_f32() -> OwnedModel {
    OwnedModel {
        input_len: 2,
        precision: Precision::F32,
        scaler: None,
        input_quant: None,
        layers: vec![
            OwnedLayer {
                inputs: 2,
                outputs: 3,
                activation: Activation::Relu,
                weights: f32s(&[1.0, -1.0, 0.5, 0.5, -2.0, 1.0]),
                bias: f32s(&[0.0, 0.1, 0.2]),
                quant: None,
            },
            OwnedLayer {
                inputs: 3,
                outputs: 1,
                activation: Activation::Linear,
                weights: f32s(&[1.0, 2.0, -1.0]),
                bias: f32s(&[-0.5]),
                quant: None,
            },
        ],
        output: OutputKind::Sigmoid,
        labels: String::new(),
    }
}

/// Encodes without validation, with a correct checksum and the given arena field, so tests can
/// hand the reader layer tables the encoder would refuse.
pub(crate) fn raw_blob(desc: &ModelDesc<'_>, arena: u32) -> Vec<u8> {
    use crate::header::{Header, CHECKED_FROM, CHECKSUM, FORMAT_VERSION, HEADER_LEN};
    let body = postcard::to_allocvec_fallback(desc);
    let mut out = vec![0u8; HEADER_LEN];
    out.extend_from_slice(&body);
    let mut h = Header {
        version: FORMAT_VERSION,
        flags: 0,
        total_len: out.len() as u32,
        crc: 0,
        arena_bytes: arena,
    };
    out[..HEADER_LEN].copy_from_slice(&h.to_bytes());
    h.crc = CHECKSUM.checksum(&out[CHECKED_FROM..]);
    out[..HEADER_LEN].copy_from_slice(&h.to_bytes());
    out
}

mod postcard {
    /// postcard's `to_allocvec` needs its `alloc` feature; tests serialise into a big buffer.
    pub fn to_allocvec_fallback<T: serde::Serialize>(v: &T) -> Vec<u8> {
        let mut buf = vec![0u8; 1 << 20];
        let n = ::postcard::to_slice(v, &mut buf).expect("fits").len();
        buf.truncate(n);
        buf
    }
}
