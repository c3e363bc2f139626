//! Post-training int8 quantisation of a [`FloatModel`]: symmetric per-channel weights, int32
//! biases with the input zero point folded in, asymmetric per-tensor activations from a
//! calibration set, fixed-point requantisation multipliers (Jacob et al., 2018), and integer
//! tables for raw integer inputs. Each layer is proven free of int32 accumulator overflow.
pub mod calibrate;
pub mod params;

use anyhow::{anyhow, bail, Result};
use kinglet_runtime::format::Precision;

use crate::graph::FloatModel;
use crate::pack::table::{owned_table, wire_u32};
use calibrate::TensorRange;
use kinglet_builder::{OwnedInput, OwnedLayer, OwnedModel, OwnedQuant};
use params::{activation_quant, decompose_multiplier, quantize_weight, weight_scale, AffineQuant};

/// Quantises `model` given the calibrated range of each tensor (input, then each layer output).
pub fn quantise(model: &FloatModel, ranges: &[TensorRange]) -> Result<OwnedModel> {
    if ranges.len() != model.layers.len() + 1 {
        bail!(
            "internal: {} ranges for {} tensors",
            ranges.len(),
            model.layers.len() + 1
        );
    }
    let q: Vec<AffineQuant> = ranges
        .iter()
        .map(|r| activation_quant(r.min, r.max))
        .collect();
    let mut layers = Vec::with_capacity(model.layers.len());
    for (k, l) in model.layers.iter().enumerate() {
        let (qi, qo) = match (q.get(k), q.get(k + 1)) {
            (Some(a), Some(b)) => (*a, *b),
            _ => bail!("internal: missing range for layer {k}"),
        };
        layers.push(quantise_layer(k, l, qi, qo)?);
    }
    let q_in = q
        .first()
        .copied()
        .ok_or_else(|| anyhow!("internal: no input range"))?;
    let input_quant = integer_input(model, q_in)?;
    owned_table(model, Precision::Int8, Some(input_quant), layers)
}

fn quantise_layer(
    k: usize,
    l: &crate::graph::DenseLayer,
    qi: AffineQuant,
    qo: AffineQuant,
) -> Result<OwnedLayer> {
    let mut w_q = Vec::with_capacity(l.weights.len());
    let mut bias = Vec::with_capacity(l.outputs);
    let mut weight_scales = Vec::with_capacity(l.outputs);
    let mut multipliers = Vec::with_capacity(l.outputs);
    let mut shifts = Vec::with_capacity(l.outputs);
    for (o, row) in l.weights.chunks_exact(l.inputs.max(1)).enumerate() {
        let s_w = weight_scale(row);
        let row_q: Vec<i8> = row.iter().map(|&w| quantize_weight(w, s_w)).collect();
        let acc_scale = f64::from(qi.scale) * f64::from(s_w);
        let b = f64::from(l.bias.get(o).copied().unwrap_or(0.0));
        let sum_w: i64 = row_q.iter().map(|&w| i64::from(w)).sum();
        // The bias in accumulator steps. Checked before the integer fold: a bias that is huge
        // next to the row's weights (or a tiny accumulator scale) would otherwise saturate the
        // cast and overflow the subtraction below.
        let bias_steps = (b / acc_scale).round();
        if bias_steps.is_nan() || bias_steps.abs() > f64::from(i32::MAX) {
            bail!(
                "layer {k}, output {o}: the bias {b:e} is {bias_steps:e} accumulator steps (input scale × weight scale = {acc_scale:e}), \
                 more than an int32 accumulator holds; the row's weights are tiny next to its bias, or the input's calibration range is too narrow"
            );
        }
        // Fold the input zero point: Σ w (q - z) = Σ w q - z Σ w.
        let folded = bias_steps as i64 - i64::from(qi.zero_point) * sum_w;
        let bound = folded.abs() + 128 * row_q.iter().map(|&w| i64::from(w).abs()).sum::<i64>();
        if bound > i64::from(i32::MAX) {
            bail!(
                "layer {k}, output {o}: the int32 accumulator could overflow (|bias| + 128·Σ|w| = {bound} > 2^31 - 1); \
                 the bias is too large for the input scale — check the calibration range"
            );
        }
        let (m, s) = decompose_multiplier(acc_scale / f64::from(qo.scale)).ok_or_else(|| {
            anyhow!("layer {k}, output {o}: requantisation multiplier {:e} is out of the representable range", acc_scale / f64::from(qo.scale))
        })?;
        w_q.extend(row_q);
        bias.push(folded as i32);
        weight_scales.push(s_w);
        multipliers.push(m);
        shifts.push(s);
    }
    let quant = OwnedQuant::new(
        &weight_scales,
        &multipliers,
        &shifts,
        qo.scale,
        qo.zero_point,
    );
    Ok(OwnedLayer::int8(
        wire_u32(l.inputs, "layer width")?,
        wire_u32(l.outputs, "layer width")?,
        l.activation,
        &w_q,
        &bias,
        quant,
    ))
}

/// Fixed-point tables for raw integer inputs: `q = round(a·x + b)` with `a = scale / s_in`,
/// `b = zp - offset · scale / s_in`, as `(x·mult + add + 2^(s-1)) >> s`.
fn integer_input(model: &FloatModel, q: AffineQuant) -> Result<OwnedInput> {
    let (offset, scale) = match &model.scaler {
        Some(s) => (s.offset.clone(), s.scale.clone()),
        None => (vec![0.0], vec![1.0]),
    };
    let (mut int_mult, mut int_add, mut int_shift) = (vec![], vec![], vec![]);
    for (f, (&off, &sc)) in offset.iter().zip(&scale).enumerate() {
        let a = f64::from(sc) / f64::from(q.scale);
        let b = f64::from(q.zero_point) - f64::from(off) * f64::from(sc) / f64::from(q.scale);
        let mut s = 62u8;
        while s > 0
            && (a.abs() * 2f64.powi(i32::from(s)) > f64::from(i32::MAX)
                || b.abs() * 2f64.powi(i32::from(s)) > 2f64.powi(61))
        {
            s -= 1;
        }
        let mult = (a * 2f64.powi(i32::from(s))).round();
        let add = (b * 2f64.powi(i32::from(s))).round();
        if mult.abs() > f64::from(i32::MAX) || add.abs() > 2f64.powi(62) {
            bail!(
                "feature {f}: scaler factor {sc} cannot be represented on the integer input path"
            );
        }
        int_mult.push(mult as i32);
        int_add.push(add as i64);
        int_shift.push(s);
    }
    Ok(OwnedInput::new(
        q.scale,
        q.zero_point,
        &int_mult,
        &int_add,
        &int_shift,
    ))
}
