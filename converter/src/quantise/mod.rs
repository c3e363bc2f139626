//! Post-training int8 quantisation of a [`FloatModel`]: symmetric per-channel weights, int32
//! biases with the input zero point folded in, asymmetric per-tensor activations from a
//! calibration set, fixed-point requantisation multipliers (Jacob et al., 2018), and integer
//! tables for raw integer inputs. Each layer is proven free of int32 accumulator overflow.
pub mod advice;
pub mod bias_correction;
pub mod calibrate;
pub mod calibrate_stream;
pub mod least_error;
pub mod order_stats;
pub mod params;
pub mod percentile;
pub mod plausible;
pub mod raw_input;
pub mod spread;
pub mod weight_bits;

use anyhow::{anyhow, bail, Result};
use kinglet_runtime::unstable::wire::format::{InputWidth, Precision, WeightLayout};

use crate::graph::{Activation, FloatModel, Pointwise};
use crate::layer_table::builder_activation;
use crate::layer_table::{owned_table, wire_u32};
use advice::num;
use calibrate::TensorRange;
use kinglet_builder::Activation as BuilderActivation;
use kinglet_builder::{OwnedInput, OwnedLayer, OwnedModel, OwnedQuant};
use params::{
    activation_quant, decompose_multiplier, quantise_weight_bits, weight_scale_bits, AffineQuant,
};
use weight_bits::{LayerBits, WeightBits};

/// Quantises `model` given the calibrated range of each tensor (input, then each layer output).
/// A model with a pointwise activation needs [`quantise_with`] and the ranges before them.
pub fn quantise(model: &FloatModel, ranges: &[TensorRange]) -> Result<OwnedModel> {
    quantise_with(model, ranges, &[])
}

/// [`quantise`], with `pre[k]` the range of layer `k`'s values before its pointwise activation
/// (the table's input; `None` or missing for layers without one).
pub fn quantise_with(
    model: &FloatModel,
    ranges: &[TensorRange],
    pre: &[Option<TensorRange>],
) -> Result<OwnedModel> {
    quantise_bits(model, ranges, pre, LayerBits::default())
}

/// [`quantise_with`], layer `k`'s weights quantised to `bits.get(k)`: an int4 layer is written
/// in the `Nibble4x4` layout (`FORMAT.md` §3.5).
pub fn quantise_bits(
    model: &FloatModel,
    ranges: &[TensorRange],
    pre: &[Option<TensorRange>],
    bits: LayerBits,
) -> Result<OwnedModel> {
    quantise_input(model, ranges, pre, bits, InputWidth::I8)
}

/// The symmetric int16 quantisation of the input tensor over `r` (`FORMAT.md` §3.6): zero
/// point 0, scale `max(|min|, |max|) / 32767`, so both ends of the range are within the
/// tensor.
pub fn int16_input_quant(r: TensorRange) -> AffineQuant {
    let reach = f64::from(r.min.abs().max(r.max.abs())).max(1e-30);
    AffineQuant {
        scale: (reach / 32_767.0) as f32,
        zero_point: 0,
    }
}

