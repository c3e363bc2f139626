//! Blobs for the runtime's integration tests, written with postcard directly (no validation),
//! so a test can hand the reader exactly the table it wants to see judged.
#![allow(dead_code)]
use kinglet_runtime::format::{
    Activation, InputQuantDesc, LayerDesc, LayerQuantDesc, ModelDesc, OutputKind, Precision,
    WeightLayout,
};
use kinglet_runtime::header::{Header, CHECKED_FROM};
use kinglet_runtime::{CHECKSUM, FORMAT_VERSION, HEADER_LEN};

/// One int8 layer, owned.
#[derive(Clone, Debug)]
pub struct Int8Layer {
    pub inputs: u32,
    pub outputs: u32,
    pub activation: Activation,
    pub weights: Vec<i8>,
    pub bias: Vec<i32>,
    pub multiplier: Vec<i32>,
    pub shift: Vec<i8>,
    pub output_scale: f32,
    pub output_zero_point: i8,
}

impl Int8Layer {
    /// A layer with the given weights (row-major `[outputs][inputs]`) and biases, multiplier
    /// 2^30 and shift `shift` on every channel.
    pub fn new(inputs: u32, weights: Vec<i8>, bias: Vec<i32>, shift: i8) -> Self {
        let outputs = bias.len() as u32;
        Int8Layer {
            inputs,
            outputs,
            activation: Activation::Linear,
            weights,
            multiplier: vec![1 << 30; bias.len()],
            shift: vec![shift; bias.len()],
            bias,
            output_scale: 0.05,
            output_zero_point: 0,
        }
    }
}

/// An int8 model with a plain input quantisation (scale 1, zero point 0, integer path identity).
#[derive(Clone, Debug)]
pub struct Int8Model {
    pub input_len: u32,
    pub input_scale: f32,
    pub input_zero_point: i8,
    pub layers: Vec<Int8Layer>,
    pub output: OutputKind,
}

impl Int8Model {
    pub fn new(input_len: u32, layers: Vec<Int8Layer>) -> Self {
        Int8Model {
            input_len,
            input_scale: 1.0,
            input_zero_point: 0,
            layers,
            output: OutputKind::Logits,
        }
    }

    /// The blob, with the arena field the runtime's planner computes.
    pub fn blob(&self) -> Vec<u8> {
        let weights: Vec<Vec<u8>> = self
            .layers
            .iter()
            .map(|l| l.weights.iter().map(|&w| w as u8).collect())
            .collect();
        let bytes = |v: &[i32]| -> Vec<u8> { v.iter().flat_map(|x| x.to_le_bytes()).collect() };
        let bias: Vec<Vec<u8>> = self.layers.iter().map(|l| bytes(&l.bias)).collect();
        let mult: Vec<Vec<u8>> = self.layers.iter().map(|l| bytes(&l.multiplier)).collect();
        let shift: Vec<Vec<u8>> = self
            .layers
            .iter()
            .map(|l| l.shift.iter().map(|&s| s as u8).collect())
            .collect();
        let wscale: Vec<Vec<u8>> = self
            .layers
            .iter()
            .map(|l| 0.01f32.to_le_bytes().repeat(l.outputs as usize))
            .collect();
        let (one_mult, zero_add) = (1i32.to_le_bytes(), 0i64.to_le_bytes());
        let mut layers = heapless::Vec::new();
        for (k, l) in self.layers.iter().enumerate() {
            let _ = layers.push(LayerDesc {
                inputs: l.inputs,
                outputs: l.outputs,
                activation: l.activation,
                layout: WeightLayout::OutputMajor,
                weights: &weights[k],
                bias: &bias[k],
                quant: Some(LayerQuantDesc {
                    weight_scale: &wscale[k],
                    multiplier: &mult[k],
                    shift: &shift[k],
                    output_scale: l.output_scale,
                    output_zero_point: l.output_zero_point,
                }),
            });
        }
        let desc = ModelDesc {
            input_len: self.input_len,
            precision: Precision::Int8,
            scaler: None,
            input_quant: Some(InputQuantDesc {
                scale: self.input_scale,
                zero_point: self.input_zero_point,
                int_mult: &one_mult,
                int_add: &zero_add,
                int_shift: &[0],
            }),
            layers,
            output: self.output,
            labels: "",
        };
        let arena = kinglet_runtime::arena::ArenaPlan::new(
            self.input_len as usize,
            self.layers.iter().map(|l| l.outputs as usize),
            1,
        )
        .total() as u32;
        raw_blob(&desc, arena)
    }
}

/// `desc` as a version-1 blob with a correct length and CRC, not validated.
pub fn raw_blob(desc: &ModelDesc<'_>, arena: u32) -> Vec<u8> {
    let body = postcard::to_allocvec(desc).expect("postcard writes to a Vec");
    let mut blob = vec![0u8; HEADER_LEN];
    blob.extend_from_slice(&body);
    let mut h = Header {
        version: FORMAT_VERSION,
        flags: 0,
        total_len: blob.len() as u32,
        crc: 0,
        arena_bytes: arena,
    };
    blob[..HEADER_LEN].copy_from_slice(&h.to_bytes());
    h.crc = CHECKSUM.checksum(&blob[CHECKED_FROM..]);
    blob[..HEADER_LEN].copy_from_slice(&h.to_bytes());
    blob
}
