//! Int8 test models for the runtime's integration tests, written without validation
//! (`OwnedModel::raw_blob`), so a test can hand the reader exactly the table it wants judged.
#![allow(dead_code)]
use kinglet_builder::{
    Activation, OutputKind, OwnedInput, OwnedLayer, OwnedModel, OwnedQuant, Precision,
};

/// An int8 layer with the given weights (row-major `[outputs][inputs]`) and biases, multiplier
/// 2^30 and shift `shift` on every channel, output scale 0.05 and zero point 0.
pub fn int8_layer(inputs: u32, weights: &[i8], bias: &[i32], shift: i8) -> OwnedLayer {
    let n = bias.len();
    let quant = OwnedQuant::new(&vec![0.01; n], &vec![1 << 30; n], &vec![shift; n], 0.05, 0);
    OwnedLayer::int8(inputs, n as u32, Activation::Linear, weights, bias, quant)
}

/// An int8 model with a plain input quantisation (scale 1, zero point 0, integer path
/// identity) and logits out.
pub fn int8_model(input_len: u32, layers: Vec<OwnedLayer>) -> OwnedModel {
    OwnedModel {
        input_len,
        precision: Precision::Int8,
        scaler: None,
        input_quant: Some(OwnedInput::new(1.0, 0, &[1], &[0], &[0])),
        layers,
        output: OutputKind::Logits,
        labels: String::new(),
    }
}

/// The int8 parameters of `l` (every layer of [`int8_layer`] has them).
pub fn quant(l: &mut OwnedLayer) -> &mut OwnedQuant {
    l.quant.as_mut().expect("an int8 layer")
}