/// [`quantise_bits`] with the input tensor of type `input`: int8 (asymmetric over `ranges[0]`)
/// or int16 (symmetric over it, [`int16_input_quant`]; a format-version-7 blob whose first
/// layer has int8 weights).
pub fn quantise_input(
    model: &FloatModel,
    ranges: &[TensorRange],
    pre: &[Option<TensorRange>],
    bits: LayerBits,
    input: InputWidth,
) -> Result<OwnedModel> {
    bits.check_layers(model.layers.len())?;
    if input == InputWidth::I16 && bits.get(0) != WeightBits::Int8 {
        bail!("an int16 input tensor needs int8 weights in layer 1 (its kernels multiply int16 by int8); give layer 1 int8 weights (e.g. --weights 0:int8,1:int4) or use --input-tensor int8");
    }
    if ranges.len() != model.layers.len() + 1 {
        bail!(
            "internal: {} ranges for {} tensors",
            ranges.len(),
            model.layers.len() + 1
        );
    }
    let q: Vec<AffineQuant> = ranges
        .iter()
        .enumerate()
        .map(|(t, r)| {
            if t == 0 && input == InputWidth::I16 {
                let q = int16_input_quant(*r);
                if !(q.scale.is_finite() && q.scale > 0.0 && (q.scale * 32_768.0).is_finite()) {
                    bail!(
                        "input: the calibrated range [{}, {}] is too wide for int16: 32,768 steps of {} overflow f32",
                        num(f64::from(r.min)),
                        num(f64::from(r.max)),
                        num(f64::from(q.scale))
                    );
                }
                return Ok(q);
            }
            let q = activation_quant(r.min, r.max);
            // The reader (FORMAT.md §5) needs every step from the zero point, up to 128 of them,
            // to stay finite in f32. We refuse more: a range whose width (255 steps) is not a
            // finite f32, which no calibration set of ordinary numbers produces.
            if !(q.scale.is_finite() && q.scale > 0.0 && (q.scale * 255.0).is_finite()) {
                bail!(
                    "{}: the calibrated range [{}, {}] is too wide for int8: its width (255 steps of {}) overflows f32",
                    calibrate::tensor_name(t),
                    num(f64::from(r.min)),
                    num(f64::from(r.max)),
                    num(f64::from(q.scale))
                );
            }
            Ok(q)
        })
        .collect::<Result<_>>()?;
    let mut layers = Vec::with_capacity(model.layers.len());
    for (k, l) in model.layers.iter().enumerate() {
        let (qi, qo) = match (q.get(k), q.get(k + 1)) {
            (Some(a), Some(b)) => (*a, *b),
            _ => bail!("internal: missing range for layer {k}"),
        };
        let table = match l.activation {
            Activation::Pointwise(p) => {
                let Some(Some(r)) = pre.get(k) else {
                    bail!("internal: layer {k} has a pointwise activation but no range before it");
                };
                let (lo, hi) = saturation_trim(&p, r.min, r.max, q[k + 1]);
                let q_pre = activation_quant(lo, hi);
                if !(q_pre.scale.is_finite()
                    && q_pre.scale > 0.0
                    && (q_pre.scale * 255.0).is_finite())
                {
                    bail!(
                        "layer {} before its {} activation: the calibrated range [{}, {}] is too wide for int8",
                        k + 1,
                        p.kind.name(),
                        num(f64::from(r.min)),
                        num(f64::from(r.max))
                    );
                }
                Some((p, q_pre))
            }
            _ => None,
        };
        // Only the first layer reads the input tensor: its accumulator bound is the int16
        // reach when the input is int16.
        let reach = if k == 0 { input.reach() } else { 128 };
        layers.push(quantise_layer(k, l, qi, qo, table, bits.get(k), reach)?);
    }
    let q_in = q
        .first()
        .copied()
        .ok_or_else(|| anyhow!("internal: no input range"))?;
    let mut input_quant = integer_input(model, q_in)?;
    input_quant.width = input;
    owned_table(model, Precision::Int8, Some(input_quant), layers)
}

/// Steps of the grid [`saturation_trim`] scans.
const TRIM_GRID: usize = 4096;

/// The part of a pointwise layer's calibrated input range `[lo, hi]` outside which the
/// quantised activation `quantise(f(x))` (onto `qo`) is constant: where `tanh`, a sigmoid or a
/// clip has saturated, more input range buys nothing, and a narrower one gives the table's
/// input finer steps. Scanned on a grid of [`TRIM_GRID`] steps from each end (a choice of
/// ours: common practice, no source, is to clip saturated ranges); values beyond the trimmed
/// range saturate in requantisation and get the end's table entry, which is the constant.
fn saturation_trim(p: &Pointwise, lo: f32, hi: f32, qo: AffineQuant) -> (f32, f32) {
    if lo.partial_cmp(&hi) != Some(std::cmp::Ordering::Less) {
        return (lo, hi);
    }
    let quant = |x: f32| {
        ((p.eval(x) / qo.scale).round_ties_even() + f32::from(qo.zero_point)).clamp(-128.0, 127.0)
    };
    let step = (f64::from(hi) - f64::from(lo)) / TRIM_GRID as f64;
    let at = |i: usize| (f64::from(lo) + step * i as f64) as f32;
    let first = quant(lo);
    let a = (1..=TRIM_GRID)
        .find(|&i| quant(at(i)) != first)
        .map_or(TRIM_GRID, |i| i - 1);
    let last = quant(hi);
    let b = (0..TRIM_GRID)
        .rev()
        .find(|&i| quant(at(i)) != last)
        .map_or(0, |i| i + 1);
    if a < b {
        (at(a), at(b))
    } else {
        (lo, hi)
    }
}

/// `q_out = quantise(f(dequantise(q_in)))` for every int8 `q_in`, in the order −128 to 127:
/// `dequantise` with the requantised tensor's `q_pre`, `f` in f32 as the runtime's f32 path
/// computes it, `quantise` as ONNX `QuantizeLinear` (round half to even, saturate) with the
/// next tensor's `qo`.
pub fn pointwise_table(p: &Pointwise, q_pre: AffineQuant, qo: AffineQuant) -> Vec<u8> {
    (-128i32..=127)
        .map(|q| {
            let x = (q - i32::from(q_pre.zero_point)) as f32 * q_pre.scale;
            let y = p.eval(x);
            let v = (y / qo.scale).round_ties_even() + f32::from(qo.zero_point);
            v.clamp(-128.0, 127.0) as i8 as u8
        })
        .collect()
}

fn quantise_layer(
    k: usize,
    l: &crate::graph::DenseLayer,
    qi: AffineQuant,
    qo: AffineQuant,
    table: Option<(Pointwise, AffineQuant)>,
    bits: WeightBits,
    reach: i64,
) -> Result<OwnedLayer> {
    // A pointwise layer requantises onto its table's input; the table maps it onto `qo`.
    let (q_req, activation) = match table {
        Some((p, q_pre)) => (
            q_pre,
            BuilderActivation::Pointwise {
                kind: p.kind as u8,
                input_zero_point: q_pre.zero_point,
                data: pointwise_table(&p, q_pre, qo),
            },
        ),
        None => (qo, builder_activation(&l.activation)),
    };
    let mut w_q = Vec::with_capacity(l.weights.len());
    let mut bias = Vec::with_capacity(l.outputs);
    let mut weight_scales = Vec::with_capacity(l.outputs);
    let mut multipliers = Vec::with_capacity(l.outputs);
    let mut shifts = Vec::with_capacity(l.outputs);
    for (o, row) in l.weights.chunks_exact(l.inputs.max(1)).enumerate() {
        let b = f64::from(l.bias.get(o).copied().unwrap_or(0.0));
        // Widened for a row of negligible weights ([`params::scale_floor`]).
        let s_w = weight_scale_bits(row, bits).max(params::scale_floor(b, qi.scale, q_req.scale));
        let row_q: Vec<i8> = row
            .iter()
            .map(|&w| quantise_weight_bits(w, s_w, bits))
            .collect();
        let acc_scale = f64::from(qi.scale) * f64::from(s_w);
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
        let bound = folded.abs() + reach * row_q.iter().map(|&w| i64::from(w).abs()).sum::<i64>();
        if bound > i64::from(i32::MAX) && reach > 128 {
            bail!(
                "layer {k}, output {o}: with an int16 input the int32 accumulator could overflow (|bias| + 32768·Σ|w| = {bound} > 2^31 - 1): \
                 the layer is too wide for an int16 input; use --input-tensor int8"
            );
        }
        if bound > i64::from(i32::MAX) {
            bail!(
                "layer {k}, output {o}: the int32 accumulator could overflow (|bias| + 128·Σ|w| = {bound} > 2^31 - 1); \
                 the bias is too large for the input scale — check the calibration range"
            );
        }
        let real = acc_scale / f64::from(q_req.scale);
        let (m, s) = decompose_multiplier(real).ok_or_else(|| {
            anyhow!(
                "layer {k}, output {o}: requantisation multiplier {real:e} (input scale {:e} × weight scale {s_w:e} / output scale {:e}) \
                 is outside [2^-32, 2^31), the range a shift of -31 to 31 covers; the calibrated ranges of the layer's input and output are too far apart",
                qi.scale,
                q_req.scale
            )
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
    let mut layer = OwnedLayer::int8(
        wire_u32(l.inputs, "layer width")?,
        wire_u32(l.outputs, "layer width")?,
        activation,
        &w_q,
        &bias,
        quant,
    );
    if bits == WeightBits::Int4 {
        // Output-major int8 values in [-7, 7]; the builder packs them two per byte.
        layer.weights = kinglet_builder::blocked::reorder(
            Precision::Int8,
            layer.inputs,
            layer.outputs,
            &layer.weights,
            WeightLayout::Nibble4x4,
        )?;
        layer.layout = WeightLayout::Nibble4x4;
    }
    Ok(layer)
}

/// Fixed-point tables for raw integer inputs: `q = round(a·x + b)` with `a = scale / s_in`,
/// `b = zp - offset · scale / s_in`, as `(x·mult + add + 2^(s-1)) >> s` (the runtime
/// saturates the result to the tensor's `width`).
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::graph::DenseLayer;
    use crate::graph::{Activation, OutputKind};

    fn identity() -> FloatModel {
        FloatModel {
            input_len: 2,
            scaler: None,
            layers: vec![DenseLayer {
                inputs: 2,
                outputs: 2,
                weights: vec![1.0, 0.0, 0.0, 1.0],
                bias: vec![0.0, 0.0],
                activation: Activation::Linear,
            }],
            output: OutputKind::Softmax,
            labels: vec![],
        }
    }

    fn r(min: f32, max: f32) -> TensorRange {
        TensorRange { min, max }
    }

    #[test]
    fn a_range_wider_than_f32_is_refused() {
        assert!(quantise(&identity(), &[r(-1.0, 1.0), r(-1.0, 1.0)]).is_ok());
        // [-3e38, 3e38]: steps of 6e38 / 255 = 2.35e36, a width that is not an f32.
        let e = quantise(&identity(), &[r(-3e38, 3e38), r(-1.0, 1.0)]).unwrap_err();
        assert_eq!(
            e.to_string(),
            "input: the calibrated range [-3.00e38, 3.00e38] is too wide for int8: its width (255 steps of 2.35e36) overflows f32"
        );
        let wide = r(-f32::MAX, f32::MAX);
        let e = quantise(&identity(), &[r(-1.0, 1.0), wide]).unwrap_err();
        assert!(e.to_string().starts_with("layer 1 output: "), "{e}");
        // Just inside: a width of f32::MAX is still an f32.
        let max = r(0.0, f32::MAX);
        assert!(quantise(&identity(), &[max, max]).is_ok());
    }

    #[test]
    fn a_multiplier_out_of_range_names_the_scales() {
        // Input steps of 2e6/255, weight steps of 1/127, output steps of 1e-6/255: the
        // multiplier (2e6/255)(1/127) / (1e-6/255) = 2e12/127 ≈ 1.57e10 is past 2^31.
        let e = quantise(&identity(), &[r(-1e6, 1e6), r(0.0, 1e-6)]).unwrap_err();
        let m = e.to_string();
        assert!(
            m.starts_with("layer 0, output 0: requantisation multiplier 1.57"),
            "{m}"
        );
        assert!(m.contains("is outside [2^-32, 2^31)"), "{m}");
    }
}
